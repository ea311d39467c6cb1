//! Shared by the fuzz targets: settings from a selector byte, and the check
//! that every reported number is finite.

use pondus::analysis::FitSettings;
use pondus::effect::{ColumnMap, Measure};
use pondus::model::design::ModeratorSpec;
use pondus::model::tau2::Tau2Method;
use pondus::model::{FitOptions, Inference};
use pondus::result::FitReport;

pub const MEASURES: [Measure; 8] = [
    Measure::Effect,
    Measure::R,
    Measure::PartialR,
    Measure::Slope,
    Measure::Smd,
    Measure::LogOr,
    Measure::LogRr,
    Measure::RiskDiff,
];

pub const METHODS: [Tau2Method; 7] = [
    Tau2Method::Reml,
    Tau2Method::Ml,
    Tau2Method::Dl,
    Tau2Method::Pm,
    Tau2Method::He,
    Tau2Method::Sj,
    Tau2Method::None,
];

pub fn settings(measure: Measure, sel: u8, moderators: &[&str]) -> FitSettings {
    FitSettings {
        measure,
        columns: ColumnMap::default(),
        label: ("study".into(), false),
        moderators: moderators
            .iter()
            .map(|m| ModeratorSpec {
                name: m.to_string(),
                categorical: false,
                reference: None,
                center: sel & 0x80 != 0,
            })
            .collect(),
        interactions: vec![],
        options: FitOptions {
            method: METHODS[(sel as usize) % METHODS.len()],
            inference: if sel & 0x40 != 0 { Inference::Z } else { Inference::Kh },
            level: 0.95,
        },
        predictions: vec![],
        dependence: Default::default(),
    }
}

/// Panics (a finding) when a successful report carries a non-finite number.
pub fn assert_finite(r: &FitReport) {
    let mut xs = vec![
        r.tau2.estimate,
        r.tau2.tau,
        r.heterogeneity.q,
        r.heterogeneity.i2,
        r.heterogeneity.h2,
        r.average.estimate,
        r.average.se,
        r.average.ci_low,
        r.average.ci_high,
        r.average.pi_low,
        r.average.pi_high,
    ];
    xs.extend(r.tau2.ci_low);
    xs.extend(r.tau2.ci_high);
    for c in &r.coefficients {
        xs.extend([c.estimate, c.se, c.ci_low, c.ci_high, c.statistic]);
        assert!((0.0..=1.0).contains(&c.p), "p = {} outside [0, 1]", c.p);
    }
    if let Some(t) = &r.moderator_test {
        xs.push(t.statistic);
        assert!((0.0..=1.0).contains(&t.p), "omnibus p = {}", t.p);
    }
    for s in &r.studies {
        xs.extend([s.effect, s.variance, s.weight, s.fitted, s.residual]);
    }
    for (i, x) in xs.iter().enumerate() {
        assert!(x.is_finite(), "reported number #{i} is {x}");
    }
    assert!(r.tau2.estimate >= 0.0);
}
