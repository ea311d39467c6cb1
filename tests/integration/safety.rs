//! The few-study safeguards through the binary: `--inference kh-floor` and
//! the floored answer shown beside the chosen one, prediction intervals on
//! t(k − p − 1) (none when k − p − 1 < 1), and the between–within degrees
//! of freedom of the three-level model (docs/methods.md §5, §7, §16.1).

use crate::util::{close, repo};
use assert_cmd::Command;
use serde_json::Value;
use std::path::PathBuf;
use tempfile::TempDir;

fn run(csv: &str, args: &str) -> (TempDir, Value, String) {
    let dir = tempfile::tempdir().expect("temp dir");
    let data = dir.path().join("data.csv");
    std::fs::write(&data, csv).expect("write input");
    let json = dir.path().join("out.json");
    let out = Command::cargo_bin("pondus")
        .expect("binary")
        .arg("fit")
        .arg(&data)
        .args(args.split_whitespace())
        .arg("--json")
        .arg(&json)
        .output()
        .expect("run pondus");
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert!(out.status.success(), "{args}: {err}");
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    let j: Value = serde_json::from_slice(&std::fs::read(&json).expect("json")).expect("JSON");
    (dir, j, text)
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn notes(j: &Value) -> String {
    j["notes"]
        .as_array()
        .expect("notes")
        .iter()
        .map(|n| n.as_str().unwrap().to_string())
        .collect::<Vec<_>>()
        .join("\n")
}

/// Nine invented studies that agree far more closely than their sampling
/// variances imply (s² well below 1), with one moderator.
const CLOSE: &str = "study,effect,variance,dose\n\
A,0.20,0.04,1\nB,0.22,0.05,2\nC,0.21,0.04,3\nD,0.25,0.06,4\nE,0.24,0.05,5\n\
F,0.27,0.04,6\nG,0.26,0.05,7\nH,0.29,0.06,8\nI,0.30,0.04,9\n";

#[test]
fn a_factor_below_one_shows_the_floored_answer_beside_the_default() {
    let (_d, kh, _) = run(CLOSE, "--moderator dose");
    let s2 = num(&kh["model"]["scale_factor"]);
    assert!(s2 < 1.0, "s² = {s2}");
    assert_eq!(num(&kh["model"]["kh_scale"]), s2);
    let f = &kh["floored"];
    assert!(f.is_object(), "no floored answer: {kh}");
    close("floored factor", num(&f["scale_factor"]), s2, 1e-12, 0.0);
    assert!(notes(&kh).contains("floored at 1"), "{}", notes(&kh));
    // The floored answer is what --inference kh-floor gives.
    let (_d, floor, _) = run(CLOSE, "--moderator dose --inference kh-floor");
    assert_eq!(floor["model"]["inference"], "kh-floor");
    assert_eq!(num(&floor["model"]["kh_scale"]), 1.0);
    assert!(floor.get("floored").is_none());
    assert!(
        notes(&floor).contains("was floored at 1"),
        "{}",
        notes(&floor)
    );
    let (fm, ft) = (&f["moderator_test"], &floor["moderator_test"]);
    close(
        "floored F",
        num(&fm["statistic"]),
        num(&ft["statistic"]),
        1e-12,
        0.0,
    );
    close("floored p", num(&fm["p"]), num(&ft["p"]), 1e-12, 0.0);
    let fa = &f["average"];
    close(
        "floored average SE",
        num(&fa["se"]),
        num(&floor["average"]["se"]),
        1e-12,
        0.0,
    );
    close(
        "floored CI",
        num(&fa["ci_low"]),
        num(&floor["average"]["ci_low"]),
        1e-12,
        0.0,
    );
    // kh-floor's standard errors are the model-based (z) ones, its tests t.
    let (_d, z, _) = run(CLOSE, "--moderator dose --inference z");
    for j in 0..2 {
        let se = |r: &Value| num(&r["coefficients"][j]["se"]);
        close("kh-floor SE = z SE", se(&floor), se(&z), 1e-12, 0.0);
        assert!(se(&kh) < se(&z), "kh SE not below z SE with s² < 1");
    }
    assert!(
        z["floored"].is_object(),
        "the floored answer is shown under z too"
    );
    // The same conclusion or not is said plainly, and agrees with the numbers.
    let differs = f["conclusion_differs"].as_bool().expect("bool");
    let kh_sig = kh["moderator_test"]["significant"].as_bool().unwrap();
    let fl_sig = fm["significant"].as_bool().unwrap();
    let excl = |lo: f64, hi: f64| lo > 0.0 || hi < 0.0;
    let avg_kh = excl(
        num(&kh["average"]["ci_low"]),
        num(&kh["average"]["ci_high"]),
    );
    let avg_fl = excl(num(&fa["ci_low"]), num(&fa["ci_high"]));
    assert_eq!(differs, kh_sig != fl_sig || avg_kh != avg_fl);
    let said = if differs {
        "The conclusion differs"
    } else {
        "The conclusion is the same"
    };
    assert!(notes(&kh).contains(said), "{}", notes(&kh));
}

#[test]
fn a_factor_above_one_leaves_kh_floor_equal_to_kh() {
    let csv =
        "study,effect,variance\nA,0.1,0.01\nB,0.6,0.02\nC,-0.2,0.01\nD,0.9,0.03\nE,0.3,0.02\n";
    let (_d, kh, _) = run(csv, "");
    let (_d, floor, _) = run(csv, "--inference kh-floor");
    assert!(num(&kh["model"]["scale_factor"]) > 1.0);
    assert!(kh.get("floored").is_none());
    for key in ["se", "ci_low", "ci_high", "pi_low", "pi_high"] {
        assert_eq!(kh["average"][key], floor["average"][key], "{key}");
    }
}

#[test]
fn the_prediction_interval_uses_t_on_k_minus_2_with_the_unscaled_se() {
    // Five invented studies, no moderators: PI = μ̂ ± t(3)·√(SE_z² + τ̂²),
    // SE_z the model-based SE (the z run's), when it is the larger one.
    let csv =
        "study,effect,variance\nA,0.10,0.02\nB,0.45,0.03\nC,0.20,0.01\nD,0.60,0.04\nE,0.05,0.02\n";
    let (_d, kh, _) = run(csv, "");
    let (_d, z, _) = run(csv, "--inference z");
    let tau2 = num(&kh["tau2"]["estimate"]);
    let (mu, se_z, se_kh) = (
        num(&kh["average"]["estimate"]),
        num(&z["average"]["se"]),
        num(&kh["average"]["se"]),
    );
    // t(3) 97.5% point: scipy 1.16.3 stats.t.ppf(0.975, 3).
    let t3 = 3.182446305284263;
    // Under kh the larger of the two variances (never narrower than the CI);
    // under z the SE is the model-based one.
    for (r, se) in [(&kh, se_z.max(se_kh)), (&z, se_z)] {
        let half = t3 * (se * se + tau2).sqrt();
        close("pi_low", num(&r["average"]["pi_low"]), mu - half, 1e-9, 0.0);
        close(
            "pi_high",
            num(&r["average"]["pi_high"]),
            mu + half,
            1e-9,
            0.0,
        );
    }
    assert!(num(&kh["average"]["pi_low"]) <= num(&kh["average"]["ci_low"]));
}

#[test]
fn two_studies_give_no_prediction_interval_and_say_why() {
    let csv = "study,effect,variance\nA,0.30,0.02\nB,0.31,0.02\n";
    let (_d, j, text) = run(csv, "");
    assert!(j["average"]["pi_low"].is_null() && j["average"]["pi_high"].is_null());
    assert!(
        notes(&j).contains("No prediction interval"),
        "{}",
        notes(&j)
    );
    assert!(!text.contains("NaN"), "{text}");
    // Two nearly identical studies: the default SE is far below the
    // model-based one, and the floored answer is shown beside it.
    assert!(j["floored"].is_object());
    assert!(num(&j["floored"]["average"]["se"]) > num(&j["average"]["se"]));
    // A forest plot without an interval to draw still renders.
    let dir = tempfile::tempdir().expect("temp dir");
    let data = dir.path().join("two.csv");
    std::fs::write(&data, csv).unwrap();
    let svg = dir.path().join("forest.svg");
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .arg(&data)
        .arg("--forest")
        .arg(&svg)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let s = std::fs::read_to_string(&svg).unwrap();
    assert!(!s.contains("NaN") && s.contains("none"), "forest SVG");
}

fn lab_conditions() -> PathBuf {
    repo("data-examples/lab-conditions.csv")
}

#[test]
fn three_level_terms_use_the_df_of_their_level() {
    let csv = std::fs::read_to_string(lab_conditions()).expect("example");
    let (_d, j, _) = run(
        &csv,
        "--cluster lab --moderator lab_years --moderator session_minutes",
    );
    let k = num(&j["k"]);
    let m = num(&j["clustering"]["clusters"]);
    let levels = j["clustering"]["moderator_levels"].as_array().unwrap();
    let within: Vec<&str> = levels
        .iter()
        .filter(|l| l["level"] == "within")
        .map(|l| l["term"].as_str().unwrap())
        .collect();
    let coefs = j["coefficients"].as_array().unwrap();
    let p = coefs.len() as f64;
    let p_w = within.len() as f64;
    assert!(
        p_w >= 1.0 && p_w < p - 1.0,
        "the example has both kinds of term"
    );
    let p_b = p - p_w;
    for c in coefs {
        let term = c["term"].as_str().unwrap();
        let want = if within.contains(&term) {
            k - m - p_w
        } else {
            m - p_b
        };
        assert_eq!(num(&c["df"]), want, "{term}");
    }
    assert_eq!(num(&j["moderator_test"]["df2"]), m - p_b);
    assert!(notes(&j).contains("between–within rule"), "{}", notes(&j));
    // The three-level prediction interval uses m − p_b − 1 df.
    let avg = &j["average"];
    assert!(num(&avg["pi_low"]) < num(&avg["ci_low"]));
}
