//! Renderers of a [`FitReport`](crate::result::FitReport): terminal text,
//! JSON and a per-study CSV. Pure functions of the result, no computation.

pub mod diagnostics;
pub mod figure;
pub mod html;
pub mod interpret;
pub mod json;
pub mod layout;
pub mod multilevel;
pub mod sites;
pub mod table;
pub mod text;
