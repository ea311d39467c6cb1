//! # pondus
//!
//! Random-effects meta-analysis and meta-regression with moderators: effect
//! sizes from per-study summaries, τ² by REML (and other estimators),
//! small-sample-correct moderator tests, heterogeneity, predictions for a
//! new study, and plain renderers of the result.
//!
//! The command-line tool `pondus` is a thin shell around this library; its
//! command-line layer lives in the binary (`src/cli/`), not here.
//!
//! ```
//! use pondus::fit::{run, FitSettings};
//! use pondus::effect::{ColumnMap, Measure};
//! use pondus::model::{FitOptions, Inference, tau2::Tau2Method};
//!
//! let csv = "study,effect,variance\nA,0.30,0.01\nB,0.10,0.02\nC,0.45,0.015\nD,0.20,0.01\n";
//! let settings = FitSettings {
//!     measure: Measure::Effect,
//!     columns: ColumnMap::default(),
//!     label: ("study".into(), false),
//!     moderators: vec![],
//!     interactions: vec![],
//!     options: FitOptions { method: Tau2Method::Reml, inference: Inference::Kh, level: 0.95 },
//!     predictions: vec![],
//!     interpret: Default::default(),
//!     diagnostics: Default::default(),
//!     dependence: Default::default(),
//!     answers: Default::default(),
//! };
//! let report = run(&settings, "example", csv.as_bytes()).unwrap();
//! assert_eq!(report.k, 4);
//! assert!(report.tau2.estimate >= 0.0);
//! ```

pub mod diagnose;
pub mod dist;
pub mod effect;
pub mod error;
pub mod fit;
pub mod input;
pub mod model;
pub mod plan;
pub mod render;
pub mod result;
pub mod sites;
pub mod sql;
pub mod support;
pub mod tolerance;

pub use error::{Error, Result};
