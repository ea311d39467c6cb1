//! The integration test binary: reference checks, CLI tests, property tests.

mod cli;
mod plan;
mod plots;
mod properties;
mod reference;
mod regression;
mod sites;
mod util;
