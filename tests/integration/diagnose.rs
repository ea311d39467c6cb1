//! The robustness diagnostics of `pondus fit` (`--loo`, `--influence`,
//! `--permutations`, `--small-study`, `--cumulative-by`).
//!
//! Outside sources:
//! - `tests/data/reference/diagnose/*.json`: an independent numpy 2.3.5 /
//!   scipy 1.16.3 / statsmodels 0.14.6 script, `tests/reference/diagnose.py`
//!   (own REML and DerSimonian–Laird fits; the conclusions each removal
//!   reverses; the influence view's shifts, deleted residuals, leverages
//!   and flags with the textbook cut-offs; the regression test with statsmodels WLS;
//!   the rank test with scipy.stats.kendalltau; trim-and-fill L0 written
//!   from Duval & Tweedie 2000; the exact permutation p by enumerating all
//!   720 orderings with itertools), regenerated and compared by
//!   `tests/reference/check.sh`.
//! - Simulation of the published finding of Higgins & Thompson (2004, Stat.
//!   Med. 23:1663) and IntHout et al. (2014, BMC Med. Res. Methodol. 14:25):
//!   with k = 10 and large τ², the permutation test and the Knapp–Hartung
//!   test keep their type I error near 5 %, the z test rejects too often.
//!   Fixed seed, tolerances from the Monte-Carlo error.
//!
//! The data sets written in this file are invented for the tests.

use crate::util::{close, repo, settings};
use assert_cmd::Command;
use pondus::diagnose::{DiagnoseSettings, PermutationSettings};
use pondus::effect::Measure;
use pondus::fit::{run, FitSettings};
use pondus::model::tau2::Tau2Method;
use pondus::model::{FitOptions, Inference};
use pondus::result::FitReport;
use pondus::tolerance::{REFERENCE_ABS, REFERENCE_P_REL, REFERENCE_REL, REFERENCE_SHIFT_ABS};
use serde_json::Value;

fn load(name: &str) -> Value {
    let text =
        std::fs::read_to_string(repo(&format!("tests/data/reference/diagnose/{name}"))).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn csv(name: &str) -> String {
    std::fs::read_to_string(repo(&format!("tests/data/reference/{name}"))).unwrap()
}

fn num(v: &Value, what: &str) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("{what}: not a number: {v}"))
}

#[track_caller]
fn v(what: &str, a: f64, b: &Value) {
    close(what, a, num(b, what), REFERENCE_REL, REFERENCE_ABS);
}

#[track_caller]
fn p(what: &str, a: f64, b: &Value) {
    close(what, a, num(b, what), REFERENCE_P_REL, 1e-300);
}

#[track_caller]
fn ov(what: &str, a: Option<f64>, b: &Value) {
    match a {
        None => assert!(b.is_null(), "{what}: pondus null, reference {b}"),
        Some(a) => v(what, a, b),
    }
}

fn method(id: &str) -> Tau2Method {
    match id {
        "reml" => Tau2Method::Reml,
        "dl" => Tau2Method::Dl,
        other => panic!("unknown estimator {other}"),
    }
}

fn inference(id: &str) -> Inference {
    match id {
        "kh" => Inference::Kh,
        "z" => Inference::Z,
        other => panic!("unknown inference {other}"),
    }
}

fn all_diagnostics(order: Option<&str>) -> DiagnoseSettings {
    DiagnoseSettings {
        loo: true,
        influence: true,
        permutations: None,
        small_study: true,
        cumulative_by: order.map(String::from),
        selection: None,
    }
}

fn run_fixture(run_ref: &Value, measure: Measure, data: &str) -> FitReport {
    let mods: Vec<&str> = run_ref["moderators"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| m.as_str().unwrap())
        .collect();
    let mut s = settings(
        measure,
        &mods,
        method(run_ref["method"].as_str().unwrap()),
        inference(run_ref["inference"].as_str().unwrap()),
    );
    s.diagnostics = all_diagnostics(run_ref["cumulative_by"].as_str());
    run(&s, "reference.csv", data.as_bytes()).unwrap_or_else(|e| panic!("fit failed: {e}"))
}

fn check_reference(file: &str, measure: Measure, data: &str) {
    let fixture = load(file);
    for run_ref in fixture["runs"].as_array().unwrap() {
        let label = format!(
            "{file} {}/{}",
            run_ref["method"].as_str().unwrap(),
            run_ref["inference"].as_str().unwrap()
        );
        let r = run_fixture(run_ref, measure, data);
        for (c, e) in r
            .coefficients
            .iter()
            .zip(run_ref["coefficients"].as_array().unwrap())
        {
            v(
                &format!("{label} coefficient {}", c.term),
                c.contrast.estimate,
                e,
            );
        }

        let loo = r.leave_one_out.as_ref().expect("leave_one_out");
        let loo_ref = run_ref["leave_one_out"].as_array().unwrap();
        assert_eq!(loo.len(), loo_ref.len(), "{label}: LOO rows");
        for (l, e) in loo.iter().zip(loo_ref) {
            let w = format!("{label} LOO without {}", l.study);
            assert!(l.problem.is_none(), "{w}: {:?}", l.problem);
            for (j, (a, b)) in l
                .coefficients
                .iter()
                .zip(e["coefficients"].as_array().unwrap())
                .enumerate()
            {
                v(&format!("{w} coefficient {j}"), *a, b);
            }
            ov(&format!("{w} tau2"), l.tau2, &e["tau2"]);
            ov(&format!("{w} i2"), l.i2, &e["i2"]);
            match (l.moderator_p, l.average_p) {
                (Some(a), None) => p(&format!("{w} moderator p"), a, &e["moderator_p"]),
                (None, Some(a)) => p(&format!("{w} average p"), a, &e["average_p"]),
                other => panic!("{w}: p fields {other:?}"),
            }
            ov(&format!("{w} average"), l.average, &e["average"]);
            if measure == Measure::LogRr {
                let a = l.average.unwrap();
                close(
                    &format!("{w} average as a ratio"),
                    l.average_reading.unwrap(),
                    a.exp(),
                    1e-15,
                    0.0,
                );
            } else {
                assert!(l.average_reading.is_none(), "{w}: reading scale");
            }
            let changes_ref = e["changes"].as_array().unwrap();
            assert_eq!(
                l.changes.len(),
                changes_ref.len(),
                "{w}: changes {:?}",
                l.changes
            );
            for (c, cr) in l.changes.iter().zip(changes_ref) {
                assert_eq!(Some(c.kind.id()), cr["kind"].as_str(), "{w}");
                let term = cr["coefficient"]
                    .as_u64()
                    .map(|j| r.model.terms[j as usize].clone());
                assert_eq!(c.term, term, "{w}");
                assert_eq!(Some(c.significant_with), cr["significant_with"].as_bool());
                assert_eq!(
                    Some(c.significant_without),
                    cr["significant_without"].as_bool()
                );
            }
        }

        let inf = r.influence.as_ref().expect("influence");
        let inf_ref = run_ref["influence"].as_array().unwrap();
        assert_eq!(inf.len(), inf_ref.len());
        for (s, e) in inf.iter().zip(inf_ref) {
            let w = format!("{label} influence {}", s.study);
            assert!(s.problem.is_none(), "{w}: {:?}", s.problem);
            ov(
                &format!("{w} average without"),
                s.average_without,
                &e["average_without"],
            );
            // The shift is a difference of two fitted averages: compared on the
            // absolute tolerance alone (its relative size can be anything).
            close(
                &format!("{w} average shift"),
                s.average_shift.unwrap(),
                num(&e["average_shift"], "shift"),
                0.0,
                REFERENCE_SHIFT_ABS,
            );
            for (name, ours, theirs) in [
                ("shift", &s.coefficient_shifts, &e["coefficient_shifts"]),
                (
                    "shift in SE",
                    &s.coefficient_shifts_se,
                    &e["coefficient_shifts_se"],
                ),
            ] {
                let theirs = theirs.as_array().unwrap();
                assert_eq!(ours.len(), theirs.len(), "{w} {name}");
                for (j, (a, b)) in ours.iter().zip(theirs).enumerate() {
                    close(
                        &format!("{w} {name} {j}"),
                        *a,
                        num(b, name),
                        0.0,
                        REFERENCE_SHIFT_ABS,
                    );
                }
            }
            match s.moderator_p_without {
                Some(a) => p(&format!("{w} p without"), a, &e["moderator_p_without"]),
                None => assert!(e["moderator_p_without"].is_null(), "{w}"),
            }
            assert_eq!(
                s.changes.len(),
                e["changes"].as_array().unwrap().len(),
                "{w}"
            );
            ov(
                &format!("{w} deleted residual"),
                s.deleted_residual,
                &e["deleted_residual"],
            );
            v(&format!("{w} leverage"), s.leverage, &e["leverage"]);
            let fired: Vec<&str> = e["flags"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_str().unwrap())
                .collect();
            let ours: Vec<&str> = s.flags.iter().map(|c| c.id()).collect();
            assert_eq!(ours, fired, "{w}");
        }
        let rules = r.influence_rules.as_ref().unwrap();
        let rules_ref = &run_ref["influence_rules"];
        v(
            "shift cut-off",
            rules.coefficient_shift_se,
            &rules_ref["coefficient_shift_se"],
        );
        v(
            "residual cut-off",
            rules.deleted_residual,
            &rules_ref["deleted_residual"],
        );
        v("leverage cut-off", rules.leverage, &rules_ref["leverage"]);
        v(
            "average with every study",
            rules.average,
            &rules_ref["average"],
        );
        match rules.moderator_p {
            Some(a) => p("moderator p", a, &rules_ref["moderator_p"]),
            None => assert!(rules_ref["moderator_p"].is_null()),
        }

        let ss = r.small_study.as_ref().expect("small_study");
        let a = &ss.asymmetry_test;
        let a_ref = &run_ref["asymmetry_test"];
        v(
            &format!("{label} Egger t"),
            a.statistic,
            &a_ref["statistic"],
        );
        v(&format!("{label} Egger df"), a.df, &a_ref["df"]);
        p(&format!("{label} Egger p"), a.p, &a_ref["p"]);
        v(&format!("{label} Egger slope"), a.slope, &a_ref["slope"]);
        v(&format!("{label} Egger se"), a.se, &a_ref["se"]);
        v(
            &format!("{label} Kendall tau"),
            ss.rank_test.tau,
            &run_ref["rank_test"]["tau"],
        );
        p(
            &format!("{label} Begg p"),
            ss.rank_test.p,
            &run_ref["rank_test"]["p"],
        );
        let t = &ss.trim_fill;
        let t_ref = &run_ref["trim_fill"];
        assert_eq!(
            Some(t.filled as u64),
            t_ref["filled"].as_u64(),
            "{label} filled"
        );
        assert_eq!(Some(t.side.id()), t_ref["side"].as_str(), "{label} side");
        assert_eq!(Some(t.iterations as u64), t_ref["iterations"].as_u64());
        v(
            &format!("{label} TF estimate"),
            t.estimate,
            &t_ref["estimate"],
        );
        v(&format!("{label} TF ci_low"), t.ci.ci_low, &t_ref["ci_low"]);
        v(
            &format!("{label} TF ci_high"),
            t.ci.ci_high,
            &t_ref["ci_high"],
        );
        v(
            &format!("{label} TF observed"),
            t.estimate_observed,
            &t_ref["estimate_observed"],
        );
        for (f, e) in t
            .filled_studies
            .iter()
            .zip(t_ref["filled_studies"].as_array().unwrap())
        {
            v("filled effect", f.effect, &e["effect"]);
            v("filled variance", f.variance, &e["variance"]);
        }

        if let Some(steps_ref) = run_ref["cumulative"].as_array() {
            let steps = r.cumulative.as_ref().expect("cumulative");
            assert_eq!(steps.len(), steps_ref.len());
            for (s, e) in steps.iter().zip(steps_ref) {
                let w = format!("{label} cumulative step {}", s.k);
                let idx = e["index"].as_u64().unwrap() as usize;
                assert_eq!(s.study, r.studies.label(idx), "{w}: order");
                assert_eq!(Some(s.k as u64), e["k"].as_u64());
                ov(&format!("{w} estimate"), s.estimate, &e["estimate"]);
                ov(&format!("{w} se"), s.se, &e["se"]);
                ov(&format!("{w} ci_low"), s.ci.ci_low, &e["ci_low"]);
                ov(&format!("{w} ci_high"), s.ci.ci_high, &e["ci_high"]);
                p(&format!("{w} p"), s.p.unwrap(), &e["p"]);
                ov(&format!("{w} tau2"), s.tau2, &e["tau2"]);
                ov(&format!("{w} i2"), s.i2, &e["i2"]);
            }
        }
    }
}

#[test]
fn bcg_with_latitude_matches_the_independent_script() {
    check_reference("diagnose_bcg.json", Measure::LogRr, &csv("bcg.csv"));
}

#[test]
fn bcg_without_moderators_matches_the_independent_script() {
    check_reference("diagnose_bcg_plain.json", Measure::LogRr, &csv("bcg.csv"));
}

#[test]
fn simulated_k20_with_dose_and_region_matches_the_independent_script() {
    check_reference(
        "diagnose_sim_k20.json",
        Measure::Effect,
        &csv("sim_k20.csv"),
    );
}

#[test]
fn simulated_k8_at_the_boundary_matches_the_independent_script() {
    // Ordered by the text column `study` (code-point order).
    check_reference(
        "diagnose_sim_k8.json",
        Measure::Effect,
        &csv("sim_k8_boundary.csv"),
    );
}

fn tiny_settings(
    moderator: &str,
    m: Tau2Method,
    inf: Inference,
    n: usize,
    seed: u64,
) -> FitSettings {
    let mut s = settings(Measure::Effect, &[moderator], m, inf);
    s.diagnostics.permutations = Some(PermutationSettings {
        permutations: n,
        seed,
    });
    s
}

#[test]
fn exact_permutation_p_matches_full_enumeration() {
    let data =
        std::fs::read_to_string(repo("tests/data/reference/diagnose/diagnose_tiny.csv")).unwrap();
    let fixture = load("diagnose_tiny.json");
    for e in fixture["runs"].as_array().unwrap() {
        let m = e["moderator"].as_str().unwrap();
        let s = tiny_settings(
            m,
            method(e["method"].as_str().unwrap()),
            inference(e["inference"].as_str().unwrap()),
            1000,
            1,
        );
        let r = run(&s, "tiny.csv", data.as_bytes()).unwrap();
        let perm = r.permutation.unwrap();
        assert!(perm.exact, "{m}: fewer arrangements than permutations");
        assert_eq!(perm.seed, None);
        assert_eq!(Some(perm.permutations as u64), e["arrangements"].as_u64());
        assert_eq!(perm.arrangements, e["arrangements"].as_f64());
        // Counts over the same arrangements: equal up to rounding of a share.
        close(
            &format!("{m} moderator p"),
            perm.moderator_p,
            num(&e["moderator_p"], "p"),
            1e-12,
            0.0,
        );
        assert_eq!(perm.coefficient_p[0], None);
        close(
            &format!("{m} coefficient p"),
            perm.coefficient_p[1].unwrap(),
            num(&e["coefficient_p"][1], "p"),
            1e-12,
            0.0,
        );
    }
}

const TWELVE: &str = "study,effect,variance,x\n\
    A,0.10,0.02,1\nB,0.32,0.03,2\nC,0.15,0.05,3\nD,0.40,0.02,4\nE,0.22,0.04,5\nF,0.51,0.03,6\n\
    G,0.38,0.06,7\nH,0.62,0.02,8\nI,0.35,0.05,9\nJ,0.70,0.03,10\nK,0.58,0.04,11\nL,0.81,0.02,12\n";

#[test]
fn random_permutations_do_not_depend_on_the_number_of_threads() {
    // 12! arrangements ≫ 600 permutations: random; three blocks, the last partial.
    let s = tiny_settings("x", Tau2Method::Reml, Inference::Kh, 600, 42);
    let go = |threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| run(&s, "twelve.csv", TWELVE.as_bytes()).unwrap())
            .permutation
            .unwrap()
    };
    let one = go(1);
    for t in [2, 3] {
        let other = go(t);
        assert_eq!(one.moderator_p, other.moderator_p, "{t} threads");
        assert_eq!(one.coefficient_p, other.coefficient_p, "{t} threads");
    }
    assert!(!one.exact);
    assert_eq!(one.seed, Some(42));
    assert_eq!(one.permutations, 600);
    // p = (b + 1)/(N + 1): an integer count over 601.
    let b = one.moderator_p * 601.0 - 1.0;
    assert!((b - b.round()).abs() < 1e-9 && b >= 0.0, "{b}");
    // A strong linear trend: few permutations reach the observed statistic.
    assert!(one.moderator_p < 0.01, "{}", one.moderator_p);
    // Another seed draws other permutations.
    let s2 = tiny_settings("x", Tau2Method::Reml, Inference::Kh, 600, 43);
    let two = run(&s2, "twelve.csv", TWELVE.as_bytes()).unwrap();
    assert_eq!(two.permutation.unwrap().seed, Some(43));
}

/// Rejection rates under the null hypothesis (β₁ = 0) with k = 10 and a
/// large τ², after Higgins & Thompson (2004) and IntHout et al. (2014):
/// the Knapp–Hartung t test and the permutation test hold about 5 %, the
/// Wald z test rejects too often.
///
/// Each data set: v_i spread from 0.01 to 0.1, τ² = 0.5 (I² near 0.9),
/// x_i = 1..10, y_i ~ N(0, v_i + τ²), xoshiro256** from the project's seeded
/// generator, REML. 2,000 data sets for z and Knapp–Hartung (one fit gives
/// both: the z covariance is the Knapp–Hartung one without its factor);
/// 150 of them also get a permutation test with 19 permutations, whose
/// p = (b + 1)/20 ≤ 0.05 exactly when no permutation reaches the observed
/// statistic, so its size is 1/20 under exchangeability.
///
/// Tolerances: 3.5 Monte-Carlo standard errors at the nominal 5 %:
/// √(0.05·0.95/2000) = 0.0049 and √(0.05·0.95/150) = 0.0178.
#[test]
fn permutation_and_knapp_hartung_hold_their_size_while_z_does_not() {
    use pondus::diagnose::{permutation, ModelData};
    use pondus::model::{self, inference};
    use pondus::support::rng::block_rng;
    let k = 10;
    let tau2 = 0.5;
    let v: Vec<f64> = (0..k).map(|i| 0.01 + 0.01 * i as f64).collect();
    let x: Vec<f64> = (0..k).flat_map(|i| [1.0, (i + 1) as f64]).collect();
    let options = FitOptions {
        method: Tau2Method::Reml,
        inference: Inference::Kh,
        level: 0.95,
    };
    let z_crit = pondus::dist::normal_quantile(0.975);
    let mut rng = block_rng(20_040_623, 0);
    let (reps, perm_reps) = (2000usize, 150usize);
    let (mut kh_rej, mut z_rej, mut perm_rej) = (0usize, 0usize, 0usize);
    for rep in 0..reps {
        let y: Vec<f64> = v
            .iter()
            .map(|vi| (vi + tau2).sqrt() * rng.next_normal())
            .collect();
        let f = model::fit_parts(&y, &v, &x, 2, options, false).unwrap();
        let c = &inference::coefficients(&f)[1];
        if c.p < 0.05 {
            kh_rej += 1;
        }
        let z = c.estimate / (f.cov[(1, 1)] / f.kh_scale.unwrap()).sqrt();
        if z.abs() > z_crit {
            z_rej += 1;
        }
        if rep < perm_reps {
            let d = ModelData {
                y: &y,
                v: &v,
                x: &x,
                p: 2,
                options,
            };
            let ps = PermutationSettings {
                permutations: 19,
                seed: rep as u64,
            };
            let t = permutation::test(&d, ps, &|_| {}).unwrap();
            if t.moderator_p <= 0.05 {
                perm_rej += 1;
            }
        }
    }
    let kh = kh_rej as f64 / reps as f64;
    let z = z_rej as f64 / reps as f64;
    let perm = perm_rej as f64 / perm_reps as f64;
    let se = (0.05f64 * 0.95 / reps as f64).sqrt();
    let se_perm = (0.05f64 * 0.95 / perm_reps as f64).sqrt();
    assert!((kh - 0.05).abs() < 3.5 * se, "Knapp–Hartung size {kh}");
    assert!(z > 0.05 + 3.5 * se, "z size {z} should exceed 5 % clearly");
    assert!(
        (perm - 0.05).abs() < 3.5 * se_perm,
        "permutation size {perm}"
    );
}

// ---------------------------------------------------------------- the command line

fn pondus() -> Command {
    Command::cargo_bin("pondus").expect("the pondus binary is built")
}

fn bcg() -> String {
    repo("tests/data/reference/bcg.csv").display().to_string()
}

/// Runs `pondus fit FILE ARGS`, expects exit 2 and returns stderr.
fn fails(file: &str, args: &str) -> String {
    let out = pondus()
        .arg("fit")
        .arg(file)
        .args(args.split_whitespace())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(2), "{args}: {err}");
    assert!(!err.contains("panicked"), "{err}");
    err
}

fn temp_csv(text: &str) -> (tempfile::TempDir, String) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("data.csv");
    std::fs::write(&path, text).unwrap();
    let s = path.display().to_string();
    (dir, s)
}

#[test]
fn zero_permutations_are_refused() {
    let err = fails(
        &bcg(),
        "--measure log-rr --moderator ablat --permutations 0",
    );
    assert!(
        err.contains("--permutations") && err.contains("at least 1"),
        "{err}"
    );
}

#[test]
fn a_seed_without_permutations_is_refused() {
    let err = fails(&bcg(), "--measure log-rr --moderator ablat --seed 3");
    assert!(
        err.contains("--seed") && err.contains("--permutations N"),
        "{err}"
    );
}

#[test]
fn permutations_without_moderators_are_refused() {
    let err = fails(&bcg(), "--measure log-rr --permutations 99");
    assert!(err.contains("--moderator"), "{err}");
}

#[test]
fn cumulative_by_a_missing_column_names_it() {
    let err = fails(&bcg(), "--measure log-rr --cumulative-by decade");
    assert!(
        err.contains("decade") && err.contains("--cumulative-by"),
        "{err}"
    );
}

#[test]
fn cumulative_by_a_column_with_a_missing_value_names_the_line() {
    let (_d, f) =
        temp_csv("study,effect,variance,year\nA,0.1,0.01,2001\nB,0.3,0.02,NA\nC,0.2,0.01,2003\n");
    let err = fails(&f, "--cumulative-by year");
    assert!(err.contains("line 3") && err.contains("'year'"), "{err}");
}

#[test]
fn cumulative_by_text_sorts_by_code_points_and_numbers_numerically() {
    // Numbers: 9 < 10 (numerically; as text "10" < "9").
    let (_d, f) = temp_csv(
        "study,effect,variance,wave,code\nA,0.1,0.01,10,b2\nB,0.3,0.02,9,a7\nC,0.2,0.01,11,B1\n",
    );
    let json = |col: &str| -> Value {
        let out = pondus()
            .args(["fit", &f, "--cumulative-by", col, "--json", "-"])
            .output()
            .unwrap();
        assert!(out.status.success());
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let order = |v: &Value| -> Vec<String> {
        v["cumulative"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s["study"].as_str().unwrap().to_string())
            .collect()
    };
    let w = json("wave");
    assert_eq!(order(&w), ["B", "A", "C"]);
    assert_eq!(w["cumulative_order"]["order"], "numeric");
    let c = json("code");
    // Code points: "B1" < "a7" < "b2".
    assert_eq!(order(&c), ["C", "B", "A"]);
    assert_eq!(c["cumulative_order"]["order"], "text");
}

#[test]
fn small_study_with_two_studies_is_refused() {
    let (_d, f) = temp_csv("study,effect,variance\nA,0.1,0.01\nB,0.3,0.02\n");
    let err = fails(&f, "--small-study");
    assert!(
        err.contains("--small-study") && err.contains("at least 3"),
        "{err}"
    );
}

#[test]
fn loo_with_too_few_studies_is_refused() {
    let (_d, f) = temp_csv("study,effect,variance,x\nA,0.1,0.01,1\nB,0.3,0.02,2\nC,0.2,0.01,3\n");
    let err = fails(&f, "--moderator x --loo");
    assert!(err.contains("--loo") && err.contains("at least 4"), "{err}");
}

#[test]
fn trim_and_fill_with_moderators_says_it_used_the_model_without_them() {
    let out = pondus()
        .args([
            "fit",
            &bcg(),
            "--measure",
            "log-rr",
            "--moderator",
            "ablat",
            "--small-study",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("Small-study effects"), "{text}");
    assert!(
        text.contains("Trim-and-fill was done on the model without moderators"),
        "{text}"
    );
    assert!(
        text.contains("causes other than publication bias"),
        "{text}"
    );
}

#[test]
fn json_omits_diagnostics_not_asked_for_and_uses_the_issue_keys() {
    let out = pondus()
        .args(["fit", &bcg(), "--measure", "log-rr", "--json", "-"])
        .output()
        .unwrap();
    let plain: Value = serde_json::from_slice(&out.stdout).unwrap();
    for key in [
        "leave_one_out",
        "influence",
        "permutation",
        "small_study",
        "cumulative",
    ] {
        assert!(plain.get(key).is_none(), "{key} present without its flag");
    }
    let out = pondus()
        .args([
            "fit",
            &bcg(),
            "--measure",
            "log-rr",
            "--moderator",
            "ablat",
            "--loo",
            "--influence",
            "--permutations",
            "99",
            "--seed",
            "5",
            "--small-study",
            "--cumulative-by",
            "year",
            "--json",
            "-",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    let j: Value = serde_json::from_slice(&out.stdout).unwrap();
    for key in [
        "study",
        "coefficients",
        "average",
        "average_reading",
        "tau2",
        "moderator_p",
        "changes",
    ] {
        assert!(
            j["leave_one_out"][0].get(key).is_some(),
            "leave_one_out.{key}"
        );
    }
    for key in [
        "study",
        "average_without",
        "average_shift",
        "average_shift_reading",
        "coefficient_shifts",
        "coefficient_shifts_se",
        "moderator_p_without",
        "changes",
        "deleted_residual",
        "leverage",
        "flags",
    ] {
        assert!(j["influence"][0].get(key).is_some(), "influence.{key}");
    }
    // Issue 22: the names of the earlier view are gone.
    for key in [
        "rstudent",
        "dffits",
        "cooks_distance",
        "cov_ratio",
        "hat",
        "tau2_deleted",
    ] {
        assert!(j["influence"][0].get(key).is_none(), "influence.{key}");
    }
    for key in [
        "coefficient_shift_se",
        "deleted_residual",
        "leverage",
        "average",
    ] {
        assert!(
            j["influence_rules"].get(key).is_some(),
            "influence_rules.{key}"
        );
    }
    for key in ["permutations", "seed", "moderator_p", "coefficient_p"] {
        assert!(j["permutation"].get(key).is_some(), "permutation.{key}");
    }
    assert_eq!(j["permutation"]["seed"], 5);
    for (part, keys) in [
        ("asymmetry_test", &["statistic", "df", "p"][..]),
        ("rank_test", &["tau", "p"][..]),
        (
            "trim_fill",
            &["filled", "side", "estimate", "ci_low", "ci_high"][..],
        ),
    ] {
        for key in keys {
            assert!(
                j["small_study"][part].get(key).is_some(),
                "small_study.{part}.{key}"
            );
        }
    }
    assert_eq!(j["cumulative"].as_array().unwrap().len(), 13);
}

#[test]
fn the_table_gains_the_diagnostic_columns_when_asked() {
    let dir = tempfile::tempdir().unwrap();
    let t = dir.path().join("t.csv");
    let out = pondus()
        .args([
            "fit",
            &bcg(),
            "--measure",
            "log-rr",
            "--moderator",
            "ablat",
            "--loo",
            "--influence",
            "-q",
            "--table",
        ])
        .arg(&t)
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = std::fs::read_to_string(&t).unwrap();
    let mut rdr = csv::Reader::from_reader(text.as_bytes());
    let header: Vec<String> = rdr.headers().unwrap().iter().map(String::from).collect();
    for col in pondus::render::table::LOO_COLUMNS
        .iter()
        .chain(&pondus::render::table::INFLUENCE_COLUMNS)
    {
        assert!(header.iter().any(|h| h == col), "{col} missing: {header:?}");
    }
    let rows: Vec<csv::StringRecord> = rdr.records().map(|r| r.unwrap()).collect();
    assert_eq!(rows.len(), 13);
    assert!(rows.iter().all(|r| r.len() == header.len()));
    for gone in [
        "loo_flag",
        "cov_ratio",
        "tau2_deleted",
        "q_deleted",
        "rstudent",
    ] {
        assert!(!header.iter().any(|h| h == gone), "{gone} still there");
    }
    // The average without each study is on the reading scale too (a ratio).
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    for r in &rows {
        let a: f64 = r[col("loo_average")].parse().unwrap();
        let b: f64 = r[col("loo_average_reading")].parse().unwrap();
        assert!((a.exp() - b).abs() < 1e-12);
    }
}

#[test]
fn the_funnel_plot_draws_the_filled_studies_only_with_small_study() {
    let dir = tempfile::tempdir().unwrap();
    let draw = |extra: &[&str], name: &str| -> (Value, String) {
        let path = dir.path().join(name);
        let out = pondus()
            .args([
                "fit",
                &bcg(),
                "--measure",
                "log-rr",
                "--json",
                "-",
                "--funnel",
            ])
            .arg(&path)
            .args(extra)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        (
            serde_json::from_slice(&out.stdout).unwrap(),
            std::fs::read_to_string(&path).unwrap(),
        )
    };
    let (_, plain) = draw(&[], "plain.svg");
    let (json, with) = draw(&["--small-study"], "tf.svg");
    let filled = json["small_study"]["trim_fill"]["filled"].as_u64().unwrap() as usize;
    assert!(filled > 0, "the BCG funnel gets a filled study");
    // Every marker is one circle element (its fill and its outline).
    assert_eq!(
        with.matches("<circle").count(),
        plain.matches("<circle").count() + filled
    );
    // The filled studies are open: paper-white inside.
    let open = |svg: &str| {
        svg.lines()
            .filter(|l| l.starts_with("<circle") && l.contains(r##"fill="#FFFFFF""##))
            .count()
    };
    assert_eq!(open(&with), open(&plain) + filled);
    assert!(with.contains("trim-and-fill"));
}

#[test]
fn exact_enumeration_runs_through_every_arrangement_in_batches() {
    // 8 distinct moderator values: 8! = 40,320 arrangements, more than one
    // batch of generated arrangements; every one is evaluated once.
    let data = "study,effect,variance,x\nA,0.1,0.02,1\nB,0.3,0.03,2\nC,0.2,0.05,3\nD,0.4,0.02,4\n\
                E,0.2,0.04,5\nF,0.5,0.03,6\nG,0.3,0.06,7\nH,0.6,0.02,8\n";
    let s = tiny_settings("x", Tau2Method::Dl, Inference::Z, 50_000, 1);
    let perm = run(&s, "eight.csv", data.as_bytes())
        .unwrap()
        .permutation
        .unwrap();
    assert!(perm.exact);
    assert_eq!(perm.permutations, 40_320);
    assert_eq!(perm.failed, 0);
    // b/M with the observed arrangement among the M: a whole count ≥ 1.
    let b = perm.moderator_p * 40_320.0;
    assert!((b - b.round()).abs() < 1e-6 && b >= 1.0, "{b}");
}

#[test]
fn leave_one_out_beyond_its_size_limit_is_refused_before_it_starts() {
    use pondus::diagnose::MAX_REFIT_STUDIES;
    let mut text = String::from("study,effect,variance\n");
    for i in 0..=MAX_REFIT_STUDIES {
        let e = ((i * 37) % 101) as f64 / 100.0 - 0.5;
        text.push_str(&format!("s{i},{e},0.05\n"));
    }
    let (_d, f) = temp_csv(&text);
    let err = fails(&f, "--loo");
    assert!(
        err.contains("--loo") && err.contains("at most 20000"),
        "{err}"
    );
}

/// Issue 22, point 4: on the consortium example a coefficient estimated at
/// −0.0017 (p = 0.97) changed sign in 10 of 24 refits, and each was
/// flagged "sign". Only a reversed conclusion is flagged now: none of the
/// 24 removals moves the moderator test across α or a coefficient's
/// interval across 0. The headers are whole and the average is shown as r.
#[test]
fn issue22_consortium_leave_one_out_flags_only_reversed_conclusions() {
    let out = pondus()
        .args([
            "fit",
            &repo("data-examples/consortium-correlations.csv")
                .display()
                .to_string(),
            "--measure",
            "r",
            "--moderator",
            "session_minutes",
            "--moderator",
            "mode",
            "--loo",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    let section: &str = text
        .split("Leave-one-out")
        .nth(1)
        .and_then(|s| s.split("\n\n").next())
        .unwrap();
    // The header may stack "conclusion changed" in its column to stay
    // within 100 columns; every coefficient keeps its column here.
    let header = section
        .lines()
        .skip(1)
        .take(2)
        .collect::<Vec<_>>()
        .join("\n");
    for col in [
        "average (r)",
        "session_minutes",
        "mode=online",
        "conclusion",
        "changed",
    ] {
        assert!(header.contains(col), "{col} not in {header}");
    }
    assert!(
        section.lines().all(|l| l.chars().count() <= 100),
        "{section}"
    );
    assert!(!section.contains('…'), "{section}");
    assert!(
        !section
            .lines()
            .filter(|l| l.starts_with("  Lab"))
            .any(|l| l.contains("sign")),
        "{section}"
    );
    assert!(
        section.contains("0 of 24 removals change a conclusion"),
        "{section}"
    );
    let json = pondus()
        .args([
            "fit",
            &repo("data-examples/consortium-correlations.csv")
                .display()
                .to_string(),
            "--measure",
            "r",
            "--moderator",
            "session_minutes",
            "--moderator",
            "mode",
            "--loo",
            "-q",
            "--json",
            "-",
        ])
        .output()
        .unwrap();
    let j: Value = serde_json::from_slice(&json.stdout).unwrap();
    let loo = j["leave_one_out"].as_array().unwrap();
    assert_eq!(loo.len(), 24);
    for l in loo {
        assert_eq!(l["changes"].as_array().unwrap().len(), 0, "{l}");
        let z = l["average"].as_f64().unwrap();
        let r = l["average_reading"].as_f64().unwrap();
        assert!((z.tanh() - r).abs() < 1e-15);
    }
}

/// Issue 22: the influence plot is drawn from the influence view (each
/// study's move against its leverage, the cut-offs named in the caption),
/// in every format, and refused without `--influence`.
#[test]
fn issue22_the_influence_plot_needs_the_view_and_names_its_cut_offs() {
    let dir = tempfile::tempdir().unwrap();
    let svg = dir.path().join("i.svg");
    let out = pondus()
        .args([
            "fit",
            &bcg(),
            "--measure",
            "log-rr",
            "--moderator",
            "ablat",
            "-q",
        ])
        .arg("--influence-plot")
        .arg(&svg)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("--influence-plot") && err.contains("add --influence"),
        "{err}"
    );
    assert!(!svg.exists());
    for name in ["i.svg", "i.png", "i.pdf"] {
        let path = dir.path().join(name);
        let out = pondus()
            .args(["fit", &bcg(), "--measure", "log-rr", "--moderator", "ablat"])
            .args(["--influence", "-q", "--influence-plot"])
            .arg(&path)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        assert!(std::fs::metadata(&path).unwrap().len() > 1000, "{name}");
    }
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(text.contains("against its pull"), "title");
    assert!(text.contains("Belsley, Kuh &amp; Welsch 1980"), "caption");
    assert!(text.contains("Hoaglin &amp; Welsch 1978"), "caption");
}

/// Issue 22, point 5: the average of a moderator model pools only the rows
/// complete for the moderators, and says so with the counts; it equals the
/// model without moderators fitted to those rows, not to every row.
/// `--center` states the value it subtracted (text and JSON).
#[test]
fn issue22_the_average_says_which_studies_it_pools_and_center_its_value() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo("data-examples/consortium-correlations.csv")).unwrap();
    let mut lines: Vec<String> = text.lines().take(17).map(String::from).collect();
    // Lab Santelli (line 5): session_minutes left blank.
    lines[4] = lines[4]
        .replacen(",100,", ",100,,", 1)
        .replacen(",,,", ",,", 1);
    let parts: Vec<&str> = lines[4].split(',').collect();
    lines[4] = format!("{},{},{},,{}", parts[0], parts[1], parts[2], parts[4]);
    let with_gap = dir.path().join("gap.csv");
    std::fs::write(&with_gap, lines.join("\n") + "\n").unwrap();
    let complete: Vec<&String> = lines
        .iter()
        .filter(|l| !l.starts_with("Lab Santelli"))
        .collect();
    let only_complete = dir.path().join("complete.csv");
    std::fs::write(
        &only_complete,
        complete
            .iter()
            .map(|s| s.as_str())
            .collect::<Vec<_>>()
            .join("\n")
            + "\n",
    )
    .unwrap();
    let json = |file: &std::path::Path, mods: &[&str]| -> Value {
        let mut cmd = pondus();
        cmd.arg("fit")
            .arg(file)
            .args(["--measure", "r", "-q", "--json", "-"]);
        for m in mods {
            cmd.args(["--moderator", m]);
        }
        let out = cmd.output().unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let j = json(&with_gap, &["session_minutes", "mode"]);
    assert_eq!(j["average_basis"]["studies"], 15);
    assert_eq!(j["average_basis"]["with_effect"], 16);
    let a = j["average"]["estimate"].as_f64().unwrap();
    let same_rows = json(&only_complete, &[])["average"]["estimate"]
        .as_f64()
        .unwrap();
    let all_rows = json(&with_gap, &[])["average"]["estimate"]
        .as_f64()
        .unwrap();
    assert!((a - same_rows).abs() < 1e-12, "{a} vs {same_rows}");
    assert!((a - all_rows).abs() > 1e-3, "{a} vs {all_rows}");
    assert!(json(&with_gap, &[]).get("average_basis").is_none());
    let out = pondus()
        .arg("fit")
        .arg(&with_gap)
        .args([
            "--measure",
            "r",
            "--moderator",
            "session_minutes",
            "--moderator",
            "mode",
        ])
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        text.contains("pools 15 of 16 studies, those complete for the moderators"),
        "{text}"
    );

    let out = pondus()
        .arg("fit")
        .arg(repo("data-examples/consortium-correlations.csv"))
        .args([
            "--measure",
            "r",
            "--moderator",
            "session_minutes",
            "--center",
            "session_minutes",
        ])
        .args(["--json", "-"])
        .output()
        .unwrap();
    let j: Value = serde_json::from_slice(&out.stdout).unwrap_or_else(|_| {
        panic!("{}", String::from_utf8_lossy(&out.stdout));
    });
    let m = &j["model"]["moderators"][0];
    let mean = m["kind"]["mean"].as_f64().unwrap();
    assert_eq!(m["kind"]["centered_at"].as_f64(), Some(mean));
}
