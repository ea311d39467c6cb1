//! Issue 21's reliability cases beyond the bad-input catalogue: impossible
//! or silently wrong numbers, work that grows without bound, and text that
//! is unsafe where it is shown. Each test is named after its case; the data
//! are invented for the test.

use assert_cmd::Command;

/// Runs `pondus ARGS` in a fresh scratch folder holding `input.csv` with
/// `csv`; returns the exit code, standard output and standard error.
fn run(csv: &str, args: &[&str]) -> (Option<i32>, String, String) {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("input.csv"), csv).unwrap();
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .current_dir(dir.path())
        .args(args)
        .output()
        .unwrap();
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Runs `pondus ARGS` and parses standard output as JSON (exit 0 required).
fn json(csv: &str, args: &[&str]) -> serde_json::Value {
    let (code, out, err) = run(csv, args);
    assert_eq!(code, Some(0), "{err}");
    serde_json::from_str(&out).unwrap_or_else(|e| panic!("{e}: {out}"))
}

#[test]
fn a_category_listed_twice_gives_unique_levels() {
    // `1` and `01` are two labels (levels are labels as written, see
    // docs/reliability.md); each label is one level whatever the sort.
    let csv = "study,effect,variance,g\na,0.1,0.01,1\nb,0.2,0.02,01\nc,0.3,0.01,1\n\
               d,0.4,0.02,2\ne,0.5,0.03,2\nf,0.25,0.02,01\ng,0.35,0.02,2\n";
    let j = json(
        csv,
        &[
            "fit",
            "input.csv",
            "--moderator",
            "g",
            "--categorical",
            "g",
            "--json",
            "-",
        ],
    );
    let m = &j["model"]["moderators"][0]["kind"];
    assert_eq!(m["levels"], serde_json::json!(["01", "1", "2"]), "{m}");
    assert_eq!(m["counts"], serde_json::json!([2, 2, 3]), "{m}");
    let terms: Vec<&str> = j["coefficients"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["term"].as_str().unwrap())
        .collect();
    assert_eq!(terms, ["intercept", "g=1", "g=2"]);
}

#[test]
fn an_exact_fit_hidden_by_rounding_is_refused_under_knapp_hartung() {
    // Effects 0.1 … 0.5 exactly on the line 0.1·m: the residual Q is
    // rounding (about 1e-30), which gave F = 1e31 and a zero-width interval.
    let line = "study,effect,variance,m\na,0.1,0.01,1\nb,0.2,0.02,2\nc,0.3,0.01,3\n\
                d,0.4,0.02,4\ne,0.5,0.03,5\n";
    let (code, _, err) = run(line, &["fit", "input.csv", "--moderator", "m"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("--inference z"), "{err}");
    // Eight identical effects with a moderator gave t = 1e16.
    let mut same = String::from("study,effect,variance,m\n");
    for i in 0..8 {
        same.push_str(&format!("s{i},0.3,0.0{},{}\n", i % 3 + 1, i * i));
    }
    let (code, _, err) = run(&same, &["fit", "input.csv", "--moderator", "m"]);
    assert_eq!(code, Some(2), "{err}");
    // Real residual variation, however small relative to the effects, is kept.
    let near = "study,effect,variance,m\na,0.1,0.01,1\nb,0.2000001,0.02,2\nc,0.3,0.01,3\n\
                d,0.4,0.02,4\ne,0.5,0.03,5\n";
    let j = json(
        near,
        &["fit", "input.csv", "--moderator", "m", "--json", "-"],
    );
    assert!(j["moderator_test"]["statistic"].as_f64().unwrap() > 1e6);
}

#[test]
fn effects_beyond_1e50_are_refused_not_fitted_by_another_estimator() {
    // Effects 1e100, 0.3, 0.2: REML's correction term underflowed and the ML
    // τ² was reported as REML's. Now the row is named and rescaling asked for.
    let csv = "study,effect,variance\na,1e100,0.01\nb,0.3,0.02\nc,0.2,0.03\n";
    let (code, _, err) = run(csv, &["fit", "input.csv"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("line 2") && err.contains("other units"),
        "{err}"
    );
}

#[test]
fn extreme_values_get_the_range_reason_and_their_row() {
    // Variances near 1e-310 (subnormal) and effects near 1e308 were called
    // "collinear moderators"; the true reason is the range.
    let tiny =
        "study,effect,variance,m\na,0.1,1e-310,1\nb,0.3,0.02,2\nc,0.2,0.03,3\nd,0.4,0.01,5\n";
    let huge =
        "study,effect,variance,m\na,0.1,0.01,1\nb,1e308,0.02,2\nc,0.2,0.03,3\nd,0.4,0.01,5\n";
    for (csv, line) in [(tiny, "line 2"), (huge, "line 3")] {
        let (code, _, err) = run(csv, &["fit", "input.csv", "--moderator", "m"]);
        assert_eq!(code, Some(2), "{err}");
        assert!(
            err.contains(line) && err.contains("outside the range") && !err.contains("collinear"),
            "{err}"
        );
    }
    // An SD near 1e-200 makes a standardised mean difference near 1e200.
    let smd = "study,treat_mean,treat_sd,treat_n,ctrl_mean,ctrl_sd,ctrl_n\n\
               a,1,1e-200,20,0,1e-200,20\nb,1.2,1,20,1,1,20\nc,0.5,1,20,0.1,1,20\n";
    let (code, _, err) = run(smd, &["fit", "input.csv", "--measure", "smd"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("line 2") && err.contains("outside the range"),
        "{err}"
    );
}

#[test]
fn a_moderator_with_a_large_offset_fits_as_if_centred() {
    // m = 1e6 + i was refused as collinear with the intercept.
    let csv = "study,effect,variance,m\na,0.1,0.01,1000001\nb,0.3,0.02,1000002\n\
               c,0.2,0.01,1000003\nd,0.5,0.04,1000004\ne,0.4,0.03,1000005\n";
    let plain = json(
        csv,
        &["fit", "input.csv", "--moderator", "m", "--json", "-"],
    );
    let centred = json(
        csv,
        &[
            "fit",
            "input.csv",
            "--moderator",
            "m",
            "--center",
            "m",
            "--json",
            "-",
        ],
    );
    let slope = |j: &serde_json::Value, key: &str| j["coefficients"][1][key].as_f64().unwrap();
    for key in ["estimate", "se", "p"] {
        let (a, b) = (slope(&plain, key), slope(&centred, key));
        assert!((a - b).abs() <= 1e-5 * b.abs(), "{key}: {a} vs {b}");
    }
}

#[test]
fn a_partial_r_from_a_huge_t_is_not_zero() {
    // |t| ≥ 1.4e155 overflowed t² and gave partial r = 0, included.
    let csv = "study,t,n,covariates\na,2e155,100,1\nb,2.1,80,1\nc,1.5,120,1\nd,3.0,90,1\n";
    let (code, _, err) = run(csv, &["fit", "input.csv", "--measure", "partial-r"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("line 2") && err.contains("±1"), "{err}");
}

#[test]
fn one_cluster_is_refused() {
    let csv = "study,lab,effect,variance\na,L,0.1,0.01\nb,L,0.3,0.02\nc,L,0.2,0.01\nd,L,0.5,0.04\n";
    for extra in [&[][..], &["--robust"][..]] {
        let mut args = vec!["fit", "input.csv", "--cluster", "lab"];
        args.extend(extra);
        let (code, _, err) = run(csv, &args);
        assert_eq!(code, Some(2), "{err}");
        assert!(
            err.contains("one cluster") && err.contains("--cluster"),
            "{err}"
        );
        assert!(!err.contains("1 clusters"), "{err}");
    }
}

#[test]
fn a_cumulative_order_column_with_one_non_number_is_an_error() {
    let csv = "study,effect,variance,year\na,0.1,0.01,2001\nb,0.3,0.02,2002\nc,0.2,0.01,2003\n\
               d,0.5,0.04,2O04\ne,0.4,0.03,2005\n";
    let (code, _, err) = run(csv, &["fit", "input.csv", "--cumulative-by", "year"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("--cumulative-by") && err.contains("line 5 ('2O04')"),
        "{err}"
    );
}

#[test]
fn a_moderator_given_twice_in_two_spellings_is_named_as_such() {
    let csv = "study,effect,variance,m\na,0.1,0.01,1\nb,0.3,0.02,2\nc,0.2,0.01,3\nd,0.5,0.04,4\n";
    let (code, _, err) = run(
        csv,
        &["fit", "input.csv", "--moderator", "m", "--moderator", "M"],
    );
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("--moderator") && err.contains("give the moderator once"),
        "{err}"
    );
    assert!(!err.contains("collinear"), "{err}");
}

/// Runs `pondus ARGS` in `dir` (which holds the inputs).
fn run_in(dir: &std::path::Path, args: &[&str]) -> (Option<i32>, String, String) {
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .current_dir(dir)
        .args(args)
        .output()
        .unwrap();
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Labels with an escape sequence, a bell, a carriage return, a vertical
/// tab and a right-to-left override (invented).
const HOSTILE: &str = "study,effect,variance,m\n\
    \"Ada\x1b[2J\x1b[31m 2019\",0.1,0.01,1\n\
    \"Bel\x07\u{202E}reversed\",0.3,0.02,2\n\
    \"Cy\rz\x0b\",0.2,0.01,3\n\
    D \u{FFFE}2020,0.5,0.04,4\n\
    E 2021,0.35,0.03,5\n";

#[test]
fn labels_with_control_characters_do_not_reach_the_terminal() {
    let (code, out, err) = run(HOSTILE, &["fit", "input.csv", "--moderator", "m"]);
    assert_eq!(code, Some(0), "{err}");
    for bad in ['\x1b', '\x07', '\r', '\x0b', '\u{202E}'] {
        assert!(!out.contains(bad), "{bad:?} reached the terminal:\n{out}");
    }
    assert!(out.contains("Ada\u{FFFD}[2J"), "{out}");
    // Error messages quote cells too.
    let bad = "study,effect,variance\na,0.1,0.01\nb,\x1b[31mhigh,0.02\nc,0.2,0.03\n";
    let (code, _, err) = run(bad, &["fit", "input.csv"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        !err.contains('\x1b') && err.contains("\u{FFFD}[31mhigh"),
        "{err}"
    );
}

/// Whether every character is allowed in XML 1.0 (§2.2 Char).
fn xml_chars_only(s: &str) -> Result<(), char> {
    match s.chars().find(|&c| {
        !matches!(c, '\t' | '\n' | '\r' | '\u{20}'..='\u{D7FF}' | '\u{E000}'..='\u{FFFD}' | '\u{10000}'..)
    }) {
        Some(c) => Err(c),
        None => Ok(()),
    }
}

#[test]
fn labels_with_characters_xml_forbids_keep_the_svg_and_html_valid() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("input.csv"), HOSTILE).unwrap();
    let (code, _, err) = run_in(
        dir.path(),
        &[
            "fit",
            "input.csv",
            "--moderator",
            "m",
            "--forest",
            "f.svg",
            "--report",
            "r.html",
        ],
    );
    assert_eq!(code, Some(0), "{err}");
    for name in ["f.svg", "r.html"] {
        let text = std::fs::read_to_string(dir.path().join(name)).unwrap();
        assert_eq!(xml_chars_only(&text), Ok(()), "{name}");
        assert!(!text.contains('\u{202E}'), "{name}");
    }
}

#[test]
fn labels_starting_with_formula_characters_are_neutralised_in_the_table() {
    let csv = "study,effect,variance\n=HYPERLINK(\"x\"),0.1,0.01\n+1,0.3,0.02\n\
               -2 trial,0.2,0.01\n@SUM(A1),0.5,0.04\nplain,,0.03\n";
    let (code, out, err) = run(csv, &["fit", "input.csv", "--table", "-"]);
    assert_eq!(code, Some(0), "{err}");
    let firsts: Vec<String> = csv::Reader::from_reader(out.as_bytes())
        .records()
        .map(|r| r.unwrap()[0].to_string())
        .collect();
    assert_eq!(
        firsts,
        [
            "'=HYPERLINK(\"x\")",
            "'+1",
            "'-2 trial",
            "'@SUM(A1)",
            "plain"
        ]
    );
}

#[test]
fn a_report_with_more_studies_than_a_forest_holds_is_written_without_naming_forest() {
    let mut csv = String::from("study,effect,variance\n");
    for i in 0..20_001 {
        csv.push_str(&format!(
            "s{i},{},{}\n",
            (i % 17) as f64 * 0.01,
            0.01 + (i % 5) as f64 * 0.01
        ));
    }
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("input.csv"), &csv).unwrap();
    let (code, _, err) = run_in(
        dir.path(),
        &["fit", "input.csv", "--report", "r.html", "--quiet"],
    );
    assert_eq!(code, Some(0), "{err}");
    assert!(!err.contains("--forest"), "{err}");
    let page = std::fs::read_to_string(dir.path().join("r.html")).unwrap();
    assert!(page.contains("No forest plot: 20001 studies"), "no note");
}

#[test]
fn repeated_at_reference_and_probe_values_are_refused_not_overwritten() {
    let csv = "study,effect,variance,m,g\na,0.1,0.01,1,x\nb,0.3,0.02,2,y\nc,0.2,0.01,3,x\n\
               d,0.5,0.04,4,y\ne,0.35,0.03,5,z\nf,0.25,0.02,6,z\n";
    let base = ["fit", "input.csv", "--moderator", "m", "--moderator", "g"];
    let cases: [(&[&str], &str); 3] = [
        (&["--at", "m=1,m=2,g=x"], "--at"),
        (&["--reference", "g=x", "--reference", "g=y"], "--reference"),
        (&["--probe", "m=2,2.0"], "--probe"),
    ];
    for (extra, flag) in cases {
        let mut args = base.to_vec();
        args.extend(extra);
        let (code, _, err) = run(csv, &args);
        assert_eq!(code, Some(2), "{extra:?}: {err}");
        assert!(
            err.contains(flag)
                && (err.contains("twice")
                    || err.contains("same value")
                    || err.contains("two reference")),
            "{err}"
        );
    }
}

#[test]
fn utf16_input_is_named_as_utf16() {
    let text = "study,effect,variance\na,0.1,0.01\nb,0.3,0.02\nc,0.2,0.03\n";
    let bytes: Vec<u8> = [0xFF, 0xFE]
        .into_iter()
        .chain(text.encode_utf16().flat_map(|u| u.to_le_bytes()))
        .collect();
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("input.csv"), bytes).unwrap();
    let (code, _, err) = run_in(dir.path(), &["fit", "input.csv"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("UTF-16") && err.contains("save it as UTF-8"),
        "{err}"
    );
}

#[test]
fn a_sep_first_line_names_the_delimiter() {
    let csv = "sep=;\nstudy;effect;variance\na;0.1;0.01\nb;0.3;0.02\nc;0.2;0.03\n";
    let j = json(csv, &["fit", "input.csv", "--json", "-"]);
    assert_eq!(j["k"], 3, "{j}");
}

#[test]
fn an_unterminated_quote_gets_its_own_hint() {
    let csv = "study,effect,variance\na,0.1,0.01\n\"b,0.3,0.02\nc,0.2,0.03\nd,0.4,0.02\n";
    let (code, _, err) = run(csv, &["fit", "input.csv"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("line 3") && err.contains("never closed") && !err.contains("unquoted"),
        "{err}"
    );
}

#[test]
fn a_categorical_moderator_with_too_many_levels_is_refused_with_advice() {
    let mut csv = String::from("study,effect,variance,g\n");
    for i in 0..900 {
        csv.push_str(&format!(
            "s{i},{},0.02,L{}\n",
            (i % 7) as f64 * 0.1,
            i % 300
        ));
    }
    let (code, _, err) = run(
        &csv,
        &["fit", "input.csv", "--moderator", "g", "--categorical", "g"],
    );
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("300 levels") && err.contains("--cluster"),
        "{err}"
    );
}

#[test]
fn sites_robust_on_a_fifo_path_is_refused_instead_of_blocking() {
    let dir = tempfile::tempdir().unwrap();
    let fifo = dir.path().join("rows.csv");
    assert!(std::process::Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .unwrap()
        .success());
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("pondus"))
        .current_dir(dir.path())
        .args([
            "sites", "rows.csv", "--site", "s", "--x", "x", "--y", "y", "--robust", "--json", "-",
        ])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let start = std::time::Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().unwrap() {
            break Some(s);
        }
        if start.elapsed() > std::time::Duration::from_secs(30) {
            child.kill().unwrap();
            child.wait().unwrap();
            break None;
        }
        std::thread::sleep(std::time::Duration::from_millis(50));
    };
    let out = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(
        status.and_then(|s| s.code()),
        Some(2),
        "blocked or failed: {err}"
    );
    assert!(
        err.contains("--robust") && err.contains("read only once"),
        "{err}"
    );
}

/// Variances from 1e-12 to 1e6 in one data set gave I² = 107% and H² < 0:
/// ṽ = (k − p)/tr P lost every digit in tr P = Σw − tr(M⁻¹X'W²X). The
/// expected ṽ are computed in exact rational arithmetic (Python 3
/// `fractions.Fraction`, tr P = Σ w_i(1 − w_i x_i'M⁻¹x_i)): 2.999997e-09
/// without and 8.347217577465964e-07 with the moderator m = 0, 1, …, 6.
#[test]
fn i2_with_variances_from_1e_12_to_1e6_stays_in_range_and_exact() {
    let csv = "study,effect,variance,m\na,0.1,1e-12,0\nb,0.5,1e-9,1\nc,0.3,1e-6,2\n\
               d,0.2,1e-3,3\ne,0.4,1,4\nf,0.25,1e3,5\ng,0.35,1e6,6\n";
    for (mods, expected) in [
        (&[][..], 2.999997e-09),
        (&["--moderator", "m"][..], 8.347217577465964e-07),
    ] {
        let mut args = vec!["fit", "input.csv", "--inference", "z", "--json", "-"];
        args.extend(mods);
        let j = json(csv, &args);
        let h = &j["heterogeneity"];
        let v = h["typical_variance"].as_f64().unwrap();
        assert!(
            (v - expected).abs() <= 1e-9 * expected,
            "ṽ = {v}, exact {expected}"
        );
        let (i2, h2) = (h["i2"].as_f64().unwrap(), h["h2"].as_f64().unwrap());
        assert!(
            (0.0..=1.0).contains(&i2) && h2 >= 1.0,
            "I² = {i2}, H² = {h2}"
        );
    }
}

#[test]
fn sites_out_to_stdout_names_the_sites_left_out_and_no_usable_site_is_an_error() {
    // Site B has a constant outcome, site C two rows (invented rows).
    let mut csv = String::from("s,x,y\n");
    for i in 0..6 {
        csv.push_str(&format!("A,{i},{}\n", 0.5 * i as f64 + (i % 2) as f64));
        csv.push_str(&format!("B,{i},3\n"));
    }
    csv.push_str("C,1,2\nC,2,3\n");
    let args = [
        "sites",
        "input.csv",
        "--site",
        "s",
        "--x",
        "x",
        "--y",
        "y",
        "--out",
        "-",
    ];
    let (code, out, err) = run(&csv, &args);
    assert_eq!(code, Some(0), "{err}");
    assert!(out.lines().count() == 2, "{out}");
    assert!(
        err.contains("2 sites left out")
            && err.contains("  B (6 rows)")
            && err.contains("  C (2 rows)"),
        "{err}"
    );
    let j = json(
        &csv,
        &[
            "sites",
            "input.csv",
            "--site",
            "s",
            "--x",
            "x",
            "--y",
            "y",
            "--json",
            "-",
        ],
    );
    assert_eq!(j["excluded"].as_array().unwrap().len(), 2, "{j}");
    // No usable site: an error, not a header-only file.
    let none: String = csv
        .lines()
        .filter(|l| !l.starts_with('A'))
        .map(|l| format!("{l}\n"))
        .collect();
    let (code, out, err) = run(&none, &args);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        out.is_empty() && err.contains("no site has a usable regression"),
        "{err}"
    );
}

#[test]
fn a_prediction_at_1e308_gets_the_range_reason_not_non_convergence() {
    let csv = "study,effect,variance,m\na,0.1,0.01,1\nb,0.3,0.02,2\nc,0.2,0.01,3\nd,0.4,0.03,5\n";
    let (code, _, err) = run(
        csv,
        &["fit", "input.csv", "--moderator", "m", "--at", "m=1e308"],
    );
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("--at") && err.contains("range") && !err.contains("converge"),
        "{err}"
    );
}

#[test]
fn a_variance_and_an_se_that_disagree_are_not_silently_resolved() {
    let csv =
        "study,effect,variance,se\na,0.1,0.01,0.5\nb,0.3,0.02,0.1414\nc,0.2,0.01,\nd,0.4,,0.2\n";
    let (code, _, err) = run(csv, &["fit", "input.csv"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("line 2") && err.contains("disagree"), "{err}");
    // Agreeing to rounding (0.1414² = 0.019994) is fine.
    let ok =
        "study,effect,variance,se\na,0.1,0.01,0.1\nb,0.3,0.02,0.1414\nc,0.2,0.01,\nd,0.4,,0.2\n";
    let j = json(ok, &["fit", "input.csv", "--json", "-"]);
    assert_eq!(j["k"], 4);
}

#[test]
fn site_ids_that_match_only_ignoring_case_get_a_hint() {
    let mut csv = String::from("s,x,y\n");
    for i in 0..6 {
        for site in ["North", "South", "East"] {
            csv.push_str(&format!("{site},{i},{}\n", 0.3 * i as f64 + (i % 3) as f64));
        }
    }
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("input.csv"), &csv).unwrap();
    std::fs::write(
        dir.path().join("info.csv"),
        "s,size\nnorth,1\nSouth,2\nEAST,3\n",
    )
    .unwrap();
    let (code, out, err) = run_in(
        dir.path(),
        &[
            "sites",
            "input.csv",
            "--site",
            "s",
            "--x",
            "x",
            "--y",
            "y",
            "--info",
            "info.csv",
            "--json",
            "-",
        ],
    );
    assert_eq!(code, Some(0), "{err}");
    let j: serde_json::Value = serde_json::from_str(&out).unwrap();
    let notes = j["notes"].to_string();
    assert!(
        notes.contains("2 differ only in case") && notes.contains("'North' (data) and 'north'"),
        "{notes}"
    );
}

/// Participant rows of three sites with outcomes scaled by `scale`
/// (invented rows: y = 0.5·x plus a fixed wobble).
fn scaled_sites(scale: f64) -> String {
    let mut csv = String::from("s,x,y\n");
    for site in ["A", "B", "C"] {
        for i in 0..8 {
            let wobble = [0.3, -0.2, 0.1, -0.4, 0.25, 0.05, -0.15, 0.2][i];
            let y = (0.5 * i as f64 + wobble) * scale;
            csv.push_str(&format!("{site},{i},{y:e}\n"));
        }
    }
    csv
}

const SITES_ARGS: [&str; 10] = [
    "sites",
    "input.csv",
    "--site",
    "s",
    "--x",
    "x",
    "--y",
    "y",
    "--json",
    "-",
];

#[test]
fn sites_with_outcomes_near_1e155_get_the_range_reason_not_an_exact_fit() {
    // y² near 1e310 overflows: the sums of squares were infinite, RSS came
    // out as zero and every site "fit exactly".
    let (code, _, err) = run(&scaled_sites(1e155), &SITES_ARGS);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("too large for double precision") && err.contains("rescale"),
        "{err}"
    );
    assert!(!err.contains("fits this site's rows exactly"), "{err}");
    // The same rows at a representable scale fit, with slopes near 0.5.
    let j = json(&scaled_sites(1e100), &SITES_ARGS);
    let slope = j["sites"][0]["slope"].as_f64().unwrap();
    assert!((slope / 1e100 - 0.5).abs() < 0.1, "{slope}");
}

#[test]
fn sites_with_outcomes_near_1e_200_get_the_range_reason_not_constant() {
    // Squared deviations near 1e-400 underflow to zero: every site looked
    // constant in y.
    let (code, _, err) = run(&scaled_sites(1e-200), &SITES_ARGS);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("too small for double precision") && err.contains("rescale"),
        "{err}"
    );
    assert!(!err.contains("is constant in this site"), "{err}");
    // A truly constant outcome keeps its own reason.
    let constant: String = scaled_sites(1.0)
        .lines()
        .map(|l| match l.rsplit_once(',') {
            Some((head, _)) if !l.starts_with('s') => format!("{head},3\n"),
            _ => format!("{l}\n"),
        })
        .collect();
    let (code, _, err) = run(&constant, &SITES_ARGS);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("is constant in this site"), "{err}");
}

#[test]
fn whitespace_only_rows_are_counted_when_skipped() {
    // Sites: a row of blanks after each site's rows.
    let csv: String = scaled_sites(1.0)
        .lines()
        .map(|l| {
            if l.ends_with(&format!("{:e}", (0.5 * 7.0 + 0.2))) {
                format!("{l}\n   \n")
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    assert_eq!(csv.lines().filter(|l| l.trim().is_empty()).count(), 3);
    let j = json(&csv, &SITES_ARGS);
    assert_eq!(j["input"]["blank_rows"], 3, "{j}");
    assert_eq!(j["input"]["rows"], 24, "{j}");
    let text_args = &SITES_ARGS[..8];
    let (code, out, err) = run(&csv, &[text_args, &["--out", "e.csv"]].concat());
    assert_eq!(code, Some(0), "{err}");
    assert!(out.contains("3 blank rows skipped"), "{out}");
    // Fit: one blank row, counted in the singular.
    let effects = "study,effect,variance\na,0.1,0.01\n  \t \nb,0.2,0.02\nc,0.3,0.01\n";
    let (code, out, err) = run(effects, &["fit", "input.csv", "--measure", "effect"]);
    assert_eq!(code, Some(0), "{err}");
    assert!(out.contains("1 blank row was skipped."), "{out}");
}

#[test]
fn a_sep_first_line_names_the_delimiter_in_the_streaming_sites_reader() {
    // The same participant rows, semicolon-separated behind a `sep=;` line
    // (which the streaming reader took for the header).
    let rows = scaled_sites(1.0).replace(',', ";");
    let j = json(&format!("sep=;\n{rows}"), &SITES_ARGS);
    assert_eq!(j["input"]["rows"], 24, "{j}");
    assert_eq!(j["input"]["delimiter"], "semicolon", "{j}");
    assert_eq!(j["sites"].as_array().unwrap().len(), 3, "{j}");
    // Line numbers stay those of the file: a bad value on line 4.
    let mut lines: Vec<String> = format!("sep=;\n{rows}").lines().map(String::from).collect();
    lines[3] = "A;2;oops".into();
    let (code, _, err) = run(&(lines.join("\n") + "\n"), &SITES_ARGS);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("line 4"), "{err}");
}

#[test]
fn plan_with_a_huge_max_k_answers_without_simulating_beyond_its_budget() {
    // A tiny effect: no k up to 100,000 reaches the target. The search and
    // the power at the proposed k ran simulations of 2,000 data sets of up
    // to 100,000 sites each (minutes of silence); now they are bounded by
    // k × data sets ≤ 20 million and the note says so.
    let args = [
        "plan",
        "--measure",
        "r",
        "--n",
        "30",
        "--tau2",
        "0.02",
        "--moderator-sd",
        "1",
        "--moderator-effect",
        "0.002",
        "--target-power",
        "0.99",
        "--max-k",
        "100000",
        "--json",
        "-",
    ];
    let j = json("", &args);
    assert!(j["simulation"].is_null(), "{j}");
    assert!(
        j["k_needed"].is_null() && j["k_needed_simulated"].is_null(),
        "{j}"
    );
    let notes = j["notes"].to_string();
    assert!(notes.contains("not checked by simulation"), "{notes}");
    // The power shown is the F approximation's, labelled as such.
    assert_eq!(j["power"], j["power_analytic"], "{j}");
    assert!(
        j["power_method"]
            .as_str()
            .unwrap()
            .contains("F approximation"),
        "{j}"
    );
    // Within the budget the simulation still runs (100 data sets × 2,000 sites).
    let mut small = args.to_vec();
    small.extend(["--k", "2000", "--simulate", "100"]);
    small.retain(|a| *a != "--target-power" && *a != "0.99");
    small.retain(|a| *a != "--max-k" && *a != "100000");
    let j = json("", &small);
    assert_eq!(j["simulation"]["simulations"], 100, "{j}");
}

#[test]
fn two_studies_say_there_is_no_prediction_interval_instead_of_none() {
    // Found by the fit_dependent fuzz target (kept in fuzz/regressions): with
    // k − p − 1 < 1 the interval is absent by design, and the report said
    // "a new study's true effect is expected in none".
    let csv = "study,effect,variance\na,0.1,0.01\nb,0.3,0.02\n";
    let (code, out, err) = run(csv, &["fit", "input.csv", "--measure", "effect"]);
    assert_eq!(code, Some(0), "{err}");
    assert!(
        out.contains("no prediction interval for a new study"),
        "{out}"
    );
    assert!(!out.contains("expected in none"), "{out}");
}
