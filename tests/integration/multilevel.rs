//! Dependent effects: `pondus fit --cluster` (three-level model) and
//! `--robust` (CR2 cluster-robust inference).
//!
//! Outside sources:
//! - `tests/data/reference/multilevel/*.json`: the independent numpy 2.3.5 /
//!   scipy 1.16.3 script `tests/reference/multilevel.py`, which maximises the
//!   three-level (restricted) likelihood built from DENSE k × k matrices
//!   directly with scipy.optimize, and computes CR2 standard errors,
//!   Satterthwaite df and the HTZ test from their full hat-matrix formulas
//!   (Tipton 2015; Tipton & Pustejovsky 2015; Pustejovsky & Tipton 2018;
//!   cited from memory). Regenerated and compared by `tests/reference/check.sh`.
//! - A fixed-seed simulation of the published finding that ignoring the
//!   dependence of effects within clusters makes moderator tests too liberal
//!   while the three-level model and robust variance estimation keep about
//!   the nominal level (Hedges, Tipton & Johnson 2010, Res. Synth. Methods
//!   1:39; Tipton 2015, Psychol. Methods 20:375; Van den Noortgate et al.
//!   2013, Behav. Res. Methods 45:576; cited from memory).
//!
//! The data are invented (BCG trials grouped into invented clusters, and
//! seeded simulations).

use crate::util::{close, repo};
use assert_cmd::Command;
use pondus::model::multilevel::{self, Clusters};
use pondus::model::tau2::Tau2Method;
use pondus::model::{self as model, FitOptions, Inference};
use pondus::support::rng::Xoshiro256StarStar;
use pondus::tolerance::{MULTILEVEL_REF_REL, REFERENCE_ABS};
use serde_json::Value;

fn load(name: &str) -> Value {
    let text =
        std::fs::read_to_string(repo(&format!("tests/data/reference/multilevel/{name}"))).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn pondus_json(args: &[&str]) -> Value {
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .args(args)
        .args(["--json", "-"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "pondus failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

/// The absolute floor for variance components at the boundary: scipy's
/// bounded search stops near, not at, 0.
const BOUNDARY_ABS: f64 = 1e-9;

fn check(fixture: &str, csv: &str, cluster: &str, moderators: &[&str]) {
    let reference = load(fixture);
    let path = repo(&format!("tests/data/reference/multilevel/{csv}"));
    let path = path.to_str().unwrap();
    let mut base: Vec<&str> = vec![path, "--cluster", cluster];
    for m in moderators {
        base.extend(["--moderator", m]);
    }
    for method in ["reml", "ml"] {
        let r = &reference["fits"][method];
        for inference in ["z", "kh"] {
            let mut args = base.clone();
            args.extend(["--tau2", method, "--inference", inference]);
            if method == "reml" {
                args.push("--robust");
            }
            let got = pondus_json(&args);
            let what = format!("{fixture} {method} {inference}");
            let vc = &got["variance_components"];
            close(
                &format!("{what} σ²_between"),
                num(&vc[0]["estimate"]),
                num(&r["sigma2_between"]),
                MULTILEVEL_REF_REL,
                BOUNDARY_ABS,
            );
            close(
                &format!("{what} σ²_within"),
                num(&vc[1]["estimate"]),
                num(&r["sigma2_within"]),
                MULTILEVEL_REF_REL,
                BOUNDARY_ABS,
            );
            // The maximised likelihood is flat at the optimum: it agrees far
            // better than the parameters.
            close(
                &format!("{what} log-likelihood"),
                num(&got["model"]["log_likelihood"]),
                num(&r["log_likelihood"]),
                MULTILEVEL_REF_REL * 1e-3,
                REFERENCE_ABS,
            );
            let lr = &got["clustering"]["lr_tests"];
            close(
                &format!("{what} LR within"),
                num(&lr[0]["statistic"]),
                num(&r["lr_within"]),
                MULTILEVEL_REF_REL,
                1e-7,
            );
            close(
                &format!("{what} LR between"),
                num(&lr[1]["statistic"]),
                num(&r["lr_between"]),
                MULTILEVEL_REF_REL,
                1e-7,
            );
            let se_key = if inference == "z" { "se_z" } else { "se_kh" };
            for (j, c) in got["coefficients"].as_array().unwrap().iter().enumerate() {
                close(
                    &format!("{what} β{j}"),
                    num(&c["estimate"]),
                    num(&r["beta"][j]),
                    MULTILEVEL_REF_REL,
                    1e-9,
                );
                close(
                    &format!("{what} se{j}"),
                    num(&c["se"]),
                    num(&r[se_key][j]),
                    MULTILEVEL_REF_REL,
                    0.0,
                );
                if method == "reml" {
                    let rc = &r["robust_three_level"]["coefficients"][j];
                    for key in ["robust_se", "robust_df", "robust_p"] {
                        close(
                            &format!("{what} {key}{j}"),
                            num(&c[key]),
                            num(&rc[key]),
                            MULTILEVEL_REF_REL,
                            0.0,
                        );
                    }
                    for (key, bound) in [("robust_ci_low", "ci_low"), ("robust_ci_high", "ci_high")]
                    {
                        close(
                            &format!("{what} {key}{j}"),
                            num(&c["robust_ci"][bound]),
                            num(&rc[key]),
                            MULTILEVEL_REF_REL,
                            1e-12,
                        );
                    }
                }
            }
            if method == "reml" {
                let ci = &r["profile_ci_minimize_scalar"];
                for (i, level) in ["between", "within"].iter().enumerate() {
                    close(
                        &format!("{what} {level} ci_low"),
                        num(&vc[i]["ci_low"]),
                        num(&ci[level][0]),
                        MULTILEVEL_REF_REL,
                        BOUNDARY_ABS,
                    );
                    close(
                        &format!("{what} {level} ci_high"),
                        num(&vc[i]["ci_high"]),
                        num(&ci[level][1]),
                        MULTILEVEL_REF_REL,
                        BOUNDARY_ABS,
                    );
                }
                let htz = &r["robust_three_level"]["htz"];
                let mt = &got["moderator_test"];
                for key in ["statistic", "df2", "p"] {
                    close(
                        &format!("{what} HTZ {key}"),
                        num(&mt[key]),
                        num(&htz[key]),
                        MULTILEVEL_REF_REL,
                        0.0,
                    );
                }
            }
        }
    }
    // The two-level working model with robust inference.
    let mut args = base.clone();
    args.extend(["--levels", "2", "--robust"]);
    let got = pondus_json(&args);
    let r = &reference["fits"]["reml"]["robust_two_level"];
    close(
        "two-level τ²",
        num(&got["tau2"]["estimate"]),
        num(&r["tau2"]),
        MULTILEVEL_REF_REL,
        BOUNDARY_ABS,
    );
    for (j, c) in got["coefficients"].as_array().unwrap().iter().enumerate() {
        for key in ["robust_se", "robust_df", "robust_p"] {
            close(
                &format!("two-level {key}{j}"),
                num(&c[key]),
                num(&r["coefficients"][j][key]),
                MULTILEVEL_REF_REL,
                0.0,
            );
        }
        for (key, bound) in [("robust_ci_low", "ci_low"), ("robust_ci_high", "ci_high")] {
            close(
                &format!("two-level {key}{j}"),
                num(&c["robust_ci"][bound]),
                num(&r["coefficients"][j][key]),
                MULTILEVEL_REF_REL,
                1e-12,
            );
        }
    }
    for key in ["statistic", "df2", "p"] {
        close(
            &format!("two-level HTZ {key}"),
            num(&got["moderator_test"][key]),
            num(&r["htz"][key]),
            MULTILEVEL_REF_REL,
            0.0,
        );
    }
    assert!(got.get("variance_components").is_none());
}

#[test]
fn bcg_with_invented_clusters_matches_the_dense_scipy_reference() {
    // σ²_between is on the boundary 0 here: the boundary profile is checked.
    check(
        "multilevel_bcg.json",
        "bcg_clusters.csv",
        "group",
        &["ablat"],
    );
}

#[test]
fn simulated_clusters_with_two_moderator_levels_match_the_dense_scipy_reference() {
    // Interior optimum; the HTZ test has two contrasts.
    check(
        "multilevel_sim.json",
        "sim_clusters.csv",
        "lab",
        &["x_between", "x_within"],
    );
}

#[test]
fn moderator_levels_and_notes_are_reported() {
    let p = repo("tests/data/reference/multilevel/sim_clusters.csv");
    let got = pondus_json(&[
        p.to_str().unwrap(),
        "--cluster",
        "lab",
        "--moderator",
        "x_between",
        "--moderator",
        "x_within",
    ]);
    let levels = &got["clustering"]["moderator_levels"];
    assert_eq!(levels[0]["level"], "between");
    assert_eq!(levels[1]["level"], "within");
    assert_eq!(got["clustering"]["clusters"], 30);
    let notes = got["notes"].to_string();
    assert!(notes.contains("hold a single effect"), "{notes}");
    // Without --robust no robust keys.
    assert!(got["coefficients"][0].get("robust_se").is_none());
    assert!(got["moderator_test"].get("method").is_none());
}

/// One simulated data set of `m` clusters of `n` effects with a moderator
/// constant within clusters and no effect of it.
fn simulate(
    rng: &mut Xoshiro256StarStar,
    m: usize,
    n: usize,
) -> (Vec<f64>, Vec<f64>, Vec<f64>, Clusters) {
    let (sb, sw) = (0.10f64, 0.02f64);
    let (mut y, mut v, mut x, mut ids) = (vec![], vec![], vec![], vec![]);
    for j in 0..m {
        let xb = rng.next_normal();
        let u = sb.sqrt() * rng.next_normal();
        for _ in 0..n {
            let vi = 0.01 + 0.04 * rng.next_open01();
            y.push(0.2 + u + sw.sqrt() * rng.next_normal() + vi.sqrt() * rng.next_normal());
            v.push(vi);
            x.extend([1.0, xb]);
            ids.push(j.to_string());
        }
    }
    (y, v, x, Clusters::from_ids(&ids))
}

#[test]
fn ignoring_dependence_inflates_the_moderator_test_and_the_three_level_and_robust_tests_do_not() {
    // Published finding (see the module docs): with 20 clusters of 4
    // effects, σ²_b = 0.10, σ²_w = 0.02 and a between-cluster moderator with
    // no effect, the naive two-level Knapp–Hartung test is too liberal.
    // R = 300 replications (a few seconds in a debug build); the Monte-Carlo
    // SE at 5 % is √(0.05·0.95/300) = 0.0126, so a tolerance of 3 SE gives
    // [0.012, 0.088] for the valid tests; the naive test's expected rate is
    // about 0.2 (design effect ≈ 1 + 3·0.67), far above 0.10.
    const R: usize = 300;
    let mut rng = Xoshiro256StarStar::seed_from_u64(20261201);
    let opts = FitOptions {
        method: Tau2Method::Reml,
        inference: Inference::Kh,
        level: 0.95,
    };
    let (mut naive, mut three, mut robust) = (0usize, 0usize, 0usize);
    for _ in 0..R {
        let (y, v, x, cl) = simulate(&mut rng, 20, 4);
        let f2 = model::fit_parts(&y, &v, &x, 2, opts, false).unwrap();
        let t2 = f2.beta[1] / f2.cov[(1, 1)].sqrt();
        if pondus::dist::t_two_sided_p(t2, (f2.k - 2) as f64) < 0.05 {
            naive += 1;
        }
        let (f3, t) = multilevel::fit(&y, &v, &x, 2, &cl, opts, false).unwrap();
        let t3 = f3.beta[1] / f3.cov[(1, 1)].sqrt();
        if pondus::dist::t_two_sided_p(t3, (f3.k - 2) as f64) < 0.05 {
            three += 1;
        }
        let (_, rc, _) = multilevel::robust(
            &y,
            &v,
            &x,
            2,
            &cl,
            t.components.between,
            t.components.within,
        )
        .unwrap();
        if rc[1].p < 0.05 {
            robust += 1;
        }
    }
    let rate = |c: usize| c as f64 / R as f64;
    let se = (0.05f64 * 0.95 / R as f64).sqrt();
    eprintln!(
        "rejection rates: naive {}, three-level {}, robust {}",
        rate(naive),
        rate(three),
        rate(robust)
    );
    assert!(rate(naive) > 0.10, "naive rate {}", rate(naive));
    for (what, c) in [("three-level", three), ("robust CR2", robust)] {
        assert!(
            (rate(c) - 0.05).abs() <= 3.0 * se,
            "{what} rate {} outside 0.05 ± {:.3}",
            rate(c),
            3.0 * se
        );
    }
}

fn fails(args: &[&str]) -> String {
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .args(args)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(2),
        "{:?}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stderr).into_owned()
}

#[test]
fn bad_input_is_refused_with_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("missing.csv");
    std::fs::write(
        &missing,
        "study,paper,effect,variance\na,p1,0.1,0.02\nb,p1,0.2,0.03\nc,,0.3,0.02\nd,p2,0.4,0.05\n",
    )
    .unwrap();
    let m = missing.to_str().unwrap();
    let e = fails(&[m, "--cluster", "paper"]);
    assert!(e.contains("line 4") && e.contains("'paper'"), "{e}");
    let e = fails(&[m, "--cluster", "nope"]);
    assert!(e.contains("nope"), "{e}");
    let e = fails(&[m, "--robust"]);
    assert!(e.contains("--cluster"), "{e}");
    for flag in ["--loo", "--influence", "--small-study"] {
        let e = fails(&[m, "--cluster", "paper", flag]);
        assert!(e.contains(flag), "{e}");
    }
    let e = fails(&[m, "--cluster", "paper", "--levels", "2"]);
    assert!(e.contains("--robust"), "{e}");
    // More terms than clusters under --robust: 3 clusters, 3 coefficients.
    let few = dir.path().join("few.csv");
    std::fs::write(
        &few,
        "study,paper,effect,variance,x,z\na,p1,0.1,0.02,1,0\nb,p1,0.2,0.03,2,1\nc,p2,0.3,0.02,3,0\n\
         d,p2,0.4,0.05,1,1\ne,p3,0.1,0.02,2,0\nf,p3,0.5,0.04,0,1\n",
    )
    .unwrap();
    let e = fails(&[
        few.to_str().unwrap(),
        "--cluster",
        "paper",
        "--moderator",
        "x",
        "--moderator",
        "z",
        "--robust",
    ]);
    assert!(e.contains("clusters cannot support"), "{e}");
    let e = fails(&[few.to_str().unwrap(), "--cluster", "paper", "--tau2", "dl"]);
    assert!(e.contains("reml"), "{e}");
}

#[test]
fn terminal_report_of_the_invented_example_shows_the_cluster_section() {
    // The documented example (data-examples/lab-conditions.csv, invented):
    // the section's parts are printed and the refusal words are not.
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .args([
            "fit",
            repo("data-examples/lab-conditions.csv").to_str().unwrap(),
        ])
        .args([
            "--cluster",
            "lab",
            "--moderator",
            "lab_years",
            "--moderator",
            "session_minutes",
        ])
        .arg("--robust")
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    for part in [
        "Dependent effects: 39 effects in 16 clusters of 'lab'",
        "between clusters",
        "within clusters",
        "LR test of within-cluster variance",
        "lab_years (between",
        "(within clusters)",
        "Cluster-robust inference",
        "robust SE",
        "(between + within clusters, below)",
    ] {
        assert!(text.contains(part), "missing '{part}' in:\n{text}");
    }
    assert!(!text.contains("fixed by the common-effect model"), "{text}");
}

/// Issue 22: with `--robust` the main coefficient table shows one p per
/// term, the cluster-robust one, with the robust SE and interval; the
/// model-based SE stays visible in the cluster-robust table beside them.
#[test]
fn robust_main_table_shows_the_robust_inference_once() {
    let args = [
        "fit",
        "data-examples/lab-conditions.csv",
        "--cluster",
        "lab",
        "--moderator",
        "lab_years",
        "--moderator",
        "session_minutes",
        "--robust",
    ];
    let data = repo("data-examples/lab-conditions.csv");
    let mut json_args = args[1..].to_vec();
    json_args[0] = data.to_str().unwrap();
    let got = pondus_json(&json_args);
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .current_dir(repo(""))
        .args(args)
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    let main = text
        .split("Coefficients — cluster-robust (CR2)")
        .nth(1)
        .and_then(|t| t.split("\n\n").next())
        .unwrap_or_else(|| panic!("no robust coefficient table:\n{text}"));
    for c in got["coefficients"].as_array().unwrap() {
        let term = c["term"].as_str().unwrap();
        let row = main
            .lines()
            .find(|l| l.trim_start().starts_with(&format!("{term} ")))
            .unwrap_or_else(|| panic!("{term} missing:\n{main}"));
        let se = format!("{:.4}", c["robust_se"].as_f64().unwrap());
        let p = format!("{:.4}", c["robust_p"].as_f64().unwrap());
        let model_p = format!("{:.4}", c["p"].as_f64().unwrap());
        assert!(row.contains(&se) && row.ends_with(&p), "{row}");
        assert!(!row.contains(&model_p) || model_p == p, "{row}");
    }
}
