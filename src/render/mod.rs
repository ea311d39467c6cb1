//! Renderers of the results (`crate::result`): pure functions from a
//! result to text, JSON, CSV, HTML or a figure, with no computation.
//!
//! - the terminal report of a fit: [`text`] assembles it from a list of
//!   sections, each `fn(&FitReport, &layout::Ctx, &mut String)`, written in
//!   [`text`], [`multilevel`], [`interpret`], [`answers`], [`spread`] and
//!   [`diagnostics`]; the
//!   column and wrapping helpers they share are in [`layout`];
//! - [`json`] and the per-study CSV ([`table`]);
//! - the self-contained HTML pages ([`html`], one file per group of sections);
//! - the plots as SVG or PNG ([`figure`]);
//! - the terminal summary of `pondus plan` ([`plan`]);
//! - the terminal summary of `pondus sites` ([`sites`]) and its per-site
//!   effects file ([`sites_effects`]).

pub mod answers;
pub mod columns;
pub mod diagnostics;
pub mod figure;
pub mod html;
pub mod interpret;
pub mod json;
pub mod layout;
pub mod multilevel;
pub mod obtained;
pub mod one_stage;
pub mod plan;
pub mod sensitivity;
pub mod sites;
pub mod sites_effects;
pub mod spread;
pub mod table;
pub mod text;
