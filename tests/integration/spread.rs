//! `--spread-by` (issue 17, item 1): the location-scale model through the
//! binary's JSON against the independent scipy script
//! `tests/reference/heterogeneity.py` (fixtures `spread.json`), on an
//! invented data set (`spread_k40.csv`, made by that script) and the BCG
//! vaccine trials (Colditz et al. 1994, JAMA 271:698, an open published data
//! set); invariances (row order, the reference level of a categorical
//! spread term); bad input and refused combinations.

use crate::heterogeneity::{case, load, near, num, pondus_json};
use crate::util::repo;
use assert_cmd::Command;
use pondus::tolerance::{HETEROGENEITY_REF, SPREAD_SE_REF};
use serde_json::Value;

const K40: &str = "tests/data/reference/heterogeneity/spread_k40.csv";
const BCG: &str = "tests/data/reference/bcg.csv";

/// Every number of one fixture case against the binary's JSON: α and its
/// Wald z, SE (to 1e-2), β and its SE from (X'WX)⁻¹ at the fitted τ_i²,
/// each τ_i², both log-likelihoods and the LR test.
fn check_case(got: &Value, want: &Value) {
    let s = &got["spread"];
    let tol = HETEROGENEITY_REF;
    let coefs = s["coefficients"].as_array().unwrap();
    let alpha = want["alpha"].as_array().unwrap();
    assert_eq!(coefs.len(), alpha.len());
    for (c, a) in coefs.iter().zip(alpha) {
        assert_eq!(c["term"], a["term"]);
        let what = format!("alpha {}", a["term"]);
        near(&what, num(&c["estimate"]), num(&a["estimate"]), tol);
        near(&what, num(&c["se"]), num(&a["se"]), SPREAD_SE_REF);
        let z = num(&a["estimate"]) / num(&a["se"]);
        near(&what, num(&c["statistic"]), z, SPREAD_SE_REF);
    }
    let coefficients = got["coefficients"].as_array().unwrap();
    for (c, b) in coefficients.iter().zip(want["beta"].as_array().unwrap()) {
        assert_eq!(c["term"], b["term"]);
        near("beta", num(&c["estimate"]), num(&b["estimate"]), tol);
        near("beta SE", num(&c["se"]), num(&b["se"]), tol);
        assert!(c["df"].is_null(), "Wald z: no df");
    }
    for (st, t) in s["studies"]
        .as_array()
        .unwrap()
        .iter()
        .zip(want["tau2_each"].as_array().unwrap())
    {
        near("tau2_i", num(&st["tau2"]), num(t), tol);
    }
    near(
        "log-likelihood",
        num(&s["log_likelihood"]),
        num(&want["log_likelihood"]),
        tol,
    );
    near(
        "one-tau2 log-likelihood",
        num(&s["log_likelihood_one_tau2"]),
        num(&want["log_likelihood_one_tau2"]),
        tol,
    );
    for key in ["statistic", "p"] {
        near(key, num(&s["test"][key]), num(&want["test"][key]), tol);
    }
    assert_eq!(s["test"]["df"], want["test"]["df"]);
}

/// The invented data (groups a and b, τ² 0.02 and 0.15 by construction)
/// by REML and by ML with two spread terms, and the BCG trials with
/// absolute latitude as mean and spread term.
#[test]
fn spread_by_matches_scipy_through_the_binary() {
    let f = load("spread.json");
    let k40 = repo(K40);
    let k40 = k40.to_str().unwrap();
    let got = pondus_json(&[k40, "--moderator", "size_100", "--spread-by", "group"]);
    check_case(&got, case(&f, "spread_k40_group_reml"));
    // τ² at each level: exp(α₀) and exp(α₀ + α₁).
    let a = &case(&f, "spread_k40_group_reml")["alpha"];
    let by = got["spread"]["tau2_by"].as_array().unwrap();
    near(
        "tau2 at a",
        num(&by[0]["tau2"]),
        num(&a[0]["estimate"]).exp(),
        HETEROGENEITY_REF,
    );
    near(
        "tau2 at b",
        num(&by[1]["tau2"]),
        (num(&a[0]["estimate"]) + num(&a[1]["estimate"])).exp(),
        HETEROGENEITY_REF,
    );
    let got = pondus_json(&[
        k40,
        "--moderator",
        "size_100",
        "--spread-by",
        "group",
        "--spread-by",
        "size_100",
        "--tau2",
        "ml",
    ]);
    check_case(&got, case(&f, "spread_k40_group_size_ml"));
    assert_eq!(got["spread"]["method"], "ml");
    let bcg = repo(BCG);
    let got = pondus_json(&[
        bcg.to_str().unwrap(),
        "--measure",
        "log-rr",
        "--moderator",
        "ablat",
        "--spread-by",
        "ablat",
    ]);
    check_case(&got, case(&f, "bcg_ablat_reml"));
    // A numeric term: τ² at the mean and ±1 SD of ablat.
    let by = got["spread"]["tau2_by"].as_array().unwrap();
    let ats: Vec<&str> = by.iter().map(|b| b["at"].as_str().unwrap()).collect();
    assert_eq!(ats, ["mean-1sd", "mean", "mean+1sd"]);
}

fn write(dir: &std::path::Path, name: &str, text: &str) -> String {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p.to_str().unwrap().to_string()
}

/// Reversing the rows leaves every estimate unchanged (studies reversed);
/// recoding the reference level of the spread term changes α but leaves
/// every fitted τ_i², the LR test and β unchanged.
#[test]
fn spread_by_is_invariant_to_row_order_and_reference_level() {
    let text = std::fs::read_to_string(repo(K40)).unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    let header = lines.remove(0);
    lines.reverse();
    let dir = tempfile::tempdir().unwrap();
    let rev = write(
        dir.path(),
        "rev.csv",
        &format!("{header}\n{}\n", lines.join("\n")),
    );
    let k40 = repo(K40);
    let base_args = ["--moderator", "size_100", "--spread-by", "group"];
    let mut args = vec![k40.to_str().unwrap()];
    args.extend(base_args);
    let a = pondus_json(&args);
    let mut args = vec![rev.as_str()];
    args.extend(base_args);
    let b = pondus_json(&args);
    let mut args = vec![k40.to_str().unwrap()];
    args.extend(base_args);
    args.extend(["--reference", "group=b"]);
    let c = pondus_json(&args);
    let tight = 1e-7;
    let sa = a["spread"]["studies"].as_array().unwrap();
    let sb = b["spread"]["studies"].as_array().unwrap();
    let sc = c["spread"]["studies"].as_array().unwrap();
    for (i, s) in sa.iter().enumerate() {
        let r = &sb[sa.len() - 1 - i];
        assert_eq!(s["study"], r["study"]);
        near("reversed tau2_i", num(&r["tau2"]), num(&s["tau2"]), tight);
        near(
            "recoded tau2_i",
            num(&sc[i]["tau2"]),
            num(&s["tau2"]),
            tight,
        );
    }
    for other in [&b, &c] {
        near(
            "LR",
            num(&other["spread"]["test"]["statistic"]),
            num(&a["spread"]["test"]["statistic"]),
            tight,
        );
        for j in 0..2 {
            near(
                "beta",
                num(&other["coefficients"][j]["estimate"]),
                num(&a["coefficients"][j]["estimate"]),
                tight,
            );
        }
    }
    // The recoded α: the intercept is now group b's ln τ², the slope negated.
    let ca = &a["spread"]["coefficients"];
    let cc = &c["spread"]["coefficients"];
    assert_eq!(cc[1]["term"], "group=a");
    near(
        "recoded slope",
        num(&cc[1]["estimate"]),
        -num(&ca[1]["estimate"]),
        1e-6,
    );
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
        "expected exit 2 for {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// Unknown column, a constant spread term, a level with one study, too few
/// studies, and every refused estimator, inference and combination: a
/// message naming the problem and exit 2.
#[test]
fn spread_by_bad_input_and_refused_combinations() {
    let dir = tempfile::tempdir().unwrap();
    let k40 = repo(K40);
    let k40 = k40.to_str().unwrap();
    let e = fails(&[k40, "--spread-by", "grup"]);
    assert!(e.contains("grup") && e.contains("--spread-by"), "{e}");
    let flat = write(
        dir.path(),
        "flat.csv",
        "study,effect,variance,c,g\ns1,0.1,0.01,1,a\ns2,0.5,0.02,1,a\ns3,0.2,0.01,1,b\n\
         s4,0.9,0.03,1,b\ns5,0.3,0.02,1,c\ns6,0.7,0.01,1,b\n",
    );
    let e = fails(&[&flat, "--spread-by", "c"]);
    assert!(e.contains("same value") && e.contains("'c'"), "{e}");
    let e = fails(&[&flat, "--spread-by", "g"]);
    assert!(e.contains("level 'c'") && e.contains("single study"), "{e}");
    let few = write(
        dir.path(),
        "few.csv",
        "study,effect,variance,x\ns1,0.1,0.01,1\ns2,0.5,0.02,2\ns3,0.2,0.01,3\n",
    );
    let e = fails(&[&few, "--moderator", "x", "--spread-by", "x"]);
    assert!(e.contains("too few") && e.contains("at least 5"), "{e}");
    let e = fails(&[k40, "--spread-by", "group", "--tau2", "dl"]);
    assert!(e.contains("--tau2 reml") && e.contains("'dl'"), "{e}");
    for inf in ["kh", "kh-floor"] {
        let e = fails(&[k40, "--spread-by", "group", "--inference", inf]);
        assert!(e.contains("Wald z") && e.contains("--inference z"), "{e}");
    }
    for extra in [
        &["--cluster", "group"][..],
        &["--at", "size_100=1", "--moderator", "size_100"],
        &["--beyond", "0.2"],
        &["--all-subsets", "--moderator", "size_100"],
        &["--loo"],
        &["--influence"],
        &["--small-study"],
        &["--cumulative-by", "study"],
    ] {
        let mut args = vec![k40, "--spread-by", "group"];
        args.extend_from_slice(extra);
        let e = fails(&args);
        assert!(
            e.contains(extra[0]) && e.contains("not available with --spread-by"),
            "{extra:?}: {e}"
        );
    }
    // --inference z is accepted (and is the default with --spread-by).
    let got = pondus_json(&[k40, "--spread-by", "group", "--inference", "z"]);
    assert_eq!(got["model"]["inference"], "z");
    let got = pondus_json(&[k40, "--spread-by", "group"]);
    assert_eq!(got["model"]["inference"], "z");
}

/// `--shrink` under the location-scale model shrinks each study by its own
/// τ̂_i²: B_i = τ̂_i²/(τ̂_i² + v_i).
#[test]
fn spread_by_with_shrink_uses_each_studys_tau2() {
    let k40 = repo(K40);
    let got = pondus_json(&[k40.to_str().unwrap(), "--spread-by", "group", "--shrink"]);
    for (s, sp) in got["studies"]
        .as_array()
        .unwrap()
        .iter()
        .zip(got["spread"]["studies"].as_array().unwrap())
    {
        let t = num(&sp["tau2"]);
        let v = num(&s["variance"]);
        near(
            "own weight",
            num(&s["shrunken"]["own_weight"]),
            t / (t + v),
            1e-12,
        );
    }
}

/// A row left out for a missing `--spread-by` value is said as such in the
/// average's "pools N of M" sentence, not as a missing moderator value.
#[test]
fn a_missing_spread_value_is_named_in_what_the_average_pools() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo("data-examples/consortium-correlations.csv")).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    // The third lab's mode (the last column) left empty.
    let cut = lines[3].rfind(',').unwrap();
    lines[3].truncate(cut + 1);
    let path = write(
        dir.path(),
        "one-mode-missing.csv",
        &(lines.join("\n") + "\n"),
    );
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .args([
            "fit",
            &path,
            "--measure",
            "r",
            "--moderator",
            "session_minutes",
        ])
        .args(["--spread-by", "mode"])
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout)
        .split_whitespace()
        .collect::<Vec<_>>()
        .join(" ");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(stdout.contains("pools 23 of 24 studies"), "{stdout}");
    assert!(
        stdout.contains("missing moderator or spread-characteristic (--spread-by) value"),
        "{stdout}"
    );
}
