//! `pondus sites --one-stage` through the binary: the REML fit from per-site
//! sufficient statistics against a dense-matrix numpy REML and statsmodels
//! 0.14.6 MixedLM (tests/reference/one_stage.py, invented data in
//! tests/data/reference/one_stage/), the boundary τ² = 0, and the same
//! numbers from the rows and from a moments table.

use crate::util::{close, repo};
use assert_cmd::Command;
use pondus::tolerance::{
    ONE_STAGE_REF_REL, ONE_STAGE_STATSMODELS_REL, REFERENCE_ABS, SQL_ROUTE_REL,
};
use serde_json::Value;
use tempfile::TempDir;

const DIR: &str = "tests/data/reference/one_stage";

fn expected() -> Value {
    let text = std::fs::read_to_string(repo(&format!("{DIR}/expected.json"))).unwrap();
    serde_json::from_str(&text).unwrap()
}

/// Runs `pondus sites` with `args` and `--json`; returns the JSON and stdout.
fn run(dir: &TempDir, args: &[&str]) -> (Value, String) {
    let json = dir.path().join("out.json");
    let o = Command::cargo_bin("pondus")
        .unwrap()
        .current_dir(repo(DIR))
        .arg("sites")
        .args(args)
        .arg("--json")
        .arg(&json)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&o.stdout).to_string();
    assert!(
        o.status.success(),
        "{stdout}\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let v = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    (v, stdout)
}

/// The one-stage terms of the JSON in the reference's order.
fn terms(os: &Value, names: &[String]) -> Vec<Value> {
    names
        .iter()
        .map(|n| match n.as_str() {
            "slope" | "w_within" | "within_interaction" | "across_interaction" => os[n].clone(),
            other => {
                let name = other.strip_prefix("x_").unwrap_or(other);
                os["covariates"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .chain(os["characteristics"].as_array().unwrap())
                    .find(|t| t["name"] == name)
                    .unwrap_or_else(|| panic!("term {other}"))
                    .clone()
            }
        })
        .collect()
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("{v}"))
}

/// pondus's fit against both reference routes.
fn check(os: &Value, model: &str) {
    let e = &expected()["models"][model];
    let names: Vec<String> = e["terms"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t.as_str().unwrap().to_string())
        .collect();
    assert_eq!(os["sites"], e["sites"], "{model} sites");
    assert_eq!(os["rows"], e["rows"], "{model} rows");
    let got = terms(os, &names);
    let dense = &e["dense"];
    for (i, (g, n)) in got.iter().zip(&names).enumerate() {
        let what = format!("{model} {n}");
        close(
            &what,
            f(&g["estimate"]),
            f(&dense["estimate"][i]),
            ONE_STAGE_REF_REL,
            REFERENCE_ABS,
        );
        close(
            &format!("{what} se"),
            f(&g["se"]),
            f(&dense["se"][i]),
            ONE_STAGE_REF_REL,
            REFERENCE_ABS,
        );
        if let Some(sm) = e.get("statsmodels") {
            close(
                &format!("{what} (statsmodels)"),
                f(&g["estimate"]),
                f(&sm["beta"][i]),
                ONE_STAGE_STATSMODELS_REL,
                1e-9,
            );
        }
    }
    let var = &os["variance"];
    for (key, ours) in [("tau2", &var["slope"]), ("sigma2", &var["residual"])] {
        close(
            &format!("{model} {key}"),
            f(&ours["estimate"]),
            f(&dense[key]),
            ONE_STAGE_REF_REL,
            REFERENCE_ABS,
        );
        let ci = &dense[format!("{key}_ci")];
        close(
            &format!("{model} {key} ci_low"),
            f(&ours["ci_low"]),
            f(&ci[0]),
            ONE_STAGE_REF_REL,
            REFERENCE_ABS,
        );
        close(
            &format!("{model} {key} ci_high"),
            f(&ours["ci_high"]),
            f(&ci[1]),
            ONE_STAGE_REF_REL,
            REFERENCE_ABS,
        );
        if let Some(sm) = e.get("statsmodels") {
            close(
                &format!("{model} {key} (statsmodels)"),
                f(&ours["estimate"]),
                f(&sm[key]),
                ONE_STAGE_STATSMODELS_REL,
                1e-9,
            );
        }
    }
}

#[test]
fn one_stage_with_a_covariate_matches_the_references() {
    let dir = TempDir::new().unwrap();
    let (v, _) = run(
        &dir,
        &[
            "rows.csv",
            "--site",
            "site",
            "--x",
            "x",
            "--y",
            "y",
            "--w",
            "w",
            "--covariate",
            "c",
            "--one-stage",
        ],
    );
    check(&v["one_stage"], "w_cov");
}

#[test]
fn one_stage_with_a_site_characteristic_matches_the_references() {
    let dir = TempDir::new().unwrap();
    let (v, out) = run(
        &dir,
        &[
            "rows.csv",
            "--site",
            "site",
            "--x",
            "x",
            "--y",
            "y",
            "--w",
            "w",
            "--info",
            "sites.csv",
            "--moderator",
            "s",
            "--one-stage",
            "--fit",
        ],
    );
    check(&v["one_stage"], "w_char");
    // Beside the two-stage answers, in words.
    assert!(out.contains("One-stage model"), "{out}");
    assert!(out.contains("Within sites, the two answers"), "{out}");
    assert!(
        out.contains("Across sites, the estimates are close"),
        "{out}"
    );
    // The smallest sites have too few rows for a per-site product term,
    // but stay in the one-stage model, and the output says so.
    let notes = v["one_stage"]["notes"].to_string();
    assert!(notes.contains("all 24 sites"), "{notes}");
}

#[test]
fn slopes_that_do_not_vary_put_tau2_at_zero() {
    let dir = TempDir::new().unwrap();
    let (v, _) = run(
        &dir,
        &[
            "flat.csv",
            "--site",
            "site",
            "--x",
            "x",
            "--y",
            "y",
            "--w",
            "w",
            "--one-stage",
        ],
    );
    let os = &v["one_stage"];
    check(os, "flat");
    assert_eq!(os["variance"]["slope"]["estimate"], 0.0);
    assert_eq!(os["variance"]["slope"]["ci_low"], 0.0);
    assert_eq!(os["search"]["at_boundary"], true);
    assert!(f(&os["search"]["score_at_zero"]) >= 0.0);
}

/// The rows and the moments table the reference wrote from the same rows
/// give the same one-stage fit: the model is fitted from the per-site
/// summaries alone.
#[test]
fn rows_and_moments_table_give_the_same_one_stage_fit() {
    let dir = TempDir::new().unwrap();
    let (a, _) = run(
        &dir,
        &[
            "rows.csv",
            "--site",
            "site",
            "--x",
            "x",
            "--y",
            "y",
            "--w",
            "w",
            "--covariate",
            "c",
            "--one-stage",
        ],
    );
    let (b, _) = run(
        &dir,
        &[
            "--moments",
            "moments.csv",
            "--w",
            "w",
            "--covariate",
            "c",
            "--one-stage",
        ],
    );
    let (a, b) = (&a["one_stage"], &b["one_stage"]);
    assert_eq!(a["sites"], b["sites"]);
    assert_eq!(a["rows"], b["rows"]);
    for key in [
        "slope",
        "w_within",
        "within_interaction",
        "across_interaction",
    ] {
        for field in ["estimate", "se", "ci_low", "ci_high", "statistic", "p"] {
            close(
                &format!("{key} {field}"),
                f(&b[key][field]),
                f(&a[key][field]),
                SQL_ROUTE_REL,
                REFERENCE_ABS,
            );
        }
    }
    for key in ["slope", "residual"] {
        for field in ["estimate", "ci_low", "ci_high"] {
            close(
                &format!("variance {key} {field}"),
                f(&b["variance"][key][field]),
                f(&a["variance"][key][field]),
                SQL_ROUTE_REL,
                REFERENCE_ABS,
            );
        }
    }
    close(
        "covariate",
        f(&b["covariates"][0]["estimate"]),
        f(&a["covariates"][0]["estimate"]),
        SQL_ROUTE_REL,
        REFERENCE_ABS,
    );
}

/// Without --one-stage the JSON has no `one_stage` key (the existing
/// outputs are unchanged).
#[test]
fn without_the_flag_there_is_no_one_stage_key() {
    let dir = TempDir::new().unwrap();
    let (v, _) = run(
        &dir,
        &[
            "rows.csv", "--site", "site", "--x", "x", "--y", "y", "--w", "w",
        ],
    );
    assert!(v.get("one_stage").is_none());
}
