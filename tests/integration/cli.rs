//! Tests that run the `pondus` binary.
//!
//! Every data set here is invented for the tests. JSON output is parsed and
//! checked by value; the terminal report is checked by a few stable phrases.
//! Command-line arguments are written as one string split at whitespace.

use crate::util::{close, repo};
use assert_cmd::Command;
use pondus::tolerance::IDENTITY_REL;
use serde_json::{json, Value};
use std::path::{Path, PathBuf};
use tempfile::TempDir;

/// Two-sided 95% and 90% normal quantiles.
const Z_95: f64 = 1.959_963_984_540_054;
const Z_90: f64 = 1.644_853_626_951_472_2;
/// Absolute slack for values that are exact up to rounding.
const ABS: f64 = 1e-12;

// ---------------------------------------------------------------- helpers

fn pondus() -> Command {
    Command::cargo_bin("pondus").expect("the pondus binary is built")
}

/// `pondus fit FILE ARGS` with `args` split at whitespace.
fn fit_cmd(file: impl AsRef<Path>, args: &str) -> Command {
    let mut c = pondus();
    c.arg("fit")
        .arg(file.as_ref())
        .args(args.split_whitespace());
    c
}

fn example(name: &str) -> String {
    repo(&format!("data-examples/{name}")).display().to_string()
}

/// Writes `bytes` as `name` in a fresh temporary directory.
fn temp_file(name: &str, bytes: &[u8]) -> (TempDir, PathBuf) {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join(name);
    std::fs::write(&path, bytes).expect("write test input");
    (dir, path)
}

/// Runs `cmd`, expects success, returns stdout.
fn succeeds(cmd: &mut Command) -> Vec<u8> {
    let out = cmd.output().expect("run pondus");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{cmd:?} failed: {err}");
    out.stdout
}

/// Runs `pondus fit FILE ARGS --json -` and parses stdout.
fn fit(file: impl AsRef<Path>, args: &str) -> Value {
    let out = succeeds(fit_cmd(file, args).args(["--json", "-"]));
    serde_json::from_slice(&out).expect("stdout is one JSON document")
}

/// As [`fit`] on inline CSV text.
fn fit_text(csv: &str, args: &str) -> Value {
    let (_dir, path) = temp_file("data.csv", csv.as_bytes());
    fit(&path, args)
}

/// Runs `cmd`, expects exit `code` and an error message without a panic.
fn fails(cmd: &mut Command, code: i32) -> String {
    let out = cmd.output().expect("run pondus");
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(code), "stderr: {err}");
    assert!(!err.contains("panicked"), "{err}");
    assert!(err.contains("error"), "no error message: {err}");
    err
}

/// Runs `pondus fit` on inline CSV that must be refused with exit 2.
/// Returns stderr and the file path as messages show it.
fn bad_input(csv: &str, args: &str) -> (String, String) {
    let (_dir, path) = temp_file("bad.csv", csv.as_bytes());
    let err = fails(&mut fit_cmd(&path, args), 2);
    (err, path.display().to_string())
}

/// Asserts that `text` contains every one of `parts`.
#[track_caller]
fn has_all(text: &str, parts: &[&str]) {
    for p in parts {
        assert!(text.contains(p), "expected {p:?} in:\n{text}");
    }
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn list(v: &Value) -> &Vec<Value> {
    v.as_array().unwrap_or_else(|| panic!("not an array: {v}"))
}

fn strings(v: &Value) -> Vec<&str> {
    list(v)
        .iter()
        .map(|s| s.as_str().expect("string"))
        .collect()
}

fn joined(v: &Value) -> String {
    strings(v).join(" ")
}

fn field<'a>(v: &'a Value, key: &str) -> Vec<&'a Value> {
    list(v).iter().map(|x| &x[key]).collect()
}

fn coef(j: &Value, i: usize) -> f64 {
    num(&j["coefficients"][i]["estimate"])
}

fn width(v: &Value, lo: &str, hi: &str) -> f64 {
    num(&v[hi]) - num(&v[lo])
}

fn study<'a>(j: &'a Value, label: &str) -> &'a Value {
    let found = list(&j["studies"]).iter().find(|s| s["study"] == label);
    found.unwrap_or_else(|| panic!("no study {label}"))
}

#[track_caller]
fn same(what: &str, a: f64, b: f64) {
    close(what, a, b, IDENTITY_REL, ABS);
}

#[track_caller]
fn ordered(what: &str, xs: &[f64]) {
    assert!(xs.windows(2).all(|w| w[0] <= w[1]), "{what}: {xs:?}");
}

/// Checks the schema and the internal consistency of one report; `expected`
/// lists the coefficient terms in order, separated by spaces.
#[track_caller]
fn check_report(j: &Value, expected: &str) {
    let keys = "tool input measure k excluded model tau2 coefficients moderator_test \
                heterogeneity average predictions studies warnings cautions notes";
    for key in keys.split_whitespace() {
        assert!(j.get(key).is_some(), "missing key {key}");
    }
    let expected: Vec<&str> = expected.split_whitespace().collect();
    let (k, p) = (j["k"].as_u64().expect("k") as usize, expected.len());
    let df = (k - p) as f64;
    let z = j["model"]["inference"] == "z";
    let studies = list(&j["studies"]);
    let excluded = list(&j["excluded"]);
    assert_eq!(studies.len(), k);
    assert_eq!(
        Some((k + excluded.len()) as u64),
        j["input"]["rows"].as_u64()
    );
    for e in excluded {
        assert!(e["study"].is_string() && e["line"].as_u64().expect("line") >= 2);
        assert!(!e["reason"].as_str().expect("reason").is_empty());
    }
    let t = &j["tau2"];
    assert!(t["method"].is_string() && t["method"] == j["model"]["tau2_method"]);
    assert!(num(&t["estimate"]) >= 0.0);
    if t["method"] == "none" {
        assert!(t["ci_low"].is_null() && t["ci_high"].is_null());
    } else {
        let (lo, hi) = (num(&t["ci_low"]) - ABS, num(&t["ci_high"]) + ABS);
        ordered("tau2 CI", &[lo, num(&t["estimate"]), hi]);
    }
    let terms: Vec<&str> = field(&j["coefficients"], "term")
        .iter()
        .map(|t| t.as_str().unwrap())
        .collect();
    assert_eq!(terms, expected);
    assert_eq!(strings(&j["model"]["terms"]), expected);
    for c in list(&j["coefficients"]) {
        let (est, se) = (num(&c["estimate"]), num(&c["se"]));
        assert!(
            se > 0.0 && num(&c["ci_low"]) < est && est < num(&c["ci_high"]),
            "{c}"
        );
        same("statistic", num(&c["statistic"]), est / se);
        assert!((0.0..=1.0).contains(&num(&c["p"])), "{c}");
        assert_eq!(c["df"], if z { Value::Null } else { json!(df) });
    }
    let mt = &j["moderator_test"];
    if p == 1 {
        assert!(mt.is_null(), "{mt}");
    } else {
        assert!(num(&mt["statistic"]) >= 0.0 && (0.0..=1.0).contains(&num(&mt["p"])));
        assert_eq!(num(&mt["df1"]), (p - 1) as f64);
        assert_eq!(mt["df2"], if z { Value::Null } else { json!(df) });
    }
    let h = &j["heterogeneity"];
    assert!(num(&h["q"]) >= 0.0 && (0.0..=1.0).contains(&num(&h["p"])));
    assert_eq!(num(&h["df"]), df);
    let i2 = num(&h["i2"]);
    assert!((0.0..=1.0).contains(&i2), "i2 = {i2}");
    same("h2", num(&h["h2"]), 1.0 / (1.0 - i2));
    if !h["r2"].is_null() {
        assert!(
            p > 1 && (0.0..=1.0).contains(&num(&h["r2"])),
            "r2 = {}",
            h["r2"]
        );
    }
    for e in std::iter::once(&j["average"]).chain(list(&j["predictions"])) {
        assert!(num(&e["se"]) > 0.0);
        let keys = ["pi_low", "ci_low", "estimate", "ci_high", "pi_high"];
        ordered("intervals", &keys.map(|key| num(&e[key])));
    }
    let lines: Vec<f64> = field(&j["studies"], "line")
        .iter()
        .map(|l| num(l))
        .collect();
    assert!(
        lines.windows(2).all(|w| w[0] < w[1]),
        "not in input order: {lines:?}"
    );
    let mut total = 0.0;
    for s in studies {
        assert!(s["study"].is_string() && num(&s["variance"]) > 0.0 && num(&s["weight"]) > 0.0);
        same(
            "residual",
            num(&s["residual"]),
            num(&s["effect"]) - num(&s["fitted"]),
        );
        total += num(&s["weight"]);
    }
    same("sum of weights", total, 100.0);
    for key in ["warnings", "cautions", "notes"] {
        strings(&j[key]);
    }
}

/// Checks that `reading` holds `f` of each analysis-scale value of `e`.
#[track_caller]
fn check_reading(e: &Value, f: fn(f64) -> f64) {
    for key in ["estimate", "ci_low", "ci_high", "pi_low", "pi_high"] {
        same(key, num(&e["reading"][key]), f(num(&e[key])));
    }
}

// ----------------------------------------------- 1. measures on the examples

#[test]
fn effect_measure_mixes_variance_se_and_ci_rows() {
    let j = fit(
        example("precomputed-effects.csv"),
        "--moderator duration_weeks",
    );
    check_report(&j, "intercept duration_weeks");
    assert_eq!(
        (&j["measure"]["id"], &j["k"]),
        (&json!("effect"), &json!(10))
    );
    assert!(j["measure"]["reading_name"].is_null() && j["average"]["reading"].is_null());
    let s = list(&j["studies"]);
    same("variance row", num(&s[0]["variance"]), 0.0377);
    same("se row", num(&s[1]["variance"]), 0.090 * 0.090);
    let se = (0.413 + 0.279) / (2.0 * Z_95);
    same("CI row", num(&s[2]["variance"]), se * se);
    same("effect", num(&s[2]["effect"]), 0.067);
}

const CONSORTIUM: &str = "--measure r --moderator session_minutes --moderator mode";

fn consortium(extra: &str) -> Value {
    fit(
        example("consortium-correlations.csv"),
        &format!("{CONSORTIUM} {extra}"),
    )
}

#[test]
fn r_is_analysed_as_fisher_z_and_read_as_r() {
    let j = consortium("");
    check_report(&j, "intercept session_minutes mode=online");
    assert_eq!((&j["measure"]["id"], &j["k"]), (&json!("r"), &json!(24)));
    assert_eq!(j["measure"]["reading_name"], "r");
    let s = &j["studies"][0];
    assert_eq!(s["study"], "Lab Kessler-Ota");
    same("z", num(&s["effect"]), 0.456f64.atanh());
    same("v", num(&s["variance"]), 1.0 / 377.0);
    // A study's moderator values follow the order of `model.moderators`.
    let names = field(&j["model"]["moderators"], "name");
    assert_eq!(names, ["session_minutes", "mode"]);
    assert_eq!(s["moderators"], json!([55.0, "online"]));
    check_reading(&j["average"], f64::tanh);
}

#[test]
fn partial_r_and_slope_examples() {
    let j = fit(
        example("partial-correlations.csv"),
        "--measure partial-r --moderator remote_share",
    );
    check_report(&j, "intercept remote_share");
    assert_eq!(j["measure"]["reading_name"], "partial r");
    let (t, n, q) = (-6.64f64, 401.0, 4.0);
    let r = t / (t * t + n - q - 2.0).sqrt();
    same("z", num(&j["studies"][0]["effect"]), r.atanh());
    same("v", num(&j["studies"][0]["variance"]), 1.0 / (n - 3.0 - q));
    check_reading(&j["average"], f64::tanh);

    let j = fit(
        example("published-slopes.csv"),
        "--measure slope --moderator mean_age",
    );
    check_report(&j, "intercept mean_age");
    assert!(j["measure"]["reading_name"].is_null());
    same("slope", num(&j["studies"][0]["effect"]), -0.138);
    same("v", num(&j["studies"][0]["variance"]), 0.174 * 0.174);
}

#[test]
fn smd_site_with_missing_moderator_is_excluded_only_when_used() {
    let file = example("programme-sites.csv");
    let j = fit(
        &file,
        "--measure smd --moderator dosage_hours --moderator delivery",
    );
    check_report(&j, "intercept dosage_hours delivery=volunteer");
    assert_eq!(j["k"], 15);
    let ex = list(&j["excluded"]);
    assert_eq!(ex.len(), 1);
    assert_eq!(
        (&ex[0]["study"], &ex[0]["line"]),
        (&json!("Site 11 Tovey Cross"), &json!(12))
    );
    has_all(ex[0]["reason"].as_str().unwrap(), &["dosage_hours"]);
    assert!(list(&j["studies"])
        .iter()
        .all(|s| s["study"] != "Site 11 Tovey Cross"));
    // Hedges' g of the first site, by hand.
    let (mt, st, nt, mc, sc, nc) = (103.7, 14.1, 78.0, 98.9, 16.1f64, 68.0);
    let df = nt + nc - 2.0;
    let sp = (((nt - 1.0) * st * st + (nc - 1.0) * sc * sc) / df).sqrt();
    let g = (1.0 - 3.0 / (4.0 * df - 1.0)) * (mt - mc) / sp;
    let v = (nt + nc) / (nt * nc) + g * g / (2.0 * (nt + nc));
    same("g", num(&j["studies"][0]["effect"]), g);
    same("v", num(&j["studies"][0]["variance"]), v);

    let j = fit(&file, "--measure smd --moderator delivery");
    check_report(&j, "intercept delivery=volunteer");
    assert_eq!(j["k"], 16);
    assert!(list(&j["excluded"]).is_empty());
}

#[test]
fn binary_measures_handle_zero_cells() {
    let file = example("trial-events.csv");
    for (measure, name) in [("log-or", "odds ratio"), ("log-rr", "risk ratio")] {
        let j = fit(
            &file,
            &format!("--measure {measure} --moderator followup_months"),
        );
        check_report(&j, "intercept followup_months");
        assert_eq!(j["measure"]["reading_name"], name);
        assert_eq!(j["k"], 11, "{measure}");
        let ex = list(&j["excluded"]);
        assert_eq!(ex.len(), 1);
        assert_eq!(
            (&ex[0]["study"], &ex[0]["line"]),
            (&json!("QUAIL 2021"), &json!(13))
        );
        assert!(!ex[0]["reason"].as_str().unwrap().is_empty());
        assert!(study(&j, "PIPIT-W 2020")["note"].is_string(), "{measure}");
        has_all(&joined(&j["notes"]), &["0.5", "PIPIT-W 2020"]);
        check_reading(&j["average"], f64::exp);
    }
    let j = fit(&file, "--measure log-or");
    let (a, b, c, d) = (20.0f64, 110.0, 35.0, 111.0);
    same(
        "log OR",
        num(&j["studies"][0]["effect"]),
        (a * d / (b * c)).ln(),
    );
    let v = 1.0 / a + 1.0 / b + 1.0 / c + 1.0 / d;
    same("v", num(&j["studies"][0]["variance"]), v);

    let j = fit(&file, "--measure risk-diff --moderator setting");
    check_report(&j, "intercept setting=hospital");
    assert_eq!(j["k"], 12);
    assert!(list(&j["excluded"]).is_empty() && j["measure"]["reading_name"].is_null());
    let quail = study(&j, "QUAIL 2021");
    same("double-zero RD", num(&quail["effect"]), 0.0);
    assert!(quail["note"].is_string());
}

// ------------------------------------------------- 2. worked checks by hand

/// k = 4 effects with one common variance v.
fn equal_variance_csv(y: [f64; 4], v: f64) -> String {
    let rows: String = y
        .iter()
        .enumerate()
        .map(|(i, yi)| format!("S{i},{yi},{v}\n"))
        .collect();
    format!("study,effect,variance\n{rows}")
}

#[test]
fn tau2_by_hand_with_equal_variances() {
    let (y, v) = ([0.1, 0.3, 0.5, 0.9], 0.01);
    let k = y.len() as f64;
    let mean = y.iter().sum::<f64>() / k;
    let ss: f64 = y.iter().map(|x| (x - mean).powi(2)).sum();
    let s2 = ss / (k - 1.0);
    // With equal variances REML, DL, PM and HE all give s² − v, ML gives
    // (k−1)/k·s² − v, and SJ gives τ₀²·s²/(v + τ₀²) with τ₀² = SS/k.
    let t0 = ss / k;
    let expected = [
        ("reml", (s2 - v).max(0.0)),
        ("dl", s2 - v),
        ("pm", s2 - v),
        ("he", s2 - v),
        ("ml", (k - 1.0) / k * s2 - v),
        ("sj", t0 * s2 / (v + t0)),
        ("none", 0.0),
    ];
    let csv = equal_variance_csv(y, v);
    for (method, tau2) in expected {
        let j = fit_text(&csv, &format!("--tau2 {method}"));
        check_report(&j, "intercept");
        assert_eq!(j["tau2"]["method"], method);
        same(method, num(&j["tau2"]["estimate"]), tau2);
        same("pooled mean", coef(&j, 0), mean);
        for w in field(&j["studies"], "weight") {
            same("equal weights", num(w), 25.0);
        }
        let has_ll = matches!(method, "reml" | "ml");
        assert_eq!(!j["model"]["log_likelihood"].is_null(), has_ll, "{method}");
        if method == "none" {
            assert_eq!(num(&j["heterogeneity"]["i2"]), 0.0);
        }
    }
    // Spread smaller than the sampling error: τ² = max(0, s² − v) = 0.
    let j = fit_text(&equal_variance_csv([0.10, 0.12, 0.14, 0.16], v), "");
    assert_eq!(num(&j["tau2"]["estimate"]), 0.0);
    assert_eq!(num(&j["heterogeneity"]["i2"]), 0.0);
}

// ------------------------------------------------------ 3. model options

#[test]
fn predictions_at_numeric_and_categorical_values() {
    let j =
        consortium("--at session_minutes=30,mode=online --at session_minutes=80,mode=in_person");
    check_report(&j, "intercept session_minutes mode=online");
    let p = list(&j["predictions"]);
    assert_eq!(p.len(), 2);
    assert_eq!(
        p[0]["at"],
        json!({"session_minutes": 30.0, "mode": "online"})
    );
    let online30 = coef(&j, 0) + 30.0 * coef(&j, 1) + coef(&j, 2);
    same("at 30, online", num(&p[0]["estimate"]), online30);
    same(
        "at 80, in person",
        num(&p[1]["estimate"]),
        coef(&j, 0) + 80.0 * coef(&j, 1),
    );
    check_reading(&p[0], f64::tanh);
    assert!(list(&p[0]["outside_range"]).is_empty());
    has_all(&joined(&p[1]["outside_range"]), &["session_minutes"]);
    has_all(
        &joined(&j["warnings"]),
        &["session_minutes", "extrapolation"],
    );
}

#[test]
fn interaction_term_is_named_with_times_and_used_in_predictions() {
    let j = consortium("--interaction session_minutes,mode --at session_minutes=30,mode=online");
    check_report(
        &j,
        "intercept session_minutes mode=online session_minutes×mode=online",
    );
    assert_eq!(
        j["model"]["interactions"],
        json!([["session_minutes", "mode"]])
    );
    let expected = coef(&j, 0) + 30.0 * coef(&j, 1) + coef(&j, 2) + 30.0 * coef(&j, 3);
    same(
        "prediction",
        num(&j["predictions"][0]["estimate"]),
        expected,
    );
}

#[test]
fn centering_moves_the_intercept_to_the_mean() {
    let file = example("consortium-correlations.csv");
    let plain = fit(&file, "--measure r --moderator session_minutes");
    let centred = fit(
        &file,
        "--measure r --moderator session_minutes --center session_minutes",
    );
    check_report(&centred, "intercept session_minutes");
    let kind = &centred["model"]["moderators"][0]["kind"];
    assert_eq!(kind["centered"], true);
    let mean = num(&kind["mean"]);
    assert!(mean > 10.0 && mean < 60.0);
    same("slope", coef(&centred, 1), coef(&plain, 1));
    same(
        "intercept",
        coef(&centred, 0),
        coef(&plain, 0) + mean * coef(&plain, 1),
    );
    same(
        "tau2",
        num(&centred["tau2"]["estimate"]),
        num(&plain["tau2"]["estimate"]),
    );
}

#[test]
fn reference_level_flips_the_contrast() {
    let file = example("consortium-correlations.csv");
    let default = fit(&file, "--measure r --moderator mode");
    let flipped = fit(
        &file,
        "--measure r --moderator mode --reference mode=online",
    );
    check_report(&default, "intercept mode=online");
    check_report(&flipped, "intercept mode=in_person");
    assert_eq!(
        flipped["model"]["moderators"][0]["kind"]["reference"],
        "online"
    );
    same("contrast", coef(&flipped, 1), -coef(&default, 1));
    same(
        "intercept",
        coef(&flipped, 0),
        coef(&default, 0) + coef(&default, 1),
    );
    let bad = "--measure r --moderator mode --reference mode=hybrid";
    let err = fails(&mut fit_cmd(&file, bad), 2);
    has_all(&err, &["--reference", "hybrid", "in_person, online"]);
}

const CODES: &str = "name,yi,vi,arm\nA,0.1,0.02,1\nB,0.3,0.03,2\nC,0.5,0.02,3\nD,0.9,0.04,1\n\
                     E,0.2,0.02,2\nF,0.6,0.03,3\nG,0.4,0.02,1\n";
const REMAP: &str = "--col effect=yi --col variance=vi";

#[test]
fn categorical_turns_numeric_codes_into_levels() {
    let numeric = fit_text(CODES, &format!("{REMAP} --moderator arm"));
    check_report(&numeric, "intercept arm");
    let j = fit_text(CODES, &format!("{REMAP} --moderator arm --categorical arm"));
    check_report(&j, "intercept arm=2 arm=3");
    let kind = &j["model"]["moderators"][0]["kind"];
    assert_eq!(kind["type"], "categorical");
    assert_eq!(kind["levels"], json!(["1", "2", "3"]));
}

#[test]
fn col_and_label_remap_headers() {
    let standard = CODES.replacen("name,yi,vi", "study,effect,variance", 1);
    let a = fit_text(&standard, "--moderator arm");
    let b = fit_text(CODES, &format!("{REMAP} --label name --moderator arm"));
    check_report(&b, "intercept arm");
    for key in ["tau2", "coefficients", "heterogeneity", "studies"] {
        assert_eq!(a[key], b[key], "{key}");
    }
    assert_eq!(b["input"]["label_column"], "name");
    assert_eq!(b["studies"][6]["study"], "G");
    // Without a label column, studies are named by their line.
    let c = fit_text(CODES, REMAP);
    assert!(c["input"]["label_column"].is_null());
    assert_eq!(c["studies"][0]["study"], "line 2");
    has_all(&joined(&c["notes"]), &["--label"]);
    let (err, path) = bad_input(CODES, &format!("{REMAP} --label nope"));
    has_all(&err, &[&path, "'nope'", "name, yi, vi, arm"]);
}

#[test]
fn z_inference_and_level_set_the_intervals() {
    let kh95 = consortium("");
    let kh90 = consortium("--level 0.9");
    let z95 = consortium("--inference z");
    let z90 = consortium("--inference z --level 0.9");
    for j in [&kh95, &kh90, &z95, &z90] {
        check_report(j, "intercept session_minutes mode=online");
    }
    assert_eq!(num(&kh90["model"]["level"]), 0.9);
    assert!(z95["model"]["kh_scale"].is_null() && kh95["model"]["kh_scale"].is_number());
    assert_eq!(z95["moderator_test"]["distribution"], "chi-square");
    assert_eq!(kh95["moderator_test"]["distribution"], "F");
    for (j, q) in [(&z95, Z_95), (&z90, Z_90)] {
        for c in list(&j["coefficients"]) {
            let half = (num(&c["ci_high"]) - num(&c["estimate"])) / num(&c["se"]);
            same("z half-width", half, q);
        }
    }
    for (wide, narrow) in [(&kh95, &kh90), (&z95, &z90)] {
        let pairs = field(&wide["coefficients"], "se").len();
        for i in 0..pairs {
            let (w, n) = (&wide["coefficients"][i], &narrow["coefficients"][i]);
            assert!(width(n, "ci_low", "ci_high") < width(w, "ci_low", "ci_high"));
        }
        let (w, n) = (&wide["average"], &narrow["average"]);
        assert!(width(n, "ci_low", "ci_high") < width(w, "ci_low", "ci_high"));
        assert!(width(n, "pi_low", "pi_high") < width(w, "pi_low", "pi_high"));
        let (w, n) = (&wide["tau2"], &narrow["tau2"]);
        assert!(width(n, "ci_low", "ci_high") < width(w, "ci_low", "ci_high"));
    }
}

// --------------------------------------------------------- 4. input formats

/// Rows of a small table whose quoted, non-ASCII labels contain delimiters and quotes.
const ROWS: [[&str; 4]; 6] = [
    ["Łódź, Nord; \"A\"", "0.12", "0.010", "online"],
    ["Ærøskøbing", "0.40", "0.020", "in_person"],
    ["São Tomé, 2019", "0.05", "0.015", "online"],
    ["Zürich\tWest", "0.33", "0.012", "in_person"],
    ["Ñuñoa", "-0.10", "0.030", "online"],
    ["Kraków", "0.61", "0.025", "in_person"],
];

fn render(delimiter: &str, bom: bool, crlf: bool) -> Vec<u8> {
    let eol = if crlf { "\r\n" } else { "\n" };
    let mut s = String::from(if bom { "\u{feff}" } else { "" });
    s.push_str(&["study", "effect", "variance", "mode"].join(delimiter));
    s.push_str(eol);
    for r in ROWS {
        let label = format!("\"{}\"", r[0].replace('"', "\"\""));
        s.push_str(&[label.as_str(), r[1], r[2], r[3]].join(delimiter));
        s.push_str(eol);
    }
    s.into_bytes()
}

#[test]
fn delimiters_bom_quotes_and_crlf_read_alike() {
    let (_d, path) = temp_file("base.csv", &render(",", false, false));
    let base = fit(&path, "--moderator mode");
    check_report(&base, "intercept mode=online");
    let labels: Vec<&str> = ROWS.iter().map(|r| r[0]).collect();
    assert_eq!(field(&base["studies"], "study"), labels);
    for (delim, name, bom, crlf) in [
        (";", "semicolon", false, false),
        ("\t", "tab", false, false),
        (",", "comma", true, false),
        (",", "comma", false, true),
        (";", "semicolon", true, true),
        ("\t", "tab", true, true),
    ] {
        let (_d, path) = temp_file("variant.csv", &render(delim, bom, crlf));
        let j = fit(&path, "--moderator mode");
        let what = format!("{name}, BOM {bom}, CRLF {crlf}");
        assert_eq!(j["input"]["delimiter"], name, "{what}");
        for key in ["tau2", "coefficients", "studies", "excluded"] {
            assert_eq!(j[key], base[key], "{what}: {key}");
        }
    }
}

#[test]
fn reads_standard_input() {
    let bytes = render(";", true, true);
    let out = succeeds(fit_cmd("-", "--moderator mode --json -").write_stdin(bytes.clone()));
    let j: Value = serde_json::from_slice(&out).unwrap();
    assert_eq!(j["input"]["file"], "<stdin>");
    let (_d, path) = temp_file("same.csv", &bytes);
    let f = fit(&path, "--moderator mode");
    for key in ["tau2", "coefficients", "studies"] {
        assert_eq!(j[key], f[key], "{key}");
    }
}

// ------------------------------------------------------------ 5. bad input

#[test]
fn out_of_range_cells_name_file_line_and_column() {
    let (err, path) = bad_input("study,r,n\na,0.3,50\nb,1.2,40\nc,0.1,30\n", "--measure r");
    has_all(&err, &[&path, "line 3", "'r'", "1.2", "between -1 and 1"]);
    let (err, path) = bad_input("study,r,n\na,0.3,50\nb,0.2,3\nc,0.1,30\n", "--measure r");
    has_all(&err, &[&path, "line 3", "'n'", "greater than 3"]);
    let (err, path) = bad_input(
        "study,effect,variance\na,0.3,0.1\nb,0.2,0\nc,0.1,-0.2\n",
        "",
    );
    has_all(
        &err,
        &[&path, "line 3", "line 4", "'variance'", "greater than 0"],
    );
    let (err, path) = bad_input(
        "study,effect,variance\na,0.3,0.1\nb,abc,0.1\nc,0.1,0.2\n",
        "",
    );
    has_all(
        &err,
        &[&path, "line 3", "column 'effect'", "'abc'", "not a number"],
    );
}

#[test]
fn unreadable_tables_are_refused() {
    let (err, path) = bad_input("study,effect,variance\na,0.3,0.1\n", "--measure r");
    has_all(
        &err,
        &[
            &path,
            "no column 'r'",
            "study, effect, variance",
            "--col r=",
        ],
    );
    let (err, path) = bad_input("", "");
    has_all(&err, &[&path, "empty"]);
    let (err, path) = bad_input("study,effect,variance\n", "");
    has_all(&err, &[&path, "no data rows"]);
    let (err, path) = bad_input("study,effect,variance\na,0.3,0.1\nb,0.2\nc,0.1,0.2\n", "");
    has_all(&err, &[&path, "line 3", "2 fields", "header has 3"]);
    let err = fails(&mut fit_cmd("no-such-file.csv", ""), 2);
    has_all(&err, &["no-such-file.csv"]);
}

/// Moderators: x numeric, y = 2x, g one level, c constant, z numeric with a typo.
const MODS: &str = "study,effect,variance,x,y,g,c,z\na,0.3,0.1,1,2,u,7,1\nb,0.2,0.1,2,4,u,7,2\n\
                    c,0.1,0.2,3,6,u,7,3o\nd,0.4,0.1,4,8,u,7,4\ne,0.5,0.1,5,10,u,7,5\n";

/// Model errors and the text each message must contain.
const MODEL_ERRORS: [(&str, &[&str]); 4] = [
    (
        "--moderator x --moderator study",
        &["6 coefficients", "only 5 studies"],
    ),
    ("--moderator g", &["'g'", "only one level"]),
    ("--moderator c", &["'c'", "same value"]),
    ("--moderator x --moderator y", &["'y'", "collinear"]),
];

#[test]
fn models_the_data_cannot_support_are_refused() {
    for (args, parts) in MODEL_ERRORS {
        has_all(&bad_input(MODS, args).0, parts);
    }
    let (err, path) = bad_input(MODS, "--moderator z");
    has_all(&err, &[&path, "'z'", "line 4", "'3o'", "--categorical z"]);
    let (err, path) = bad_input("study,effect,variance\na,0.3,0.1\nb,,0.1\n", "");
    has_all(
        &err,
        &[
            &path,
            "only one study",
            "no between-study heterogeneity can be estimated",
        ],
    );
}

/// Bug check: model errors found in the data should name the input file,
/// as every other input error does.
#[test]
fn model_errors_name_the_file() {
    let mut unnamed = Vec::new();
    for (args, _) in MODEL_ERRORS {
        let (err, path) = bad_input(MODS, args);
        if !err.contains(&path) {
            unnamed.push(format!("{args}: {}", err.trim()));
        }
    }
    assert!(
        unnamed.is_empty(),
        "messages without the file name:\n{}",
        unnamed.join("\n")
    );
}

#[test]
fn bad_flags_are_refused_with_a_hint() {
    let file = example("consortium-correlations.csv");
    let run = |args: &str| fails(&mut fit_cmd(&file, &format!("--measure r {args}")), 2);
    has_all(&run("--col foo=bar"), &["--col", "'foo'", "r, n"]);
    has_all(&run("--level 95"), &["--level", "--level 0.95"]);
    has_all(
        &run("--moderator mode --at dose=3"),
        &["--at", "'dose'", "mode"],
    );
    has_all(
        &run("--moderator mode --at mode=hybrid"),
        &["'hybrid'", "in_person, online"],
    );
    has_all(&run("--at mode=online"), &["--at", "no moderators"]);
}

#[test]
fn duplicate_labels_give_a_warning() {
    let j = fit_text(
        "study,effect,variance\na,0.3,0.1\na,0.2,0.1\nc,0.1,0.2\n",
        "",
    );
    check_report(&j, "intercept");
    has_all(&joined(&j["warnings"]), &["'a'"]);
}

// ---------------------------------------------------------------- 6. outputs

#[test]
fn json_and_table_files_are_written() {
    let dir = tempfile::tempdir().unwrap();
    let (json_path, table_path) = (dir.path().join("fit.json"), dir.path().join("studies.csv"));
    let file = example("trial-events.csv");
    let mut cmd = fit_cmd(&file, "--measure log-or");
    let out = succeeds(
        cmd.arg("--json")
            .arg(&json_path)
            .arg("--table")
            .arg(&table_path),
    );
    has_all(&String::from_utf8_lossy(&out), &["Average effect"]);
    let written: Value = serde_json::from_slice(&std::fs::read(&json_path).unwrap()).unwrap();
    assert_eq!(written, fit(&file, "--measure log-or"));

    let mut table = csv::Reader::from_path(&table_path).unwrap();
    let header: Vec<String> = table.headers().unwrap().iter().map(String::from).collect();
    let names = "study included excluded_reason effect variance weight_percent fitted residual \
                 std_residual";
    let ix: Vec<usize> = names
        .split_whitespace()
        .map(|n| {
            header
                .iter()
                .position(|h| h == n)
                .unwrap_or_else(|| panic!("no {n} in {header:?}"))
        })
        .collect();
    let rows: Vec<csv::StringRecord> = table.records().map(|r| r.unwrap()).collect();
    assert_eq!(rows.len(), 12, "one row per input row");
    assert_eq!(
        (&rows[2][ix[0]], &rows[11][ix[0]]),
        ("CÉLESTE 2013", "QUAIL 2021")
    );
    let mut weight = 0.0;
    for (r, s) in rows[..11].iter().zip(list(&written["studies"])) {
        assert_eq!(
            (&r[ix[0]], &r[ix[1]], &r[ix[2]]),
            (s["study"].as_str().unwrap(), "yes", "")
        );
        let cell = |i: usize| r[ix[i]].parse::<f64>().unwrap();
        same("effect", cell(3), num(&s["effect"]));
        same("residual", cell(7), cell(3) - cell(6));
        assert!(cell(8).is_finite());
        weight += cell(5);
    }
    same("weights", weight, 100.0);
    let quail = &rows[11];
    assert_eq!(&quail[ix[1]], "no");
    assert_eq!(
        &quail[ix[2]],
        written["excluded"][0]["reason"].as_str().unwrap()
    );
    assert!(ix[3..].iter().all(|&i| quail[i].is_empty()));
}

#[test]
fn outputs_never_overwrite_the_input() {
    let original = std::fs::read(example("precomputed-effects.csv")).unwrap();
    let (dir, path) = temp_file("input.csv", &original);
    let dotted = dir.path().join(".").join("input.csv");
    for (flag, target) in [("--json", &path), ("--table", &path), ("--json", &dotted)] {
        let err = fails(fit_cmd(&path, flag).arg(target), 2);
        has_all(&err, &[flag, "input file"]);
        assert_eq!(std::fs::read(&path).unwrap(), original, "input changed");
    }
    let err = fails(&mut fit_cmd(&path, "--json - --table -"), 2);
    has_all(&err, &["--json", "--table", "standard output"]);
}

#[test]
fn output_into_missing_directory_fails_cleanly() {
    let input = std::fs::read(example("precomputed-effects.csv")).unwrap();
    let (dir, path) = temp_file("input.csv", &input);
    for flag in ["--json", "--table"] {
        let target = dir.path().join("no-such-dir").join("out.file");
        let err = fails(fit_cmd(&path, &format!("-q {flag}")).arg(&target), 1);
        has_all(&err, &[&target.display().to_string(), "writing failed"]);
        let left: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name())
            .collect();
        assert_eq!(left, ["input.csv"], "{flag}: files left behind");
    }
}

/// Bug check: an I/O failure should state the operating-system cause once.
#[test]
fn io_errors_state_the_cause_once() {
    let dir = tempfile::tempdir().unwrap();
    let read = fails(&mut fit_cmd(dir.path().join("missing.csv"), ""), 2);
    let target = dir.path().join("nodir").join("out.json");
    let write = fails(
        fit_cmd(example("precomputed-effects.csv"), "-q --json").arg(&target),
        1,
    );
    for err in [read, write] {
        assert_eq!(err.matches("(os error").count(), 1, "cause repeated: {err}");
    }
}

/// The terminal report with its whitespace collapsed (it wraps long lines).
fn report_text(args: &str) -> String {
    let out = succeeds(&mut fit_cmd(example("consortium-correlations.csv"), args));
    let text = String::from_utf8(out).unwrap();
    text.split_whitespace().collect::<Vec<_>>().join(" ")
}

#[test]
fn terminal_report_speaks_plain_words() {
    let text = report_text(CONSORTIUM);
    let phrases = [
        "Does the effect change with the moderators?",
        "Heterogeneity left after the moderators",
        "Average effect",
        "prediction interval",
        "Cautions",
        "observational",
        "responsible professionals",
    ];
    has_all(&text, &phrases);
    let plain = report_text("--measure r");
    assert!(!plain.contains("Does the effect change") && !plain.contains("observational"));
    has_all(&plain, &["Average effect", "responsible professionals"]);
    assert_eq!(report_text("--measure r --quiet"), "");
    has_all(
        &joined(&consortium("")["cautions"]),
        &["observational", "responsible professionals"],
    );
}

// ---------------------------------------------------------- 7. command line

#[test]
fn help_and_unknown_subcommand() {
    let top = succeeds(pondus().arg("--help"));
    has_all(&String::from_utf8_lossy(&top), &["fit"]);
    let fit_help = succeeds(pondus().args(["fit", "--help"]));
    has_all(
        &String::from_utf8_lossy(&fit_help),
        &["--measure", "--moderator", "--tau2", "--json"],
    );
    has_all(&fails(pondus().arg("frobnicate"), 2), &["frobnicate"]);
}

/// A data set large enough (70,000 studies) that the per-study sums run in
/// parallel chunks; the numbers are invented (a fixed linear congruential
/// sequence) and serve only this test.
fn large_csv() -> String {
    let mut next = crate::util::uniform_draws(12_345);
    let mut csv = String::from("study,effect,variance,dose\n");
    for i in 0..70_000 {
        let dose = 10.0 * next();
        let v = 0.01 + 0.2 * next();
        let y = 0.1 + 0.02 * dose + (next() - 0.5) * 0.8;
        csv.push_str(&format!("s{i},{y:.6},{v:.6},{dose:.4}\n"));
    }
    csv
}

#[test]
fn json_is_byte_identical_whatever_the_thread_count() {
    let (_dir, path) = temp_file("large.csv", large_csv().as_bytes());
    let run = |threads: &str| {
        let mut cmd = fit_cmd(&path, "--moderator dose --json -");
        cmd.env("RAYON_NUM_THREADS", threads);
        succeeds(&mut cmd)
    };
    let one = run("1");
    let two = run("2");
    let four = run("4");
    assert!(!one.is_empty());
    assert_eq!(one, two, "1 thread vs 2 threads");
    assert_eq!(one, four, "1 thread vs 4 threads");
}

#[test]
fn log_ratio_coefficients_are_also_given_as_ratios() {
    let j = fit(
        example("trial-events.csv"),
        "--measure log-or --moderator followup_months",
    );
    for c in list(&j["coefficients"]) {
        let ratio = &c["ratio"];
        same(
            "exp(estimate)",
            num(&ratio["estimate"]),
            num(&c["estimate"]).exp(),
        );
        same(
            "exp(ci_low)",
            num(&ratio["ci_low"]),
            num(&c["ci_low"]).exp(),
        );
        same(
            "exp(ci_high)",
            num(&ratio["ci_high"]),
            num(&c["ci_high"]).exp(),
        );
    }
    let j = consortium("");
    assert!(list(&j["coefficients"])
        .iter()
        .all(|c| c["ratio"].is_null()));
}

// ------------------------------------------- completions and manual pages

#[test]
fn completions_cover_every_shell_and_name_the_subcommands_and_flags() {
    for shell in ["bash", "zsh", "fish", "powershell", "elvish"] {
        let out = succeeds(pondus().args(["completions", shell]));
        let text = String::from_utf8(out).expect("the script is UTF-8");
        assert!(!text.trim().is_empty(), "{shell}: empty script");
        has_all(&text, &["fit", "moderator", "target-power", "sites"]);
        assert!(
            text.contains("--moderator") || text.contains("-l moderator"),
            "{shell}: no --moderator flag in the script"
        );
    }
}

#[test]
fn the_bash_completion_script_is_valid_bash() {
    let out = succeeds(pondus().args(["completions", "bash"]));
    let (_dir, path) = temp_file("pondus.bash", &out);
    let check = std::process::Command::new("bash")
        .arg("-n")
        .arg(&path)
        .output()
        .expect("bash runs");
    assert!(
        check.status.success(),
        "bash -n: {}",
        String::from_utf8_lossy(&check.stderr)
    );
}

#[test]
fn an_unknown_shell_is_a_usage_error() {
    let err = fails(pondus().args(["completions", "tcsh"]), 2);
    has_all(&err, &["tcsh", "bash"]);
}

/// The `.TH` header line of a roff page.
fn roff_header(page: &[u8]) -> String {
    let text = String::from_utf8(page.to_vec()).expect("the page is UTF-8");
    text.lines()
        .find(|l| !l.starts_with(".ie") && !l.starts_with(".el") && !l.starts_with(".\\\""))
        .unwrap_or_default()
        .to_string()
}

#[test]
fn manual_pages_have_a_roff_header_naming_their_command() {
    let top = succeeds(pondus().arg("manual"));
    assert!(
        roff_header(&top).starts_with(".TH pondus "),
        "{}",
        roff_header(&top)
    );
    has_all(
        &String::from_utf8_lossy(&top),
        &["fit", "plan", "sites", "sql"],
    );
    for sub in ["fit", "plan", "sites", "sql"] {
        let page = succeeds(pondus().args(["manual", sub]));
        let head = roff_header(&page);
        assert!(
            head.starts_with(&format!(".TH pondus-{sub} ")),
            "{sub}: {head}"
        );
    }
    let fit = String::from_utf8(succeeds(pondus().args(["manual", "fit"]))).unwrap();
    // Roff escapes the dashes; the flag groups of `fit --help` are sections.
    has_all(
        &fit,
        &["\\fB\\-\\-moderator\\fR", ".SH \"ROBUSTNESS CHECKS\""],
    );
}

#[test]
fn manual_out_dir_writes_every_page_into_an_existing_directory() {
    let dir = tempfile::tempdir().expect("temp dir");
    let out = succeeds(pondus().arg("manual").arg("--out-dir").arg(dir.path()));
    assert!(out.is_empty(), "nothing goes to standard output");
    let mut names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
        .collect();
    names.sort();
    assert_eq!(
        names,
        [
            "pondus-fit.1",
            "pondus-plan.1",
            "pondus-sites.1",
            "pondus-sql.1",
            "pondus.1"
        ]
    );
    for name in &names {
        let page = std::fs::read(dir.path().join(name)).unwrap();
        let stem = name.trim_end_matches(".1");
        assert!(
            roff_header(&page).starts_with(&format!(".TH {stem} ")),
            "{name}: {}",
            roff_header(&page)
        );
    }
    // A link where a page goes is refused, not followed; nothing is written.
    let other = tempfile::tempdir().expect("temp dir");
    let target = other.path().join("elsewhere");
    std::fs::remove_file(dir.path().join("pondus-sql.1")).unwrap();
    std::os::unix::fs::symlink(&target, dir.path().join("pondus-sql.1")).unwrap();
    let before = std::fs::read(dir.path().join("pondus.1")).unwrap();
    std::fs::write(dir.path().join("pondus.1"), b"old").unwrap();
    let err = fails(pondus().arg("manual").arg("--out-dir").arg(dir.path()), 2);
    has_all(&err, &["--out-dir", "pondus-sql.1", "not a regular file"]);
    assert!(!target.exists());
    assert_eq!(std::fs::read(dir.path().join("pondus.1")).unwrap(), b"old");
    assert!(!before.is_empty());
    let missing = dir.path().join("missing");
    let err = fails(pondus().arg("manual").arg("--out-dir").arg(&missing), 2);
    has_all(&err, &["--out-dir", "not a directory"]);
    assert!(!missing.exists());
}

// ------------------------------------------------ plan without --k

/// `pondus plan` with `args` split at whitespace.
fn plan_cmd(args: &str) -> Command {
    let mut c = pondus();
    c.arg("plan").args(args.split_whitespace());
    c
}

#[test]
fn plan_solving_for_k_needs_no_planned_k() {
    let base = "--measure r --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --test z --target-power 0.8 --json -";
    let without = succeeds(&mut plan_cmd(base));
    let j: Value = serde_json::from_slice(&without).expect("JSON");
    let needed = j["k_needed"].as_u64().expect("a k is needed");
    assert_eq!(
        j["k"].as_u64(),
        Some(needed),
        "the power is shown at the k needed"
    );
    assert!(num(&j["power"]) >= 0.8);
    // The same as planning that k outright.
    let with = succeeds(&mut plan_cmd(&format!("{base} --k {needed}")));
    assert_eq!(without, with);
}

#[test]
fn plan_without_k_needs_a_target_and_solving_for_k() {
    let base = "--measure r --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --test z";
    let err = fails(&mut plan_cmd(base), 2);
    has_all(&err, &["--k"]);
    let err = fails(
        &mut plan_cmd(&format!("{base} --target-power 0.8 --solve n")),
        2,
    );
    has_all(&err, &["--k", "--solve n"]);
}
