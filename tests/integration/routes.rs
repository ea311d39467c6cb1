//! Issue 15: effect sizes from whatever each study reports, and spreadsheets.
//!
//! Every route (`computed_from`) of `smd`, `r`, `log-or` and `effect` on the
//! invented tables in tests/data/routes/, against the independent values of
//! tests/reference/routes.py (statsmodels 0.14.6 effectsize_smd and
//! effectsize_2proportions, scipy 1.16.3 t.ppf and norm.ppf, numpy 2.3.5;
//! fixture tests/data/reference/routes/routes.json); every unusable value
//! excluded with its reason; the cross-check warnings; the same data as
//! .xlsx (openpyxl 3.1.5) and .ods (odfpy 1.4.1) giving the same JSON as the
//! CSV; bad cells named by their address; `sites --info` and
//! `plan --moderator-values` from spreadsheets; `pondus columns`.

use crate::util::{close, repo};
use assert_cmd::Command;
use pondus::tolerance::{REFERENCE_ABS, REFERENCE_REL};
use serde_json::Value;
use std::path::Path;

fn pondus() -> Command {
    Command::cargo_bin("pondus").expect("the pondus binary is built")
}

/// Runs `pondus fit FILE ARGS --json` in a fresh folder and returns the JSON.
fn fit_json(file: &Path, args: &[&str]) -> Value {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out.json");
    let assert = pondus()
        .arg("fit")
        .arg(file)
        .args(args)
        .arg("--json")
        .arg(&out)
        .arg("--quiet")
        .assert();
    let output = assert.get_output();
    assert!(
        output.status.success(),
        "pondus fit {} {args:?} failed: {}",
        file.display(),
        String::from_utf8_lossy(&output.stderr)
    );
    serde_json::from_str(&std::fs::read_to_string(out).unwrap()).unwrap()
}

fn fixture() -> Value {
    let text = std::fs::read_to_string(repo("tests/data/reference/routes/routes.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn names(v: &Value) -> Vec<String> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap().to_string())
        .collect()
}

#[test]
fn every_route_matches_the_python_reference() {
    let fx = fixture();
    let runs = fx["runs"].as_object().unwrap();
    assert_eq!(runs.len(), 8);
    for (name, run) in runs {
        let file = repo(&format!(
            "tests/data/routes/{}",
            run["file"].as_str().unwrap()
        ));
        let args: Vec<String> = names(&run["args"]);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let got = fit_json(&file, &args);
        let studies = got["studies"].as_array().unwrap();
        let want = run["included"].as_array().unwrap();
        assert_eq!(studies.len(), want.len(), "{name}: included studies");
        for (s, w) in studies.iter().zip(want) {
            assert_eq!(s["study"], w["study"], "{name}");
            assert_eq!(
                s["computed_from"], w["computed_from"],
                "{name}: {}",
                w["study"]
            );
            let what = format!("{name} {} ", w["study"]);
            close(
                &(what.clone() + "effect"),
                s["effect"].as_f64().unwrap(),
                w["effect"].as_f64().unwrap(),
                REFERENCE_REL,
                REFERENCE_ABS,
            );
            close(
                &(what + "variance"),
                s["variance"].as_f64().unwrap(),
                w["variance"].as_f64().unwrap(),
                REFERENCE_REL,
                REFERENCE_ABS,
            );
        }
        let excluded: Vec<String> = got["excluded"]
            .as_array()
            .unwrap()
            .iter()
            .map(|e| e["study"].as_str().unwrap().to_string())
            .collect();
        assert_eq!(excluded, names(&run["excluded"]), "{name}: excluded");
        let warnings: Vec<&str> = got["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .filter_map(|w| w.as_str())
            .filter(|w| w.contains("check the extraction"))
            .collect();
        let warned = names(&run["warned"]);
        assert_eq!(warnings.len(), warned.len(), "{name}: {warnings:?}");
        for (w, study) in warnings.iter().zip(&warned) {
            assert!(w.contains(study.as_str()), "{name}: {w}");
        }
    }
}

#[test]
fn every_unusable_value_is_excluded_with_its_reason() {
    let got = fit_json(
        &repo("tests/data/routes/smd-routes.csv"),
        &["--measure", "smd"],
    );
    let reason = |study: &str| -> String {
        got["excluded"]
            .as_array()
            .unwrap()
            .iter()
            .find(|e| e["study"] == study)
            .unwrap_or_else(|| panic!("{study} not excluded"))["reason"]
            .as_str()
            .unwrap()
            .to_string()
    };
    assert!(reason("p inequality J").contains("inequality ('< .05')"));
    assert!(reason("p without sign K").contains("p without sign"));
    assert!(reason("p rounded to zero L").contains("p of 0"));
    assert!(reason("p above one M").contains("p above 1"));
    assert!(reason("r only N").contains("--convert"));
    assert!(reason("counts only O").contains("--convert"));
    let cautions = got["cautions"].to_string();
    assert!(cautions.contains("approximated from medians"), "{cautions}");
    let r = fit_json(&repo("tests/data/routes/r-routes.csv"), &["--measure", "r"]);
    let reasons = r["excluded"].to_string();
    assert!(
        reasons.contains("inequality ('<0.01')") && reasons.contains("--convert"),
        "{reasons}"
    );
}

#[test]
fn conversions_say_so_and_caution() {
    let got = fit_json(
        &repo("tests/data/routes/smd-routes.csv"),
        &["--measure", "smd", "--convert"],
    );
    let obtained = got["effects_obtained"].as_array().unwrap();
    let conv: Vec<&Value> = obtained
        .iter()
        .filter(|c| c["derivation"] == "converted")
        .collect();
    assert_eq!(conv.len(), 2);
    assert_eq!(conv[0]["computed_from"], "r-to-d");
    assert_eq!(conv[0]["labels"][0], "r only N");
    assert!(got["cautions"].to_string().contains("roughly normal"));
}

#[test]
fn spreadsheets_give_the_same_json_as_the_csv() {
    for args in [
        vec!["--measure", "smd"],
        vec!["--measure", "smd", "--convert"],
    ] {
        let strip = |mut v: Value| {
            let input = v.as_object_mut().unwrap().remove("input").unwrap();
            (v.to_string(), input)
        };
        let (csv, _) = strip(fit_json(&repo("tests/data/routes/smd-routes.csv"), &args));
        for ext in SHEET_FORMATS {
            let file = repo(&format!("tests/data/routes/smd-routes.{ext}"));
            let (sheet, input) = strip(fit_json(&file, &args));
            // Everything but the input record (file name, its SHA-256, the
            // delimiter, the sheet) is byte for byte the CSV's.
            assert_eq!(sheet, csv, "{ext} {args:?}");
            assert_eq!(input["sheet"], "extraction");
            assert_eq!(input["delimiter"], "sheet");
        }
    }
}

/// Every spreadsheet format of the fixtures: .xlsx and .xlsm by openpyxl
/// 3.1.5, .xls (BIFF8) by xlwt 1.3.0, .ods by odfpy 1.4.1
/// (tests/reference/spreadsheets.py).
const SHEET_FORMATS: [&str; 4] = ["xlsx", "xlsm", "xls", "ods"];

/// Runs `pondus fit ARGS` and returns (exit code, stdout, stderr).
fn fit_run(file: &Path, args: &[&str]) -> (i32, String, String) {
    let out = pondus().arg("fit").arg(file).args(args).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).to_string(),
        String::from_utf8_lossy(&out.stderr).to_string(),
    )
}

/// cells.csv holds a number stored as text (B's effect), one with blanks
/// around it (C's se, " 0.18 "), an empty cell and the missing marks NA, ".",
/// "-" and N/A; the workbooks store the same cells (the two numbers as text
/// cells). Each behaves as in the CSV, in every format.
#[test]
fn text_numbers_empty_cells_and_missing_marks_behave_as_in_csv() {
    let args = ["--moderator", "dose", "--moderator", "setting"];
    let csv = fit_json(&repo("tests/data/routes/cells.csv"), &args);
    // What the CSV gives, checked on its own first.
    let study = |v: &Value, name: &str| -> Value {
        v["studies"]
            .as_array()
            .unwrap()
            .iter()
            .find(|s| s["study"] == name)
            .cloned()
            .unwrap_or_else(|| panic!("{name} not included"))
    };
    assert_eq!(study(&csv, "number as text B")["effect"], 0.31);
    close(
        "C's variance",
        study(&csv, "number with blanks C")["variance"]
            .as_f64()
            .unwrap(),
        0.18 * 0.18,
        1e-12,
        0.0,
    );
    let reasons: Vec<(String, String)> = csv["excluded"]
        .as_array()
        .unwrap()
        .iter()
        .map(|e| {
            (
                e["study"].as_str().unwrap().to_string(),
                e["reason"].as_str().unwrap().to_string(),
            )
        })
        .collect();
    for who in ["empty dose D", "NA dose E", "dot dose F", "dash dose G"] {
        assert!(
            reasons
                .iter()
                .any(|(s, r)| s == who && r == "missing moderator dose"),
            "{who}: {reasons:?}"
        );
    }
    assert!(
        reasons
            .iter()
            .any(|(s, r)| s == "N/A effect H" && r.contains("missing effect")),
        "{reasons:?}"
    );
    assert_eq!(reasons.len(), 5);
    let strip = |mut v: Value| {
        v.as_object_mut().unwrap().remove("input");
        v.to_string()
    };
    let want = strip(csv);
    for ext in SHEET_FORMATS {
        let file = repo(&format!("tests/data/routes/cells.{ext}"));
        assert_eq!(strip(fit_json(&file, &args)), want, "{ext}");
        // The terminal report names the left-out rows by sheet and row.
        let (code, out, err) = fit_run(&file, &args);
        assert_eq!(code, 0, "{err}");
        assert!(
            out.contains("  cells row 5  empty dose D: missing moderator dose"),
            "{ext}\n{out}"
        );
    }
}

#[test]
fn moderator_and_shifted_cells_are_named_by_their_address() {
    for ext in SHEET_FORMATS {
        let file = repo(&format!("tests/data/routes/cells.{ext}"));
        let (code, _, err) = fit_run(&file, &["--sheet", "bad dose", "--moderator", "dose"]);
        assert_eq!(code, 2, "{ext}: {err}");
        assert!(err.contains("cell 'bad dose'!D12 ('2.5O')"), "{ext}: {err}");
        // The table of sheet "shifted" starts at B3, so its 27th column is
        // AB and study O (the 15th data row) is on row 18.
        let file = repo(&format!("tests/data/routes/smd-routes.{ext}"));
        let (code, _, err) = fit_run(&file, &["--sheet", "shifted", "--measure", "smd"]);
        assert_eq!(code, 2, "{ext}: {err}");
        assert!(
            err.contains("cell shifted!AB18, column 'ctrl_events' (value '2 5')"),
            "{ext}: {err}"
        );
        assert!(err.contains("1 problem"), "{ext}: {err}");
    }
    // The CSV variant of the moderator message keeps line numbers.
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("bad.csv");
    let text = std::fs::read_to_string(repo("tests/data/routes/cells.csv"))
        .unwrap()
        .replace("plain K,0.35,0.13,2.5,", "plain K,0.35,0.13,2.5O,");
    std::fs::write(&f, text).unwrap();
    let (code, _, err) = fit_run(&f, &["--moderator", "dose"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("line 12 ('2.5O')"), "{err}");
}

#[test]
fn bad_cells_are_named_by_their_address() {
    for ext in SHEET_FORMATS {
        let file = repo(&format!("tests/data/routes/smd-routes.{ext}"));
        let out = pondus()
            .args(["fit", "--measure", "smd", "--sheet", "typos", "--quiet"])
            .arg(&file)
            .assert()
            .code(2);
        let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
        assert!(err.contains("3 problems"), "{err}");
        assert!(
            err.contains("cell typos!D4, column 'treat_se' (value 'abc')"),
            "{err}"
        );
        assert!(
            err.contains("cell typos!J5, column 't' (value '2,41')"),
            "{err}"
        );
        assert!(
            err.contains("cell typos!K6, column 'f' (value 'n.a.')"),
            "{err}"
        );
        let out = pondus()
            .args(["fit", "--measure", "smd", "--sheet", "nope"])
            .arg(&file)
            .assert()
            .code(2);
        let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
        assert!(
            err.contains("no sheet named 'nope'") && err.contains("extraction, typos"),
            "{err}"
        );
    }
    let out = pondus()
        .args(["fit", "--measure", "smd", "--sheet", "x"])
        .arg(repo("tests/data/routes/smd-routes.csv"))
        .assert()
        .code(2);
    let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
    assert!(
        err.contains("--sheet") && err.contains("not a spreadsheet"),
        "{err}"
    );
}

#[test]
fn a_text_file_named_xlsx_is_refused_clearly() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("fake.xlsx");
    std::fs::write(&f, "study,effect,se\na,0.1,0.1\n").unwrap();
    let out = pondus().arg("fit").arg(&f).assert().code(2);
    let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
    assert!(err.contains("cannot be read as a spreadsheet"), "{err}");
}

#[test]
fn effect_scale_log_and_the_asymmetry_warning() {
    let file = repo("tests/data/routes/effect-ratios.csv");
    let raw = fit_json(&file, &[]);
    let w = raw["warnings"].to_string();
    assert!(
        w.contains("asymmetric") && w.contains("--effect-scale log"),
        "{w}"
    );
    let logged = fit_json(&file, &["--effect-scale", "log"]);
    assert!(!logged["warnings"].to_string().contains("asymmetric"));
}

#[test]
fn sites_info_reads_a_spreadsheet() {
    let base = [
        "sites",
        "--site",
        "choir",
        "--x",
        "rehearsal_hours",
        "--y",
        "breath_hold_s",
        "--quiet",
    ];
    let run = |info: &str| -> Value {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("s.json");
        pondus()
            .args(base)
            .arg(repo("data-examples/choir-participants.csv"))
            .arg("--info")
            .arg(repo(info))
            .arg("--json")
            .arg(&out)
            .assert()
            .success();
        serde_json::from_str(&std::fs::read_to_string(out).unwrap()).unwrap()
    };
    let csv = run("data-examples/choir-sites.csv");
    for ext in ["xlsx", "ods"] {
        let sheet = run(&format!("tests/data/routes/choir-sites.{ext}"));
        let strip = |v: &Value| {
            let mut v = v.clone();
            let o = v.as_object_mut().unwrap();
            o.remove("input");
            if let Some(j) = o.get_mut("join").and_then(|j| j.as_object_mut()) {
                j.remove("file");
            }
            v.to_string()
        };
        assert_eq!(strip(&sheet), strip(&csv), "{ext}");
        assert!(sheet.to_string().contains("conductor_years"));
        // A repeated site id is named by both cells.
        let dir = tempfile::tempdir().unwrap();
        let out = pondus()
            .args(base)
            .arg(repo("data-examples/choir-participants.csv"))
            .arg("--info")
            .arg(repo(&format!("tests/data/routes/choir-sites.{ext}")))
            .args(["--sheet", "repeated", "--json"])
            .arg(dir.path().join("s.json"))
            .assert()
            .code(2);
        let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
        assert!(
            err.contains("cell repeated!A4, column 'choir'")
                && err.contains("already has a row at cell repeated!A3"),
            "{ext}: {err}"
        );
        assert!(!dir.path().join("s.json").exists());
    }
}

#[test]
fn plan_moderator_values_read_a_spreadsheet() {
    let run = |file: &Path| -> Value {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("p.json");
        pondus()
            .args([
                "plan",
                "--measure",
                "smd",
                "--tau2",
                "0.02",
                "--k",
                "8",
                "--n",
                "40",
                "--moderator-effect",
                "0.01",
                "--quiet",
            ])
            .arg("--moderator-values")
            .arg(file)
            .arg("--json")
            .arg(&out)
            .assert()
            .success();
        serde_json::from_str(&std::fs::read_to_string(out).unwrap()).unwrap()
    };
    let dir = tempfile::tempdir().unwrap();
    let txt = dir.path().join("values.txt");
    std::fs::write(&txt, "planned_minutes\n10\n20\n30\n40\n50\n60\n15\n45\n").unwrap();
    let want = run(&txt);
    for ext in ["xlsx", "ods"] {
        let got = run(&repo(&format!("tests/data/routes/planned-values.{ext}")));
        let strip = |v: &Value| {
            let mut v = v.clone();
            v.as_object_mut().unwrap().remove("input");
            v.to_string()
        };
        assert_eq!(strip(&got), strip(&want), "{ext}");
        let out = pondus()
            .args([
                "plan",
                "--measure",
                "smd",
                "--tau2",
                "0.02",
                "--k",
                "8",
                "--n",
                "40",
            ])
            .args(["--moderator-effect", "0.01", "--sheet", "typo"])
            .arg("--moderator-values")
            .arg(repo(&format!("tests/data/routes/planned-values.{ext}")))
            .assert()
            .code(2);
        let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
        assert!(
            err.contains("cell typo!A5: '4O' is not a finite number")
                && err.contains("one number per cell of the first column"),
            "{ext}: {err}"
        );
    }
}

#[test]
fn columns_lists_the_routes_of_each_measure() {
    let out = pondus()
        .args(["columns", "--measure", "smd"])
        .assert()
        .success();
    let text = String::from_utf8_lossy(&out.get_output().stdout).to_string();
    for route in [
        "means",
        "means-se",
        "t",
        "f",
        "p",
        "median-iqr",
        "median-range",
        "r-to-d",
        "counts-to-d",
    ] {
        assert!(
            text.contains(&format!(". {route}\n")) || text.contains(&format!(". {route} (")),
            "{route}\n{text}"
        );
    }
    assert!(text.contains("Luo et al. (2018)") && text.contains("Wan et al. (2014)"));
    let out = pondus().args(["columns"]).assert().success();
    let all = String::from_utf8_lossy(&out.get_output().stdout).to_string();
    assert!(all.contains("--measure log-or") && all.contains("ratio-ci"));
}

/// The median-range SD of pondus against the published values: Wan et al.
/// (2014, BMC Med Res Methodol 14:135) Table 1 prints ξ(n), the expected
/// range of n standard normal values, so that SD ≈ (max − min)/ξ(n);
/// tests/reference/medians.py copies the table, confirms it by integration
/// (scipy 1.16.3) and records it in tests/data/reference/medians/. pondus's
/// SD from a range of 1 must be 1/ξ(n) up to the approximation's gap.
/// The same file's simulation (numpy 2.3.5, seeded) is checked here too:
/// every estimator nearly unbiased for normal data, as the papers found.
#[test]
fn median_routes_against_wan_table_1_and_the_simulation() {
    use pondus::effect::smd_routes::{mean_sd_from_iqr, mean_sd_from_range};
    use pondus::tolerance::WAN_RANGE_DIVISOR_REL;
    let text = std::fs::read_to_string(repo("tests/data/reference/medians/medians.json")).unwrap();
    let fx: Value = serde_json::from_str(&text).unwrap();
    let rows = fx["wan_table_1"].as_array().unwrap();
    assert_eq!(rows.len(), 49);
    let mut worst: f64 = 0.0;
    for row in rows {
        let n = row["n"].as_f64().unwrap();
        if n < 10.0 {
            continue;
        }
        let published = row["published"].as_f64().unwrap();
        let (mean, sd) = mean_sd_from_range(0.0, -0.5, 0.5, n);
        assert!(mean.abs() < 1e-15);
        let gap = (1.0 / sd) / published - 1.0;
        worst = worst.max(gap.abs());
        assert!(gap.abs() <= WAN_RANGE_DIVISOR_REL, "n = {n}: gap {gap}");
    }
    assert!(worst > 0.0);
    for row in fx["simulation"].as_array().unwrap() {
        // pondus computes the simulated formulas: the first samples' estimates.
        let n = row["n"].as_f64().unwrap();
        for s in row["samples"].as_array().unwrap() {
            let g = |k: &str| s[k].as_f64().unwrap();
            let (mean, sd) = mean_sd_from_iqr(g("median"), g("q1"), g("q3"), n);
            close(
                "iqr mean",
                mean,
                g("iqr_mean"),
                REFERENCE_REL,
                REFERENCE_ABS,
            );
            close("iqr sd", sd, g("iqr_sd"), REFERENCE_REL, REFERENCE_ABS);
            let (mean, sd) = mean_sd_from_range(g("median"), g("min"), g("max"), n);
            close(
                "range mean",
                mean,
                g("range_mean"),
                REFERENCE_REL,
                REFERENCE_ABS,
            );
            close("range sd", sd, g("range_sd"), REFERENCE_REL, REFERENCE_ABS);
        }
        for route in ["median-iqr", "median-range"] {
            let r = &row[route];
            assert!(
                r["mean_error_in_sd"].as_f64().unwrap().abs() < 0.01,
                "{row}"
            );
            assert!(
                r["sd_rel_error_vs_sigma"].as_f64().unwrap().abs() < 0.01,
                "{row}"
            );
        }
    }
}

#[test]
fn cautions_and_the_route_section_name_a_few_studies_and_count_the_rest() {
    // Invented data: 30 studies given as medians with quartiles.
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("medians.csv");
    let mut text = String::from(
        "study,treat_n,ctrl_n,treat_median,treat_q1,treat_q3,ctrl_median,ctrl_q1,ctrl_q3\n",
    );
    for i in 0..30 {
        let shift = (i % 7) as f64 * 0.4;
        text.push_str(&format!(
            "Site {i:02},{},{},{:.1},{:.1},{:.1},12.0,9.1,15.6\n",
            30 + i,
            28 + i % 5,
            13.0 + shift,
            10.0 + shift,
            17.0 + shift
        ));
    }
    std::fs::write(&file, text).unwrap();
    let got = fit_json(&file, &["--measure", "smd"]);
    let cautions: Vec<&str> = got["cautions"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|c| c.as_str())
        .filter(|c| c.contains("approximated from medians"))
        .collect();
    assert_eq!(cautions.len(), 1, "{cautions:?}");
    let c = cautions[0];
    assert!(
        c.starts_with("30 studies' effects were approximated"),
        "{c}"
    );
    assert!(
        c.contains("Site 00, Site 01") && c.contains("Site 11 and 18 more"),
        "{c}"
    );
    assert!(!c.contains("Site 12"), "{c}");
    // The terminal's route section names twenty and points to the rest.
    let out = pondus()
        .arg("fit")
        .arg(&file)
        .args(["--measure", "smd"])
        .assert()
        .success();
    let text = String::from_utf8_lossy(&out.get_output().stdout).to_string();
    let line = text
        .lines()
        .find(|l| l.contains("30 approximated from medians and quartiles"))
        .unwrap_or_else(|| panic!("{text}"));
    assert!(
        line.contains("Site 19 and 10 more (every study's route is in the per-study output)"),
        "{line}"
    );
    assert!(!line.contains("Site 20"), "{line}");
}
