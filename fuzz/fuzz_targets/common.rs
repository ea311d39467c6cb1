//! Shared by the fuzz targets: settings from a selector byte, and the check
//! that every reported number is finite.

use pondus::effect::{ColumnMap, Measure};
use pondus::fit::FitSettings;
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
            inference: if sel & 0x40 != 0 {
                Inference::Z
            } else {
                Inference::Kh
            },
            level: 0.95,
        },
        predictions: vec![],
        interpret: Default::default(),
        diagnostics: Default::default(),
        dependence: Default::default(),
        answers: Default::default(),
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
        r.average.mean.estimate,
        r.average.mean.se,
        r.average.mean.ci.ci_low,
        r.average.mean.ci.ci_high,
    ];
    // A prediction interval is absent (NaN, null in JSON) by design when
    // k − p − 1 < 1; otherwise both ends are finite.
    let pi = &r.average.mean.pi;
    if !(pi.pi_low.is_nan() && pi.pi_high.is_nan()) {
        xs.extend([pi.pi_low, pi.pi_high]);
    }
    xs.extend(r.tau2.ci.ci_low);
    xs.extend(r.tau2.ci.ci_high);
    for c in &r.coefficients {
        xs.extend([
            c.contrast.estimate,
            c.contrast.se,
            c.contrast.ci.ci_low,
            c.contrast.ci.ci_high,
            c.contrast.test.statistic,
        ]);
        assert!(
            (0.0..=1.0).contains(&c.contrast.test.p),
            "p = {} outside [0, 1]",
            c.contrast.test.p
        );
    }
    if let Some(t) = &r.moderator_test {
        xs.push(t.statistic);
        assert!((0.0..=1.0).contains(&t.p), "omnibus p = {}", t.p);
    }
    for s in r.studies.iter() {
        xs.extend([s.effect, s.variance, s.weight, s.fitted, s.residual]);
    }
    for (i, x) in xs.iter().enumerate() {
        assert!(x.is_finite(), "reported number #{i} is {x}");
    }
    assert!(r.tau2.estimate >= 0.0);
}

/// The `fit_csv` target: the first byte selects the measure and the
/// options, the rest is a CSV file run through the whole `fit` job with no,
/// one and two moderators.
pub fn fit_csv(data: &[u8]) {
    let Some((&sel, csv)) = data.split_first() else {
        return;
    };
    let measure = MEASURES[(sel as usize >> 3) % MEASURES.len()];
    for moderators in [&[][..], &["m"][..], &["m", "g"][..]] {
        let s = settings(measure, sel, moderators);
        if let Ok(report) = pondus::fit::run(&s, "fuzz.csv", csv) {
            assert_finite(&report);
        }
    }
}

/// The `fit_numbers` target: the first byte selects the options, the rest
/// is read as rows of three f64 bit patterns (effect, variance, moderator),
/// printed in full precision into a CSV file and fitted.
pub fn fit_numbers(data: &[u8]) {
    let Some((&sel, rest)) = data.split_first() else {
        return;
    };
    let mut csv = String::from("study,effect,variance,m\n");
    for (i, row) in rest.chunks_exact(24).take(200).enumerate() {
        let f = |j: usize| f64::from_le_bytes(row[8 * j..8 * j + 8].try_into().unwrap());
        csv.push_str(&format!("s{i},{:e},{:e},{:e}\n", f(0), f(1), f(2)));
    }
    for moderators in [&[][..], &["m"][..]] {
        let s = settings(Measure::Effect, sel, moderators);
        if let Ok(report) = pondus::fit::run(&s, "fuzz.csv", csv.as_bytes()) {
            assert_finite(&report);
        }
    }
}

/// The `sites_csv` target: the first byte selects the model (with or
/// without w, a covariate, centring), the rest is a participant-row CSV
/// streamed through `pondus sites`; every reported number must be finite
/// and every site's n at least the rows its model needs.
pub fn sites_csv(data: &[u8]) {
    let Some((&sel, csv)) = data.split_first() else {
        return;
    };
    // Bits 3 and 4 choose a group comparison (x as two groups, y as two
    // outcomes with log-or), which takes no w or covariates.
    let effect = match (sel >> 3) & 3 {
        1 => pondus::result::SiteMeasure::Smd,
        2 => pondus::result::SiteMeasure::LogOr,
        _ => pondus::result::SiteMeasure::Slope,
    };
    let groups = effect != pondus::result::SiteMeasure::Slope;
    let settings = pondus::sites::SitesSettings {
        site: "site".into(),
        x: "x".into(),
        y: "y".into(),
        w: (sel & 1 != 0 && !groups).then(|| "w".into()),
        covariates: if sel & 2 != 0 && !groups {
            vec!["c".into()]
        } else {
            vec![]
        },
        robust: false,
        center_within: sel & 4 != 0 && !groups,
        decimal: None,
        effect,
        treat: (sel & 32 != 0).then(|| "b".into()),
        event: (sel & 64 != 0 && effect == pondus::result::SiteMeasure::LogOr).then(|| "b".into()),
    };
    let input = pondus::sites::RowInput::Stream(Box::new(csv));
    if let Ok(r) = pondus::sites::from_rows("fuzz.csv", input, &settings) {
        for s in &r.sites {
            assert!(
                s.slope.is_finite() && s.se.is_finite() && (s.se > 0.0 || s.log_or.is_some()),
                "{s:?}"
            );
            if let Some(g) = &s.smd {
                assert!(
                    g.g.is_finite() && g.var_g > 0.0 && g.var_g.is_finite(),
                    "{s:?}"
                );
                assert!(g.treat_n >= 2 && g.ctrl_n >= 2, "{s:?}");
            }
            if let Some(t) = &s.log_or {
                assert!(t.log_or.is_finite() && t.var_log_or > 0.0, "{s:?}");
                assert!(
                    t.treat_events <= t.treat_n && t.ctrl_events <= t.ctrl_n,
                    "{s:?}"
                );
            }
            assert!(s.r.is_finite() && (-1.0..=1.0).contains(&s.r), "{s:?}");
            assert!(s.mean_x.is_finite(), "{s:?}");
            if let (Some(b), Some(se)) = (s.interaction, s.interaction_se) {
                assert!(b.is_finite() && se.is_finite(), "{s:?}");
            }
        }
    }
}

/// The `fit_dependent` target: the first byte selects the options (the
/// estimator, Knapp–Hartung or z, the two- or three-level working model,
/// `--robust`, and whether `g` is a categorical moderator with a reference
/// level, `m` a numeric one, or both), the rest is a CSV file with the
/// columns study, lab, effect, variance, m, g run through the whole `fit`
/// job with `--cluster lab`. Every successful report must carry only finite
/// numbers and p-values in [0, 1].
pub fn fit_dependent(data: &[u8]) {
    use pondus::model::multilevel::{Dependence, Levels};
    let Some((&sel, csv)) = data.split_first() else {
        return;
    };
    let categorical = |reference: Option<String>| ModeratorSpec {
        name: "g".into(),
        categorical: true,
        reference,
        center: false,
    };
    let moderators: Vec<ModeratorSpec> = match (sel >> 4) & 3 {
        0 => vec![],
        1 => vec![categorical(None)],
        2 => vec![categorical(Some("b".into()))],
        _ => {
            let mut m = settings(Measure::Effect, sel, &["m"]).moderators;
            m.push(categorical(None));
            m
        }
    };
    let mut s = settings(Measure::Effect, sel, &[]);
    s.moderators = moderators;
    // REML or ML only for the three-level model; any estimator for two levels.
    let three = sel & 1 != 0;
    if three {
        s.options.method = if sel & 2 != 0 {
            Tau2Method::Ml
        } else {
            Tau2Method::Reml
        };
    }
    s.dependence = Dependence {
        cluster: Some("lab".into()),
        levels: if three { Levels::Three } else { Levels::Two },
        robust: sel & 4 != 0,
    };
    if let Ok(report) = pondus::fit::run(&s, "fuzz.csv", csv) {
        assert_finite(&report);
    }
}
