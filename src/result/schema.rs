//! The JSON Schema of each subcommand's `--json` output, generated from the
//! result types ([`FitReport`], [`SitesReport`], [`PlanReport`]) by their
//! `schemars::JsonSchema` derives, which read the same serde attributes
//! (`flatten`, `rename`, `tag`, `skip_serializing_if`) as the JSON writer.
//!
//! The schemas follow JSON Schema draft 2020-12 and describe what pondus
//! *writes* (schemars' serialize contract): a key that is omitted when empty
//! (`skip_serializing_if`) is optional, every other key is required, and
//! `null` is allowed exactly where the field is an `Option`. Objects do not
//! set `additionalProperties`: later versions may add keys. The published
//! copies are `docs/schema/*.schema.json`; a test keeps them equal to what
//! this module generates.

use super::plan::PlanReport;
use super::{FitReport, SitesReport};
use crate::support::flag::Flag;
use schemars::generate::SchemaSettings;
use schemars::JsonSchema;
use serde_json::Value;

/// A subcommand that writes JSON with `--json`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum JsonOutput {
    /// `pondus fit`: a [`FitReport`].
    Fit,
    /// `pondus sites`: a [`SitesReport`].
    Sites,
    /// `pondus plan`: a [`PlanReport`].
    Plan,
}

impl JsonOutput {
    /// Every subcommand with JSON output.
    pub const ALL: [JsonOutput; 3] = [JsonOutput::Fit, JsonOutput::Sites, JsonOutput::Plan];

    /// The subcommand's name.
    pub fn id(self) -> &'static str {
        match self {
            JsonOutput::Fit => "fit",
            JsonOutput::Sites => "sites",
            JsonOutput::Plan => "plan",
        }
    }

    /// The name of the published schema file, e.g. `fit.schema.json`.
    pub fn file_name(self) -> String {
        format!("{}.schema.json", self.id())
    }

    /// The schema of the subcommand's `--json` output.
    pub fn schema(self) -> Value {
        match self {
            JsonOutput::Fit => fit(),
            JsonOutput::Sites => sites(),
            JsonOutput::Plan => plan(),
        }
    }

    /// The schema as the bytes of its published file: pretty-printed JSON
    /// followed by a newline.
    pub fn text(self) -> String {
        let mut text = serde_json::to_string_pretty(&self.schema())
            .expect("a schema is a JSON value with string keys");
        text.push('\n');
        text
    }
}

impl std::fmt::Display for JsonOutput {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.id())
    }
}

/// The schema of `pondus fit --json`: a [`FitReport`].
pub fn fit() -> Value {
    root::<FitReport>(
        JsonOutput::Fit,
        "The result of `pondus fit`: the random-effects model (or meta-regression) with its \
         coefficients, tests, heterogeneity, the average effect, one entry per study, and the \
         sections asked for by flags (omitted, or null, when not asked for). Estimates are on \
         the analysis scale of the measure; `reading` objects hold the reading scale.",
    )
}

/// The schema of `pondus sites --json`: a [`SitesReport`].
pub fn sites() -> Value {
    root::<SitesReport>(
        JsonOutput::Sites,
        &format!(
            "The result of `pondus sites`: one regression per site from participant rows (or a \
             moments table), the sites left out, the join with the site table, and with `{}` \
             the second-stage answers, each a complete `pondus fit` result.",
            Flag::Fit
        ),
    )
}

/// The schema of `pondus plan --json`: a [`PlanReport`].
pub fn plan() -> Value {
    root::<PlanReport>(
        JsonOutput::Plan,
        "The result of `pondus plan`: the power of the moderator test at the planned number of \
         sites, the number of sites (or participants per site) needed for a target power, and \
         the power over k.",
    )
}

/// The root schema of `T` (draft 2020-12, serialize contract) with the
/// subcommand's `$id`, title and description.
fn root<T: JsonSchema>(which: JsonOutput, description: &str) -> Value {
    let schema = SchemaSettings::draft2020_12()
        .for_serialize()
        .into_generator()
        .into_root_schema_for::<T>();
    let mut value = schema.to_value();
    let object = value
        .as_object_mut()
        .expect("the root schema of a struct is an object");
    object.insert(
        "$id".into(),
        Value::from(format!("urn:pondus:schema:{}", which.id())),
    );
    object.insert(
        "title".into(),
        Value::from(format!("pondus {} {}", which.id(), Flag::Json)),
    );
    object.insert("description".into(), Value::from(description));
    value
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn each_schema_names_its_draft_subcommand_and_root_keys() {
        for which in JsonOutput::ALL {
            let s = which.schema();
            assert_eq!(s["$schema"], "https://json-schema.org/draft/2020-12/schema");
            assert_eq!(s["$id"], format!("urn:pondus:schema:{which}"));
            assert_eq!(s["type"], "object");
            assert!(s["properties"]["notes"].is_object(), "{which}");
            assert!(which.text().ends_with("}\n"));
        }
        assert!(fit()["properties"]["coefficients"].is_object());
        assert!(sites()["properties"]["stages"].is_object());
        assert!(plan()["properties"]["k_needed_answer"].is_object());
    }

    #[test]
    fn measure_id_lists_every_measure_and_r_corrected() {
        let s = fit();
        let ids = s["$defs"]["MeasureId"]["enum"].as_array().unwrap();
        assert_eq!(ids.len(), crate::effect::Measure::ALL.len() + 1);
        assert!(ids.contains(&Value::from("r-corrected")));
        assert!(ids.contains(&Value::from("log-or")));
    }
}
