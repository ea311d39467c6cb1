//! The integration test binary: reference checks, CLI tests, property tests.

mod cli;
mod diagnose;
mod plan;
mod plots;
mod properties;
mod reference;
mod regression;
mod util;
