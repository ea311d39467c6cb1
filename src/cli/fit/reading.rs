//! The reading of the input columns of `pondus fit`: the measure, the
//! `--col` overrides, `--ci-level`, `--effect-scale`, `--convert` and
//! `--sheet`, checked into the library's column map.

use super::groups::{split_pair, InputArgs};
use clap::ValueEnum;
use pondus::effect::route::EffectReading;
use pondus::effect::{ColumnMap, Measure};
use pondus::error::{Error, Result};
use std::collections::BTreeMap;

/// The scale of `--measure effect` values as typed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum EffectScaleArg {
    /// The effects are on the analysis scale already.
    Analysis,
    /// The effects and their limits are ratios (odds, risk, hazard ratios): logged before analysis.
    Log,
}

impl InputArgs {
    /// The measure and its columns, with the `--col` overrides.
    ///
    /// # Errors
    /// [`Error::Usage`] for a malformed or repeated `--col`, or a role the measure does not read.
    pub fn columns(&self) -> Result<(Measure, ColumnMap)> {
        let measure: Measure = self.measure.into();
        let mut overrides = BTreeMap::new();
        for c in &self.col {
            let (role, header) = split_pair("--col", c, "ROLE=HEADER")?;
            if let Some(before) = overrides.insert(role.to_string(), header.to_string()) {
                return Err(Error::usage(
                    "--col",
                    format!(
                        "the role '{role}' is given twice ('{role}={before}' and '{c}'); give each role once"
                    ),
                ));
            }
        }
        let ci_level = self.ci_level.unwrap_or(0.95);
        if !(ci_level > 0.0 && ci_level < 1.0) {
            return Err(Error::usage(
                "--ci-level",
                format!(
                    "'{ci_level}' is not a confidence level; give a number between 0 and 1, e.g. 0.9 for 90% limits"
                ),
            ));
        }
        let log_scale = self.effect_scale == EffectScaleArg::Log;
        if log_scale && measure != Measure::Effect {
            return Err(Error::usage(
                "--effect-scale",
                "applies to --measure effect only; ratio measures read their ratios from the 'or' or 'rr' column",
            ));
        }
        if self.convert && !matches!(measure, Measure::Smd | Measure::R) {
            return Err(Error::usage(
                "--convert",
                "converts rows into --measure smd or --measure r only",
            ));
        }
        let reading = EffectReading {
            ci_level,
            log_scale,
            convert: self.convert,
        };
        let sheet = self.sheet.clone();
        if sheet.is_some()
            && !pondus::input::sheet::is_spreadsheet(&self.file.display().to_string())
        {
            return Err(Error::usage(
                "--sheet",
                format!(
                    "'{}' is not a spreadsheet (.xlsx, .xlsm, .xls or .ods); --sheet applies to spreadsheets only",
                    self.file.display()
                ),
            ));
        }
        let map = ColumnMap::new(measure, overrides)?
            .with_reading(reading)
            .with_sheet(sheet)
            .with_decimal(self.decimal);
        Ok((measure, map))
    }
}
