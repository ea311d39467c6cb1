//! The shareable report: one self-contained HTML page (inline CSS, inline
//! SVG pictures, the bundled font as a data URL; no scripts, no web
//! addresses), readable on a screen and on paper. A pure renderer of the
//! public results.
//!
//! Every piece of text that comes from the data (study labels, column
//! names, levels, file names, the command line) goes through [`esc`], so a
//! label such as `<script>` is shown as text. The page also declares a
//! Content-Security-Policy that allows no scripts and no fetches, so even a
//! mistake in escaping could not run anything or reach the network.
//!
//! Layout: `page` is the frame every page shares (head, style sheet,
//! escaping, the elements); `section` turns a table of sections into the
//! contents and the body; `fit`, `sites` and `plan` hold each page's table,
//! and the other files one group of sections each.

mod answers;
mod data;
mod dependence;
mod diagnostics;
mod estimates;
mod figures;
mod fit;
mod interpretation;
mod moderators;
mod one_stage;
mod page;
mod plan;
mod question;
mod reproduce;
mod section;
mod sensitivity;
mod sites;
mod spread;
mod studies;

pub use fit::fit_page;
pub use page::{esc, Provenance};
pub use plan::plan_page;
pub use sites::sites_page;
