//! The groups of numbers that many results share: a confidence interval, a
//! prediction interval, a test, an estimate with its test, a mean effect with
//! both intervals, and the same on the reading scale. Each is written into
//! its owner's JSON object with `#[serde(flatten)]`, so the keys stay those
//! of the owner (`ci_low`, `ci_high`, `pi_low`, `pi_high`, `statistic`,
//! `df`, `p`) in the order given here.

use serde::Serialize;

/// A confidence interval `{ci_low, ci_high}`; `T = Option<f64>` where an end
/// may be missing.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct Interval<T = f64> {
    /// Lower confidence limit.
    pub ci_low: T,
    /// Upper confidence limit.
    pub ci_high: T,
}

impl<T> Interval<T> {
    /// The interval from `ci_low` to `ci_high`.
    pub fn new(ci_low: T, ci_high: T) -> Self {
        Interval { ci_low, ci_high }
    }
}

impl Interval {
    /// Both ends mapped by `f` (for example to the reading scale).
    pub fn map(self, f: impl Fn(f64) -> f64) -> Self {
        Interval::new(f(self.ci_low), f(self.ci_high))
    }
}

/// A prediction interval for a new study's true effect `{pi_low, pi_high}`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct PredictionInterval {
    /// Lower end.
    pub pi_low: f64,
    /// Upper end.
    pub pi_high: f64,
}

impl PredictionInterval {
    /// The interval from `pi_low` to `pi_high`.
    pub fn new(pi_low: f64, pi_high: f64) -> Self {
        PredictionInterval { pi_low, pi_high }
    }

    /// Both ends mapped by `f` (for example to the reading scale).
    pub fn map(self, f: impl Fn(f64) -> f64) -> Self {
        PredictionInterval::new(f(self.pi_low), f(self.pi_high))
    }
}

/// A test of one quantity against 0 `{statistic, df, p}`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct Test {
    /// t (kh) or z statistic.
    pub statistic: f64,
    /// Degrees of freedom of t (null under z).
    pub df: Option<f64>,
    /// Two-sided p-value.
    pub p: f64,
}

/// A linear contrast c'β̂ with its test (no prediction interval); a
/// coefficient is the contrast that picks it out.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct ContrastTest {
    /// Estimate c'β̂ (analysis scale).
    pub estimate: f64,
    /// Standard error √(c' Cov c).
    pub se: f64,
    /// Confidence interval.
    #[serde(flatten)]
    pub ci: Interval,
    /// t (kh) or z statistic, its df and two-sided p.
    #[serde(flatten)]
    pub test: Test,
}

/// A predicted mean effect with its standard error, confidence interval and
/// prediction interval, on the analysis scale.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct MeanEffect {
    /// Estimate on the analysis scale.
    pub estimate: f64,
    /// Standard error of the mean effect.
    pub se: f64,
    /// Confidence interval.
    #[serde(flatten)]
    pub ci: Interval,
    /// Prediction interval for a new study's true effect.
    #[serde(flatten)]
    pub pi: PredictionInterval,
}

/// An estimate with confidence and prediction intervals.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Estimate {
    /// Estimate, standard error, confidence and prediction intervals on the analysis scale.
    #[serde(flatten)]
    pub mean: MeanEffect,
    /// The same on the reading scale (null when the same as analysed).
    pub reading: Option<Reading>,
}

/// Values on the reading scale (r or a ratio).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct Reading {
    /// Estimate.
    pub estimate: f64,
    /// Confidence interval.
    #[serde(flatten)]
    pub ci: Interval,
    /// Prediction interval.
    #[serde(flatten)]
    pub pi: PredictionInterval,
}

impl Reading {
    /// A mean effect's estimate and intervals mapped by `f` (the standard
    /// error has no reading-scale counterpart).
    pub fn of(mean: &MeanEffect, f: impl Fn(f64) -> f64) -> Self {
        Reading {
            estimate: f(mean.estimate),
            ci: mean.ci.map(&f),
            pi: mean.pi.map(&f),
        }
    }
}

/// A log-ratio coefficient shown as a ratio.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, schemars::JsonSchema)]
pub struct RatioCoefficient {
    /// exp(estimate).
    pub estimate: f64,
    /// exp(ci_low) and exp(ci_high).
    #[serde(flatten)]
    pub ci: Interval,
}

/// A moderator value in a prediction: a number or a level.
#[derive(Debug, Clone, PartialEq, Serialize, schemars::JsonSchema)]
#[serde(untagged)]
pub enum AtValue {
    /// A numeric moderator's value (original scale).
    Number(f64),
    /// A categorical moderator's level.
    Level(String),
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn flattened_groups_keep_the_keys_in_order() {
        let mean = MeanEffect {
            estimate: 1.0,
            se: 0.5,
            ci: Interval::new(0.0, 2.0),
            pi: PredictionInterval::new(-1.0, 3.0),
        };
        let e = Estimate {
            mean,
            reading: Some(Reading::of(&mean, |x| 2.0 * x)),
        };
        assert_eq!(
            serde_json::to_string(&e).unwrap(),
            "{\"estimate\":1.0,\"se\":0.5,\"ci_low\":0.0,\"ci_high\":2.0,\"pi_low\":-1.0,\
             \"pi_high\":3.0,\"reading\":{\"estimate\":2.0,\"ci_low\":0.0,\"ci_high\":4.0,\
             \"pi_low\":-2.0,\"pi_high\":6.0}}"
        );
        let c = ContrastTest {
            estimate: 1.0,
            se: 0.5,
            ci: Interval::new(0.0, 2.0),
            test: Test {
                statistic: 2.0,
                df: None,
                p: 0.05,
            },
        };
        assert_eq!(
            serde_json::to_string(&c).unwrap(),
            "{\"estimate\":1.0,\"se\":0.5,\"ci_low\":0.0,\"ci_high\":2.0,\"statistic\":2.0,\
             \"df\":null,\"p\":0.05}"
        );
    }
}
