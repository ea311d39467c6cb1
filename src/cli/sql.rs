//! `pondus sql`: print the query that computes the per-site moments inside a
//! database (the input of `pondus sites --moments`).

use super::outputs::{self, Target};
use clap::Args;
use pondus::error::Result;

/// Options of `pondus sql`.
#[derive(Debug, Args)]
pub struct SqlArgs {
    /// Table or view holding the participant rows (dots separate schema parts).
    #[arg(long, value_name = "NAME")]
    pub table: String,
    /// Column of the site ids.
    #[arg(long, value_name = "COL")]
    pub site: String,
    /// Column of the predictor.
    #[arg(long, value_name = "COL")]
    pub x: String,
    /// Column of the outcome.
    #[arg(long, value_name = "COL")]
    pub y: String,
    /// Column of a participant-level moderator (adds the x·w moments).
    #[arg(long, value_name = "COL")]
    pub w: Option<String>,
    /// A covariate column (repeatable).
    #[arg(long = "covariate", value_name = "COL")]
    pub covariates: Vec<String>,
}

impl SqlArgs {
    /// The query text.
    ///
    /// # Errors
    /// [`pondus::Error::Usage`] for an unusable name.
    pub fn query(&self) -> Result<String> {
        pondus::sql::query(&pondus::sql::QuerySpec {
            table: self.table.clone(),
            site: self.site.clone(),
            x: self.x.clone(),
            y: self.y.clone(),
            w: self.w.clone(),
            covariates: self.covariates.clone(),
        })
    }
}

/// Runs `sql`: the query on standard output.
///
/// # Errors
/// [`pondus::Error::Usage`] for an unusable name; the write error of standard output.
pub fn run_sql(args: &SqlArgs) -> Result<()> {
    outputs::emit(&Target::Stdout, args.query()?.as_bytes())
}
