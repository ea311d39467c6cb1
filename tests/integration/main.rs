//! The integration test binary: reference checks, CLI tests, property tests.

mod browser;
mod catalogue;
mod cli;
mod conventions;
mod determinism;
mod diagnose;
mod fuzz_corpus;
mod golden;
mod heterogeneity;
mod interpret;
mod layout;
mod multilevel;
mod plan;
mod plots;
mod properties;
mod reference;
mod regression;
mod reliability;
mod report;
mod routes;
mod safety;
mod schema;
mod selection;
mod sites;
mod spread;
mod util;
