//! The flag group of `pondus fit` that asks about heterogeneity itself and
//! about single studies: shrunken estimates and the chance that a new
//! study's true effect exceeds a value.

use clap::Args;
use pondus::error::{Error, Result};
use pondus::fit::AnswerSettings;

/// Shrunken estimates, the chance of exceeding a value, ranking moderator sets.
#[derive(Debug, Args)]
#[command(next_help_heading = "Single studies, new ones and moderator sets")]
pub struct AnswerArgs {
    /// Each study's shrunken (empirical-Bayes) estimate of its own true effect, with its interval: in the JSON, the table, the reports and the forest plot.
    #[arg(long)]
    pub shrink: bool,
    /// The probability that a new study's true effect exceeds VALUE (on the reading scale: r, ratio or as analysed), at the average and at every --at point.
    #[arg(long, value_name = "VALUE", allow_hyphen_values = true)]
    pub beyond: Option<f64>,
    /// Fit every subset of the moderators (a categorical moderator or a product term as one unit) by ML and rank them by AICc, with Akaike weights, importance and model-averaged coefficients.
    #[arg(long)]
    pub all_subsets: bool,
}

impl AnswerArgs {
    /// The checked answer settings.
    ///
    /// # Errors
    /// [`Error::Usage`] for a `--beyond` value that is not a finite number.
    pub fn check(&self) -> Result<AnswerSettings> {
        if let Some(b) = self.beyond {
            if !b.is_finite() {
                return Err(Error::usage(
                    "--beyond",
                    format!("'{b}' is not a finite number; give a value such as 0.2"),
                ));
            }
        }
        Ok(AnswerSettings {
            shrink: self.shrink,
            beyond: self.beyond,
            all_subsets: self.all_subsets,
            spread_by: Vec::new(),
        })
    }
}
