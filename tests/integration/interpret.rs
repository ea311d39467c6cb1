//! `pondus fit --probe / --compare-levels / --regions` and the artifact
//! corrections (`--reliability-x`, `--reliability-y`, `--range-ratio`).
//!
//! Checks outside the project:
//! - `tests/data/reference/interpret.json`, made by `tests/reference/interpret.py`:
//!   REML τ² by generate.py's grid + brentq maximiser, contrasts by statsmodels
//!   0.14.6 `WLS(...).t_test` at that τ² (Knapp–Hartung) or numpy/scipy 1.16.3
//!   (z), Johnson–Neyman bounds as `numpy.roots` of the quadratic
//!   (A + B m)² = c² Var(A + B m) with a brentq check, artifact corrections
//!   step by step with `scipy.differentiate.derivative` for dr_c/dr.
//! - Thorndike Case II by hand: in `src/effect/artifact.rs` (unit tests).
//!
//! Data: the invented examples in `data-examples/`, and small data sets
//! invented here for the four Johnson–Neyman cases and the bad inputs.

use crate::util::{close, repo};
use assert_cmd::Command;
use pondus::tolerance::{IDENTITY_REL, REFERENCE_ABS, REFERENCE_P_REL, REFERENCE_REL};
use serde_json::Value;
use std::path::{Path, PathBuf};
use tempfile::TempDir;

fn example(name: &str) -> String {
    repo(&format!("data-examples/{name}")).display().to_string()
}

fn fixture() -> Value {
    let text = std::fs::read_to_string(repo("tests/data/reference/interpret.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

/// `pondus fit FILE ARGS --json -`, expecting success; the parsed JSON.
fn json(file: impl AsRef<Path>, args: &str) -> Value {
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .arg(file.as_ref())
        .args(args.split_whitespace())
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

/// Runs and expects failure with exit code 2; returns stderr.
fn fails(file: impl AsRef<Path>, args: &str) -> String {
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .arg(file.as_ref())
        .args(args.split_whitespace())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(2), "expected exit 2, got: {err}");
    assert!(!err.contains("panicked"), "{err}");
    err
}

fn temp(name: &str, text: &str) -> (TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join(name);
    std::fs::write(&p, text).unwrap();
    (dir, p)
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

#[track_caller]
fn same(what: &str, got: &Value, want: &Value) {
    close(what, f(got), f(want), REFERENCE_REL, REFERENCE_ABS);
}

#[track_caller]
fn same_test(what: &str, got: &Value, want: &Value, keys: &[&str]) {
    for k in keys {
        if *k == "p" {
            close(
                &format!("{what} p"),
                f(&got[k]),
                f(&want[k]),
                REFERENCE_P_REL,
                REFERENCE_ABS,
            );
        } else {
            same(&format!("{what} {k}"), &got[k], &want[k]);
        }
    }
}

const EFFECT_KEYS: &[&str] = &[
    "estimate",
    "se",
    "ci_low",
    "ci_high",
    "pi_low",
    "pi_high",
    "statistic",
    "p",
];
const CONTRAST_KEYS: &[&str] = &["estimate", "se", "ci_low", "ci_high", "statistic", "p"];

fn effects_of<'a>(j: &'a Value, moderator: &str) -> Vec<&'a Value> {
    j["conditional_effects"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|e| e["moderator"] == moderator)
        .collect()
}

fn region<'a>(j: &'a Value, moderator: &str, quantity: &str) -> &'a Value {
    j["regions_of_significance"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["moderator"] == moderator && r["quantity"] == quantity)
        .unwrap_or_else(|| panic!("no region {quantity} along {moderator}"))
}

#[track_caller]
fn same_bounds(what: &str, got: &Value, want: &Value) {
    let (g, w) = (
        got["bounds"].as_array().unwrap(),
        want["bounds"].as_array().unwrap(),
    );
    assert_eq!(g.len(), w.len(), "{what}: {got} vs {want}");
    for (a, b) in g.iter().zip(w) {
        close(what, f(a), f(b), REFERENCE_REL, REFERENCE_ABS);
    }
    assert_eq!(got["significant"], want["significant"], "{what}");
}

// ------------------------------------------------ against the Python reference

#[test]
fn consortium_conditional_effects_contrasts_and_bounds_match_statsmodels_and_numpy() {
    // Reference: tests/reference/interpret.py (statsmodels WLS t_test at the
    // REML τ²; numpy.roots of the Johnson–Neyman quadratic).
    let fx = fixture();
    for inference in ["kh", "z"] {
        let want = &fx["consortium"][inference];
        let j = json(
            example("consortium-correlations.csv"),
            &format!(
                "--measure r --moderator session_minutes --moderator mode --inference {inference} \
                 --probe session_minutes --probe mode --compare-levels --regions"
            ),
        );
        same("τ²", &j["tau2"]["estimate"], &want["tau2"]);
        let s = effects_of(&j, "session_minutes");
        let ws = want["probe_session"].as_array().unwrap();
        assert_eq!(s.len(), 3);
        for (g, w) in s.iter().zip(ws) {
            same("probe at", &g["at"], &w["at"]);
            same_test(&format!("{inference} session"), g, w, EFFECT_KEYS);
        }
        assert_eq!(s[0]["point"], "mean − 1 SD");
        let m = effects_of(&j, "mode");
        for (g, w) in m.iter().zip(want["probe_mode"].as_array().unwrap()) {
            assert_eq!(g["at"], w["at"]);
            same_test(&format!("{inference} mode"), g, w, EFFECT_KEYS);
        }
        let c = &j["level_contrasts"][0];
        assert_eq!(
            (c["level"].as_str(), c["minus"].as_str()),
            (Some("online"), Some("in_person"))
        );
        same_test(
            "contrast",
            &c["test"],
            &want["contrast_online_minus_in_person"],
            CONTRAST_KEYS,
        );
        same_bounds(
            "JN effect along session_minutes",
            region(&j, "session_minutes", "effect"),
            &want["jn_effect_session"],
        );
        // The df of t is k − p under kh, null under z.
        assert_eq!(s[0]["df"].as_f64(), (inference == "kh").then_some(21.0));
    }
}

#[test]
fn given_probe_values_match_the_reference() {
    let fx = fixture();
    let j = json(
        example("consortium-correlations.csv"),
        "--measure r --moderator session_minutes --moderator mode --probe session_minutes=15,45",
    );
    let s = effects_of(&j, "session_minutes");
    for (g, w) in s.iter().zip(
        fx["consortium"]["kh"]["probe_session_given"]
            .as_array()
            .unwrap(),
    ) {
        assert_eq!(g["point"], "given");
        same_test("session given", g, w, EFFECT_KEYS);
    }
    // The picture: pooled estimate and τ² without moderators beside the residual τ².
    let p = &j["picture"];
    close(
        "picture τ² with",
        f(&p["tau2_with"]),
        f(&j["tau2"]["estimate"]),
        0.0,
        0.0,
    );
    close(
        "picture τ² without",
        f(&p["tau2_without"]),
        f(&j["heterogeneity"]["tau2_without_moderators"]),
        0.0,
        0.0,
    );
    close(
        "picture pooled",
        f(&p["pooled"]["estimate"]),
        f(&j["average"]["estimate"]),
        0.0,
        0.0,
    );
}

#[test]
fn simple_slopes_and_bounds_in_a_product_term_model_match_the_reference() {
    // Reference: statsmodels t_test of [0, 1, 0, level] (slope of session in a
    // level) and [0, 0, 1, m] (online − in_person at m); numpy.roots for JN.
    let fx = fixture();
    for inference in ["kh", "z"] {
        let want = &fx["consortium"][inference]["interaction"];
        let j = json(
            example("consortium-correlations.csv"),
            &format!(
                "--measure r --moderator session_minutes --moderator mode --interaction \
                 session_minutes,mode --inference {inference} --probe mode --probe session_minutes \
                 --regions"
            ),
        );
        same("τ²", &j["tau2"]["estimate"], &want["tau2"]);
        let slopes: Vec<&Value> = j["simple_slopes"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|s| s["of"] == "session_minutes")
            .collect();
        assert_eq!(slopes.len(), 2);
        for (g, w) in slopes
            .iter()
            .zip(want["slopes_session"].as_array().unwrap())
        {
            assert_eq!(g["at"], w["at"]);
            same_test("simple slope", &g["test"], w, CONTRAST_KEYS);
        }
        let diffs: Vec<&Value> = j["simple_slopes"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|s| s["of"] == "mode: online − in_person")
            .collect();
        assert_eq!(diffs.len(), 3);
        for (g, w) in diffs
            .iter()
            .zip(want["diff_online_at_session"].as_array().unwrap())
        {
            same("diff at", &g["at"], &w["at"]);
            same_test("difference", &g["test"], w, CONTRAST_KEYS);
        }
        same_bounds(
            "JN effect",
            region(&j, "session_minutes", "effect"),
            &want["jn_effect_session"],
        );
        same_bounds(
            "JN difference",
            region(&j, "session_minutes", "mode: online − in_person"),
            &want["jn_diff_online_session"],
        );
    }
}

#[test]
fn artifact_corrections_match_the_step_by_step_reference() {
    // Reference: tests/reference/interpret.py hs_correct (ryy, Case II, rxx_a)
    // with scipy.differentiate.derivative for the SE factor (numerical, so a
    // looser tolerance: IDENTITY_REL).
    let fx = fixture();
    let want = &fx["hiring"];
    let j = json(
        example("hiring-validity.csv"),
        "--measure r --moderator hired_share --reliability-x rel_exercise --reliability-y \
         rel_rating --range-ratio range_ratio --probe hired_share --regions",
    );
    assert_eq!(j["measure"]["id"], "r-corrected");
    assert_eq!(j["measure"]["reading_scale"], "same");
    let got = j["artifacts"]["studies"].as_array().unwrap();
    let ws = want["studies"].as_array().unwrap();
    assert_eq!(got.len(), ws.len());
    for (g, w) in got.iter().zip(ws) {
        assert_eq!(g["study"], w["study"]);
        same("corrected r", &g["corrected_r"], &w["corrected_r"]);
        same(
            "observed variance",
            &g["observed_variance"],
            &w["observed_variance"],
        );
        for k in ["se_factor", "corrected_variance"] {
            close(k, f(&g[k]), f(&w[k]), IDENTITY_REL, REFERENCE_ABS);
        }
    }
    // The analysed effects are the corrected r.
    for (s, w) in j["studies"].as_array().unwrap().iter().zip(ws) {
        same("analysed effect", &s["effect"], &w["corrected_r"]);
    }
    close(
        "τ²",
        f(&j["tau2"]["estimate"]),
        f(&want["tau2"]),
        IDENTITY_REL,
        REFERENCE_ABS,
    );
    for (g, w) in effects_of(&j, "hired_share")
        .iter()
        .zip(want["probe_share"].as_array().unwrap())
    {
        for k in ["estimate", "se", "ci_low", "ci_high", "pi_low", "pi_high"] {
            close(k, f(&g[k]), f(&w[k]), IDENTITY_REL, REFERENCE_ABS);
        }
    }
    let r = region(&j, "hired_share", "effect");
    assert_eq!(r["significant"], want["jn_effect_share"]["significant"]);
    for (a, b) in r["bounds"]
        .as_array()
        .unwrap()
        .iter()
        .zip(want["jn_effect_share"]["bounds"].as_array().unwrap())
    {
        close("JN bound", f(a), f(b), IDENTITY_REL, REFERENCE_ABS);
    }
    // The artifactual-moderation caution and the suggested check.
    let cautions = j["cautions"].to_string();
    assert!(cautions.contains("artifactual moderation"), "{cautions}");
    assert!(cautions.contains("--moderator range_ratio"), "{cautions}");
}

// ------------------------------------------------ the four Johnson–Neyman cases

/// 11 studies at x = 0..10, variance 0.1 each, effects from `y(x)`; fitted
/// with τ² fixed at 0 and z tests, so the bounds follow from the data alone.
fn jn_case(y: impl Fn(f64) -> f64) -> Value {
    let mut csv = String::from("study,effect,variance,x\n");
    for i in 0..=10 {
        let x = f64::from(i);
        csv.push_str(&format!("s{i},{},0.1,{x}\n", y(x)));
    }
    let (_d, p) = temp("jn.csv", &csv);
    json(&p, "--moderator x --tau2 none --inference z --regions")
}

/// At each observed bound the z statistic of the effect there is ±1.96:
/// checked by probing the model at the bound.
fn check_bounds_are_where_the_interval_touches_zero(j: &Value, csv_y: impl Fn(f64) -> f64) {
    let r = region(j, "x", "effect");
    for b in r["observed_bounds"].as_array().unwrap() {
        let mut csv = String::from("study,effect,variance,x\n");
        for i in 0..=10 {
            let x = f64::from(i);
            csv.push_str(&format!("s{i},{},0.1,{x}\n", csv_y(x)));
        }
        let (_d, p) = temp("jn.csv", &csv);
        let at = json(
            &p,
            &format!("--moderator x --tau2 none --inference z --probe x={}", f(b)),
        );
        let e = &at["conditional_effects"][0];
        close(
            "|z| at the bound",
            f(&e["statistic"]).abs(),
            1.959_963_984_540_054,
            1e-9,
            0.0,
        );
    }
}

#[test]
fn jn_everywhere_in_the_observed_range() {
    // Effect 0.5 + 0.01x with SE ≤ 0.18: significant at every observed x.
    let y = |x: f64| 0.5 + 0.01 * x;
    let j = jn_case(y);
    let r = region(&j, "x", "effect");
    assert_eq!(r["observed_region"], "everywhere");
    assert_eq!(r["observed_significant"], serde_json::json!([[0.0, 10.0]]));
    assert!(r["observed_bounds"].as_array().unwrap().is_empty());
    assert!(r["words"]
        .as_str()
        .unwrap()
        .contains("whole observed range (positive)"));
}

#[test]
fn jn_nowhere() {
    // Effects alternate ±0.05 around 0: the interval contains 0 at every x.
    let j = jn_case(|x: f64| if (x as i32) % 2 == 0 { 0.05 } else { -0.05 });
    let r = region(&j, "x", "effect");
    assert_eq!(r["observed_region"], "nowhere");
    assert!(r["observed_significant"].as_array().unwrap().is_empty());
}

#[test]
fn jn_outside_an_interval() {
    // Effect −1 + 0.2x crosses 0 at x = 5: significant below and above an
    // interval around 5, negative below and positive above.
    let y = |x: f64| -1.0 + 0.2 * x;
    let j = jn_case(y);
    let r = region(&j, "x", "effect");
    assert_eq!(r["significant"], "outside");
    assert_eq!(r["observed_region"], "outside");
    let b = r["observed_bounds"].as_array().unwrap();
    assert_eq!(b.len(), 2);
    assert!(f(&b[0]) < 5.0 && f(&b[1]) > 5.0);
    let w = r["words"].as_str().unwrap();
    assert!(w.contains("(negative)") && w.contains("(positive)"), "{w}");
    check_bounds_are_where_the_interval_touches_zero(&j, y);
}

#[test]
fn jn_inside_an_interval() {
    // Every effect 0.3, no slope: z = 0.3/0.095 = 3.1 at the mean x = 5, but
    // the SE grows to 0.095·√3.5 = 0.18 at the ends (z = 1.7): significant
    // only in the middle.
    let y = |_x: f64| 0.3;
    let j = jn_case(y);
    let r = region(&j, "x", "effect");
    assert_eq!(r["significant"], "inside");
    assert_eq!(r["observed_region"], "inside");
    let b = r["observed_bounds"].as_array().unwrap();
    assert_eq!(b.len(), 2);
    // Symmetric about the mean 5.
    close("symmetry", f(&b[0]) + f(&b[1]), 10.0, 1e-12, 1e-12);
    check_bounds_are_where_the_interval_touches_zero(&j, y);
}

// ------------------------------------------------ terminal and table output

#[test]
fn terminal_and_table_show_every_piece() {
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .arg(example("consortium-correlations.csv"))
        .args(
            "--measure r --moderator session_minutes --moderator mode --probe session_minutes \
             --probe mode --compare-levels --regions"
                .split_whitespace(),
        )
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    for phrase in [
        "Conditional effects",
        "mean − 1 SD",
        "held: mode at its reference level in_person",
        "Level contrasts",
        "Holm p",
        "Regions of significance (Johnson–Neyman)",
        "How the picture changes",
        "without moderators",
    ] {
        assert!(text.contains(phrase), "missing '{phrase}' in:\n{text}");
    }
    let dir = tempfile::tempdir().unwrap();
    let table = dir.path().join("t.csv");
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .arg(example("hiring-validity.csv"))
        .args(
            "--measure r --reliability-x rel_exercise --range-ratio range_ratio -q --table"
                .split_whitespace(),
        )
        .arg(&table)
        .output()
        .unwrap();
    assert!(out.status.success());
    let t = std::fs::read_to_string(&table).unwrap();
    let header = t.lines().next().unwrap();
    assert!(header.ends_with(",observed_r,se_factor"), "{header}");
    // 12 columns of HEADER (the last `computed_from`, issue 15) + the two artifact columns.
    assert_eq!(t.lines().nth(1).unwrap().split(',').count(), 14);
}

// ------------------------------------------------ bad input, one by one

#[test]
fn unknown_moderator_in_probe() {
    let e = fails(
        example("consortium-correlations.csv"),
        "--measure r --moderator mode --probe minutes",
    );
    assert!(
        e.contains("--probe") && e.contains("'minutes' is not a moderator"),
        "{e}"
    );
}

#[test]
fn categorical_moderator_given_numbers() {
    let e = fails(
        example("consortium-correlations.csv"),
        "--measure r --moderator mode --probe mode=1,2",
    );
    assert!(e.contains("--probe") && e.contains("categorical"), "{e}");
    assert!(e.contains("in_person, online"), "{e}");
}

#[test]
fn numeric_moderator_given_text() {
    let e = fails(
        example("consortium-correlations.csv"),
        "--measure r --moderator session_minutes --probe session_minutes=long",
    );
    assert!(e.contains("'long' is not a number"), "{e}");
}

#[test]
fn malformed_probe_and_probe_twice() {
    let e = fails(
        example("consortium-correlations.csv"),
        "--measure r --moderator session_minutes --probe session_minutes=10,,20",
    );
    assert!(e.contains("--probe"), "{e}");
    let e = fails(
        example("consortium-correlations.csv"),
        "--measure r --moderator session_minutes --probe session_minutes --probe session_minutes=3",
    );
    assert!(e.contains("probed twice"), "{e}");
}

#[test]
fn regions_without_a_numeric_moderator() {
    let e = fails(
        example("consortium-correlations.csv"),
        "--measure r --moderator mode --regions",
    );
    assert!(e.contains("--regions") && e.contains("numeric"), "{e}");
    let e = fails(
        example("consortium-correlations.csv"),
        "--measure r --regions",
    );
    assert!(
        e.contains("--regions") && e.contains("no moderators"),
        "{e}"
    );
}

#[test]
fn compare_levels_without_a_categorical_moderator() {
    let e = fails(
        example("consortium-correlations.csv"),
        "--measure r --moderator session_minutes --compare-levels",
    );
    assert!(e.contains("--compare-levels"), "{e}");
}

const ART: &str = "study,r,n,rxx,ryy,u\nA,0.30,100,0.80,0.70,0.60\nB,0.25,150,0.85,0.75,0.70\nC,0.40,80,0.90,0.65,0.55\nD,0.20,200,0.75,0.80,0.80\n";

#[test]
fn reliability_out_of_range_names_line_and_column() {
    for (bad, col, flag) in [
        ("1.2", "rxx", "--reliability-x rxx"),
        ("0", "rxx", "--reliability-x rxx"),
        ("-0.3", "ryy", "--reliability-y ryy"),
    ] {
        let text = ART.replacen(
            "0.80,0.70",
            &if col == "rxx" {
                format!("{bad},0.70")
            } else {
                format!("0.80,{bad}")
            },
            1,
        );
        let (_d, p) = temp("a.csv", &text);
        let e = fails(&p, &format!("--measure r {flag}"));
        assert!(
            e.contains("line 2") && e.contains(&format!("column '{col}'")),
            "{e}"
        );
        assert!(
            e.contains("reliability must be greater than 0 and at most 1"),
            "{e}"
        );
    }
}

#[test]
fn range_ratio_not_positive() {
    let (_d, p) = temp("a.csv", &ART.replacen("0.60\n", "0\n", 1));
    let e = fails(&p, "--measure r --range-ratio u");
    assert!(e.contains("line 2") && e.contains("column 'u'"), "{e}");
    assert!(e.contains("greater than 0"), "{e}");
    let (_d, p) = temp("a.csv", &ART.replacen("0.60\n", "wide\n", 1));
    let e = fails(&p, "--measure r --range-ratio u");
    assert!(e.contains("column 'u'"), "{e}");
}

#[test]
fn missing_artifact_value_excludes_the_row_with_its_reason() {
    let (_d, p) = temp("a.csv", &ART.replacen("0.60\n", "\n", 1));
    let j = json(&p, "--measure r --range-ratio u");
    assert_eq!(j["k"], 3);
    let reason = j["excluded"][0]["reason"].as_str().unwrap();
    assert!(
        reason.contains("missing range ratio u") && reason.contains("--range-ratio"),
        "{reason}"
    );
}

#[test]
fn artifact_flags_need_measure_r_and_their_columns() {
    let (_d, p) = temp("a.csv", ART);
    let e = fails(&p, "--measure partial-r --reliability-x rxx");
    assert!(
        e.contains("--reliability-x") && e.contains("--measure r"),
        "{e}"
    );
    let e = fails(&p, "--measure r --reliability-y rel_y");
    assert!(e.contains("rel_y"), "{e}");
}

#[test]
fn attenuation_only_is_the_linear_correction() {
    // Reliability alone: r_c = r/√(rxx·ryy), SE factor 1/√(rxx·ryy) (Hunter &
    // Schmidt 2004, ch. 3; the same formula in the Python reference).
    let (_d, p) = temp("a.csv", ART);
    let j = json(&p, "--measure r --reliability-x rxx --reliability-y ryy");
    let s = &j["artifacts"]["studies"][0];
    let a = (0.80f64 * 0.70).sqrt();
    close("r_c", f(&s["corrected_r"]), 0.30 / a, 1e-15, 0.0);
    close("factor", f(&s["se_factor"]), 1.0 / a, 1e-15, 0.0);
    close(
        "variance",
        f(&s["corrected_variance"]),
        (1.0f64 - 0.09).powi(2) / 99.0 / (a * a),
        1e-14,
        0.0,
    );
}

#[test]
fn bubble_plot_tints_the_region_only_with_regions() {
    // The caption states the region, and the SVG has the bound's label.
    let dir = tempfile::tempdir().unwrap();
    let svg = dir.path().join("b.svg");
    let run = |extra: &str| {
        let out = Command::cargo_bin("pondus")
            .unwrap()
            .arg("fit")
            .arg(example("consortium-correlations.csv"))
            .args(
                format!(
                    "--measure r --moderator session_minutes --moderator mode -q {extra} --bubble"
                )
                .split_whitespace(),
            )
            .arg(&svg)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        std::fs::read_to_string(&svg).unwrap()
    };
    let with = run("--regions");
    assert!(
        with.contains("Johnson–Neyman region: 15.06 to 60"),
        "caption missing"
    );
    assert!(with.contains(">15.06</text>"), "bound label missing");
    let without = run("");
    assert!(!without.contains("Johnson–Neyman"));
}

#[test]
fn numeric_by_numeric_slopes_match_the_reference_and_do_not_depend_on_centring() {
    // Reference: statsmodels t_test of [0, 1, 0, n] (slope of session at n)
    // and numpy.roots for the JN bounds of that slope along n. Centring both
    // moderators reparametrises the model; the slopes at given original-scale
    // values must not change.
    let fx = fixture();
    for inference in ["kh", "z"] {
        let want = &fx["consortium"][inference]["numeric_interaction"];
        for center in ["", "--center n --center session_minutes"] {
            let j = json(
                example("consortium-correlations.csv"),
                &format!(
                    "--measure r --moderator session_minutes --moderator n --interaction \
                     session_minutes,n --inference {inference} --probe n=100,300 --regions {center}"
                ),
            );
            same("τ²", &j["tau2"]["estimate"], &want["tau2"]);
            let slopes = j["simple_slopes"].as_array().unwrap();
            assert_eq!(slopes.len(), 2);
            for (g, w) in slopes
                .iter()
                .zip(want["slopes_session_at_n"].as_array().unwrap())
            {
                assert_eq!(g["of"], "session_minutes");
                same("at", &g["at"], &w["at"]);
                for k in CONTRAST_KEYS {
                    // Centring changes the rounding path: compare at IDENTITY_REL.
                    close(k, f(&g["test"][k]), f(&w[k]), IDENTITY_REL, REFERENCE_ABS);
                }
            }
            let r = region(&j, "n", "session_minutes");
            assert_eq!(
                r["significant"],
                want["jn_slope_session_along_n"]["significant"]
            );
            for (a, b) in r["bounds"].as_array().unwrap().iter().zip(
                want["jn_slope_session_along_n"]["bounds"]
                    .as_array()
                    .unwrap(),
            ) {
                close("JN bound", f(a), f(b), IDENTITY_REL, REFERENCE_ABS);
            }
        }
    }
}
