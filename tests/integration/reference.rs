//! Checks against sources outside the project.
//!
//! - `tests/data/reference/*.json`: an independent implementation in
//!   numpy 2.3.5 / scipy 1.16.3, cross-checked inside the generator with
//!   statsmodels 0.14.6 (`WLS` for coefficients and Knapp–Hartung SEs at the
//!   estimated τ², `combine_effects` for the DerSimonian–Laird and
//!   Paule–Mandel pooled estimates); see `tests/reference/README.md`.
//!   `.ci/run` regenerates them and fails if they drift.
//! - Published values of the BCG vaccine trials (Colditz et al. 1994,
//!   JAMA 271:698; data and results cited from memory, see the fixture).
//! - The worked example of Borenstein et al. (2009), ch. 4 (from memory).

use crate::util::{close, fit_text, repo, settings};
use pondus::effect::Measure;
use pondus::model::tau2::Tau2Method;
use pondus::model::Inference;
use pondus::result::FitReport;
use pondus::tolerance::{PUBLISHED_4DP, REFERENCE_ABS, REFERENCE_P_REL, REFERENCE_REL};
use serde_json::Value;

fn load(name: &str) -> Value {
    let text = std::fs::read_to_string(repo(&format!("tests/data/reference/{name}"))).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn num(v: &Value, what: &str) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("{what}: not a number: {v}"))
}

fn method(id: &str) -> Tau2Method {
    match id {
        "reml" => Tau2Method::Reml,
        "ml" => Tau2Method::Ml,
        "dl" => Tau2Method::Dl,
        "pm" => Tau2Method::Pm,
        "he" => Tau2Method::He,
        "sj" => Tau2Method::Sj,
        "none" => Tau2Method::None,
        other => panic!("unknown estimator {other}"),
    }
}

fn v(what: &str, a: f64, b: &Value) {
    close(what, a, num(b, what), REFERENCE_REL, REFERENCE_ABS);
}

fn p(what: &str, a: f64, b: &Value) {
    close(what, a, num(b, what), REFERENCE_P_REL, 1e-300);
}

fn check_fit(label: &str, r: &FitReport, reference: &Value) {
    v(
        &format!("{label} tau2"),
        r.tau2.estimate,
        &reference["tau2"],
    );
    match (r.tau2.ci.ci_low, &reference["tau2_ci_low"]) {
        (Some(lo), b) if !b.is_null() => {
            v(&format!("{label} tau2 ci_low"), lo, b);
            v(
                &format!("{label} tau2 ci_high"),
                r.tau2.ci.ci_high.unwrap(),
                &reference["tau2_ci_high"],
            );
        }
        (None, b) => assert!(b.is_null(), "{label}: reference has a τ² CI, pondus none"),
        (Some(_), _) => panic!("{label}: pondus has a τ² CI, the reference none"),
    }
    let coefs = reference["coefficients"].as_array().unwrap();
    assert_eq!(
        r.coefficients.len(),
        coefs.len(),
        "{label}: number of coefficients"
    );
    for (c, e) in r.coefficients.iter().zip(coefs) {
        let l = format!("{label} {}", c.term);
        assert_eq!(c.term, e["term"].as_str().unwrap(), "{l}: term name");
        v(
            &format!("{l} estimate"),
            c.contrast.estimate,
            &e["estimate"],
        );
        v(&format!("{l} se"), c.contrast.se, &e["se"]);
        v(&format!("{l} ci_low"), c.contrast.ci.ci_low, &e["ci_low"]);
        v(
            &format!("{l} ci_high"),
            c.contrast.ci.ci_high,
            &e["ci_high"],
        );
        v(
            &format!("{l} statistic"),
            c.contrast.test.statistic,
            &e["statistic"],
        );
        p(&format!("{l} p"), c.contrast.test.p, &e["p"]);
    }
    match (&r.moderator_test, &reference["moderator_test"]) {
        (None, Value::Null) => {}
        (Some(t), e) if !e.is_null() => {
            v(
                &format!("{label} omnibus statistic"),
                t.statistic,
                &e["statistic"],
            );
            v(&format!("{label} omnibus df1"), t.df1, &e["df1"]);
            match t.df2 {
                Some(d2) => v(&format!("{label} omnibus df2"), d2, &e["df2"]),
                None => assert!(e["df2"].is_null(), "{label}: df2"),
            }
            p(&format!("{label} omnibus p"), t.p, &e["p"]);
        }
        (a, b) => panic!("{label}: moderator test {a:?} vs reference {b}"),
    }
    let h = &r.heterogeneity;
    v(&format!("{label} Q"), h.q, &reference["q"]);
    v(&format!("{label} Q df"), h.df, &reference["q_df"]);
    p(&format!("{label} Q p"), h.p, &reference["q_p"]);
    v(&format!("{label} I2"), h.i2, &reference["i2"]);
    v(&format!("{label} H2"), h.h2, &reference["h2"]);
    match (h.r2, &reference["r2"]) {
        (None, Value::Null) => {}
        (Some(a), b) if !b.is_null() => v(&format!("{label} R2"), a, b),
        (a, b) => panic!("{label}: R² {a:?} vs reference {b}"),
    }
    let preds = reference["predictions"].as_array().unwrap();
    if r.coefficients.len() == 1 {
        let e = &preds[0];
        let a = &r.average;
        for (name, got) in [
            ("estimate", a.mean.estimate),
            ("se", a.mean.se),
            ("ci_low", a.mean.ci.ci_low),
            ("ci_high", a.mean.ci.ci_high),
            ("pi_low", a.mean.pi.pi_low),
            ("pi_high", a.mean.pi.pi_high),
        ] {
            v(&format!("{label} average {name}"), got, &e[name]);
        }
    } else {
        assert_eq!(r.predictions.len(), preds.len(), "{label}: predictions");
        for (pr, e) in r.predictions.iter().zip(preds) {
            for (name, got) in [
                ("estimate", pr.mean.estimate),
                ("se", pr.mean.se),
                ("ci_low", pr.mean.ci.ci_low),
                ("ci_high", pr.mean.ci.ci_high),
                ("pi_low", pr.mean.pi.pi_low),
                ("pi_high", pr.mean.pi.pi_high),
            ] {
                v(
                    &format!("{label} prediction {:?} {name}", pr.at),
                    got,
                    &e[name],
                );
            }
        }
    }
}

fn at_spec(at: &Value) -> Vec<(String, String)> {
    at.as_object()
        .unwrap()
        .iter()
        .map(|(k, v)| {
            let text = match v {
                Value::String(s) => s.clone(),
                other => other.to_string(),
            };
            (k.clone(), text)
        })
        .collect()
}

/// Every model × estimator × inference of one fixture against pondus.
fn check_dataset(name: &str, measure: Measure) -> usize {
    let fixture = load(&format!("{name}.json"));
    let csv = std::fs::read_to_string(repo(&format!("tests/data/reference/{name}.csv"))).unwrap();
    let mut checked = 0;
    for (model_name, model) in fixture["models"].as_object().unwrap() {
        let mods: Vec<&str> = model["moderators"]
            .as_array()
            .unwrap()
            .iter()
            .map(|m| m.as_str().unwrap())
            .collect();
        for (est, by_inference) in model["fits"].as_object().unwrap() {
            for (inf, reference) in by_inference.as_object().unwrap() {
                let inference = if inf == "kh" {
                    Inference::Kh
                } else {
                    Inference::Z
                };
                let mut s = settings(measure, &mods, method(est), inference);
                if !mods.is_empty() {
                    s.predictions = reference["predictions"]
                        .as_array()
                        .unwrap()
                        .iter()
                        .map(|p| at_spec(&p["at"]))
                        .collect();
                }
                let r = fit_text(&s, &csv);
                check_fit(&format!("{name}/{model_name}/{est}/{inf}"), &r, reference);
                checked += 1;
            }
        }
    }
    checked
}

#[test]
fn bcg_trials_match_independent_reference() {
    // 3 models × 7 estimators × 2 inference methods.
    assert_eq!(check_dataset("bcg", Measure::LogRr), 42);
}

#[test]
fn simulated_k20_with_categorical_moderator_matches_reference() {
    assert_eq!(check_dataset("sim_k20", Measure::Effect), 56);
}

#[test]
fn simulated_boundary_case_matches_reference() {
    let n = check_dataset("sim_k8_boundary", Measure::Effect);
    assert_eq!(n, 14);
    // REML sits exactly on the boundary there, as the reference says.
    let csv = std::fs::read_to_string(repo("tests/data/reference/sim_k8_boundary.csv")).unwrap();
    let r = fit_text(
        &settings(Measure::Effect, &[], Tau2Method::Reml, Inference::Kh),
        &csv,
    );
    assert_eq!(r.tau2.estimate, 0.0);
}

#[test]
fn bcg_published_values_from_memory() {
    // Values we recall from published analyses of the BCG data, to 4 decimals.
    // Two recalled values (ablat τ² 0.0764 and R² 75.62%) disagree with every
    // independent computation in the last digit (0.0763, 75.63%), so they are
    // checked at one unit of the last decimal; see tests/reference/README.md.
    let csv = std::fs::read_to_string(repo("tests/data/reference/bcg.csv")).unwrap();
    let r = fit_text(
        &settings(Measure::LogRr, &[], Tau2Method::Reml, Inference::Z),
        &csv,
    );
    close("tau2", r.tau2.estimate, 0.3132, 0.0, PUBLISHED_4DP);
    close(
        "estimate",
        r.average.mean.estimate,
        -0.7145,
        0.0,
        PUBLISHED_4DP,
    );
    close("se", r.average.mean.se, 0.1798, 0.0, PUBLISHED_4DP);
    close("Q", r.heterogeneity.q, 152.2330, 0.0, PUBLISHED_4DP);
    close("I2", r.heterogeneity.i2, 0.9222, 0.0, PUBLISHED_4DP);
    close(
        "tau2 ci low",
        r.tau2.ci.ci_low.unwrap(),
        0.1197,
        0.0,
        PUBLISHED_4DP,
    );
    close(
        "tau2 ci high",
        r.tau2.ci.ci_high.unwrap(),
        1.1115,
        0.0,
        PUBLISHED_4DP,
    );
    let r = fit_text(
        &settings(Measure::LogRr, &[], Tau2Method::Dl, Inference::Z),
        &csv,
    );
    close("DL tau2", r.tau2.estimate, 0.3088, 0.0, PUBLISHED_4DP);
    close(
        "DL estimate",
        r.average.mean.estimate,
        -0.7141,
        0.0,
        PUBLISHED_4DP,
    );
    let r = fit_text(
        &settings(Measure::LogRr, &["ablat"], Tau2Method::Reml, Inference::Z),
        &csv,
    );
    close("ablat tau2", r.tau2.estimate, 0.0764, 0.0, 1e-4);
    close(
        "intercept",
        r.coefficients[0].contrast.estimate,
        0.2515,
        0.0,
        PUBLISHED_4DP,
    );
    close(
        "intercept se",
        r.coefficients[0].contrast.se,
        0.2491,
        0.0,
        PUBLISHED_4DP,
    );
    close(
        "ablat",
        r.coefficients[1].contrast.estimate,
        -0.0291,
        0.0,
        PUBLISHED_4DP,
    );
    close(
        "ablat se",
        r.coefficients[1].contrast.se,
        0.0072,
        0.0,
        PUBLISHED_4DP,
    );
    close("QE", r.heterogeneity.q, 30.7331, 0.0, PUBLISHED_4DP);
    close("R2", r.heterogeneity.r2.unwrap(), 0.7562, 0.0, 1e-4);
}

#[test]
fn effect_sizes_match_reference() {
    let f = load("effect_sizes.json");
    use pondus::effect::binary::{two_by_two, Kind, Table2x2};
    use pondus::effect::correlation::{fisher_z, partial_from_t};
    use pondus::effect::smd::hedges_g;
    for e in f["fisher_z"].as_array().unwrap() {
        let (z, var) = fisher_z(num(&e["r"], "r"), num(&e["n"], "n")).unwrap();
        v("fisher z", z, &e["z"]);
        v("fisher v", var, &e["v"]);
    }
    for e in f["partial_r"].as_array().unwrap() {
        let (r, z, var) = partial_from_t(
            num(&e["t"], "t"),
            num(&e["n"], "n"),
            num(&e["covariates"], "q"),
        )
        .unwrap();
        v("partial r", r, &e["r"]);
        v("partial z", z, &e["z"]);
        v("partial v", var, &e["v"]);
    }
    for e in f["hedges_g"].as_array().unwrap() {
        let g = hedges_g(
            num(&e["treat_mean"], "mt"),
            num(&e["treat_sd"], "st"),
            num(&e["treat_n"], "nt"),
            num(&e["ctrl_mean"], "mc"),
            num(&e["ctrl_sd"], "sc"),
            num(&e["ctrl_n"], "nc"),
        )
        .unwrap();
        v("d", g.d, &e["ours"]["d"]);
        v("J", g.j, &e["ours"]["j"]);
        v("g", g.g, &e["ours"]["g"]);
        v("v(g)", g.v, &e["ours"]["v"]);
        // statsmodels 0.14.6 effectsize_smd shares the definition of g (not of its variance).
        v("g vs statsmodels", g.g, &e["statsmodels"]["g"]);
    }
    let tables = f["two_by_two"].as_array().unwrap();
    assert!(!tables.is_empty());
    for e in tables {
        let c = [
            &e["treat_events"],
            &e["treat_n"],
            &e["ctrl_events"],
            &e["ctrl_n"],
        ]
        .map(|x| num(x, "count"));
        for (kind, key) in [
            (Kind::LogOddsRatio, "log_or"),
            (Kind::LogRiskRatio, "log_rr"),
            (Kind::RiskDifference, "rd"),
        ] {
            let ours = &e["ours"][key];
            match two_by_two(c[0], c[1], c[2], c[3], kind).unwrap() {
                Table2x2::Effect {
                    y,
                    v: var,
                    corrected,
                } => {
                    assert_eq!(
                        Some(corrected),
                        e["zero_corrected"].as_bool(),
                        "{key} {c:?}"
                    );
                    v(&format!("{key} {c:?}"), y, ours);
                    v(
                        &format!("{key} variance {c:?}"),
                        var,
                        &e["ours"][format!("{key}_v")],
                    );
                    let sm = &e["statsmodels"];
                    if !sm.is_null() && !sm[key].is_null() {
                        v(&format!("{key} vs statsmodels {c:?}"), y, &sm[key]);
                        v(
                            &format!("{key} variance vs statsmodels {c:?}"),
                            var,
                            &sm[format!("{key}_v")],
                        );
                    }
                }
                Table2x2::Excluded(_) => assert!(
                    ours.is_null(),
                    "{key} {c:?}: pondus excludes, the reference has {ours}"
                ),
            }
        }
    }
    // Borenstein et al. (2009) ch. 4, from memory (4 decimals).
    let g = hedges_g(103.0, 5.5, 50.0, 100.0, 4.5, 50.0).unwrap();
    for e in f["published"]["values"].as_array().unwrap() {
        let got = match e["quantity"].as_str().unwrap() {
            "d" => g.d,
            "j" => g.j,
            "g" => g.g,
            other => panic!("unexpected quantity {other}"),
        };
        close(
            "Borenstein ch. 4",
            got,
            num(&e["published"], "published"),
            0.0,
            PUBLISHED_4DP,
        );
    }
}

/// statsmodels 0.14.6 directly (values stored by the generator from the
/// library calls themselves): `combine_effects` for the DerSimonian–Laird
/// (`method_re="chi2"`) and Paule–Mandel (`method_re="iterated"`, atol 1e-13)
/// pooled estimates, and `WLS` for β and its SEs at the estimated τ².
#[test]
fn statsmodels_pooled_estimates_and_wls() {
    let mut checked = 0;
    for name in ["bcg", "sim_k20"] {
        let fixture = load(&format!("{name}.json"));
        let csv =
            std::fs::read_to_string(repo(&format!("tests/data/reference/{name}.csv"))).unwrap();
        let measure = if name == "bcg" {
            Measure::LogRr
        } else {
            Measure::Effect
        };
        let cross =
            &fixture["models"]["intercept_only"]["crosschecks"]["statsmodels_combine_effects"];
        for (key, method, kh) in [
            ("dl_chi2_default_tolerance", Tau2Method::Dl, false),
            ("pm_iterated_atol1e-13", Tau2Method::Pm, false),
            ("dl_chi2_default_tolerance", Tau2Method::Dl, true),
        ] {
            let e = &cross[key];
            let inference = if kh { Inference::Kh } else { Inference::Z };
            let r = fit_text(&settings(measure, &[], method, inference), &csv);
            let l = format!("{name} statsmodels {key}");
            // statsmodels does not truncate a negative DL τ² at 0; both data sets here have τ² > 0.
            assert!(num(&e["tau2"], "tau2") > 0.0, "{l}");
            v(&format!("{l} tau2"), r.tau2.estimate, &e["tau2"]);
            v(
                &format!("{l} mean"),
                r.average.mean.estimate,
                &e["mean_effect_re"],
            );
            let se_key = if kh {
                "sd_eff_w_re_hksj"
            } else {
                "sd_eff_w_re"
            };
            v(&format!("{l} se"), r.average.mean.se, &e[se_key]);
            checked += 1;
        }
        for (model_name, model) in fixture["models"].as_object().unwrap() {
            let mods: Vec<&str> = model["moderators"]
                .as_array()
                .unwrap()
                .iter()
                .map(|m| m.as_str().unwrap())
                .collect();
            for (est, by_inf) in model["crosschecks"]["statsmodels_wls"].as_object().unwrap() {
                for (inf, e) in by_inf.as_object().unwrap() {
                    let inference = if inf == "kh" {
                        Inference::Kh
                    } else {
                        Inference::Z
                    };
                    let r = fit_text(&settings(measure, &mods, method(est), inference), &csv);
                    for (j, c) in r.coefficients.iter().enumerate() {
                        let l =
                            format!("{name}/{model_name}/{est}/{inf} statsmodels WLS {}", c.term);
                        v(
                            &format!("{l} estimate"),
                            c.contrast.estimate,
                            &e["estimate"][j],
                        );
                        v(&format!("{l} se"), c.contrast.se, &e["se"][j]);
                    }
                    checked += 1;
                }
            }
        }
    }
    assert!(
        checked >= 6 + 2 * 7 * 7,
        "only {checked} statsmodels comparisons"
    );
}
