//! `pondus sites --effect smd` and `--effect log-or` through the binary:
//! per-site Hedges' g and log odds ratios against statsmodels 0.14.6
//! (tests/reference/site_groups.py, invented data in
//! tests/data/reference/site_groups/), from the rows and from a moments
//! table; the effects file read by `pondus fit` without `--col`.

use crate::util::{close, repo};
use assert_cmd::Command;
use pondus::tolerance::{REFERENCE_ABS, REFERENCE_REL};
use std::collections::HashMap;
use std::path::Path;
use tempfile::TempDir;

fn pondus() -> Command {
    Command::cargo_bin("pondus").expect("the pondus binary is built")
}

const DIR: &str = "tests/data/reference/site_groups";

/// A CSV file as rows of (first column → header → cell).
fn table(path: &Path) -> HashMap<String, HashMap<String, String>> {
    let mut r = csv::Reader::from_path(path).expect("file present");
    let headers = r.headers().unwrap().clone();
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            let vals = headers
                .iter()
                .zip(rec.iter())
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect();
            (rec[0].to_string(), vals)
        })
        .collect()
}

fn num(row: &HashMap<String, String>, key: &str) -> f64 {
    row[key]
        .parse()
        .unwrap_or_else(|_| panic!("{key} = {:?}", row[key]))
}

/// Runs `pondus sites` with `args` and returns the effects file and stdout,
/// with stdout's line breaks and indents joined into single spaces: where the
/// report wraps a line depends on the length of the data file's path, which
/// differs between clones (a deeper clone wrapped "2 left out / for").
fn sites(dir: &TempDir, args: &[&str]) -> (HashMap<String, HashMap<String, String>>, String) {
    let out = dir.path().join("effects.csv");
    let o = pondus()
        .arg("sites")
        .args(args)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&o.stdout).to_string();
    assert!(
        o.status.success(),
        "{stdout}\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let joined = stdout.split_whitespace().collect::<Vec<_>>().join(" ");
    (table(&out), joined)
}

fn check_smd(got: &HashMap<String, HashMap<String, String>>) {
    let want = table(&repo(&format!("{DIR}/expected.csv")));
    assert_eq!(got.len(), want.len());
    for (lab, e) in &want {
        let g = &got[lab];
        for key in ["treat_n", "ctrl_n"] {
            assert_eq!(g[key], e[key], "{lab} {key}");
        }
        for key in ["g", "var_g"] {
            close(
                &format!("{lab} {key}"),
                num(g, key),
                num(e, key),
                REFERENCE_REL,
                REFERENCE_ABS,
            );
        }
    }
}

fn check_log_or(got: &HashMap<String, HashMap<String, String>>) {
    let want = table(&repo(&format!("{DIR}/expected.csv")));
    assert_eq!(got.len(), want.len());
    for (lab, e) in &want {
        let g = &got[lab];
        for key in [
            "treat_n",
            "ctrl_n",
            "treat_events",
            "ctrl_events",
            "zero_cell",
        ] {
            assert_eq!(g[key], e[key], "{lab} {key}");
        }
        for key in ["log_or", "var_log_or"] {
            close(
                &format!("{lab} {key}"),
                num(g, key),
                num(e, key),
                REFERENCE_REL,
                REFERENCE_ABS,
            );
        }
    }
}

/// Text group labels and text outcomes from the rows: g and the 2×2
/// tables as statsmodels computes them from each group's own rows (the
/// pooled SD of the two group SDs; Table2x2 with shift_zeros), while pondus
/// works from the per-site moments.
#[test]
fn group_effects_from_rows_match_statsmodels() {
    let dir = TempDir::new().unwrap();
    let rows = repo(&format!("{DIR}/rows.csv"));
    let rows = rows.to_str().unwrap();
    let (got, out) = sites(
        &dir,
        &[
            rows,
            "--site",
            "lab",
            "--x",
            "arm",
            "--y",
            "score",
            "--effect",
            "smd",
            "--treat",
            "treatment",
        ],
    );
    check_smd(&got);
    assert!(out.contains("427 rows read, 2 left out for"), "{out}");
    let (got, out) = sites(
        &dir,
        &[
            rows,
            "--site",
            "lab",
            "--x",
            "arm",
            "--y",
            "passed",
            "--effect",
            "log-or",
            "--treat",
            "treatment",
            "--event",
            "yes",
        ],
    );
    check_log_or(&got);
    assert!(
        out.contains("1 site had a zero cell") && out.contains("'Lab 8'"),
        "{out}"
    );
}

/// The same numbers from a moments table (x and y coded 0/1 in the
/// database; the table written by the reference script with numpy).
#[test]
fn group_effects_from_moments_match_statsmodels() {
    let dir = TempDir::new().unwrap();
    let m = repo(&format!("{DIR}/moments.csv"));
    let (got, _) = sites(&dir, &["--moments", m.to_str().unwrap(), "--effect", "smd"]);
    check_smd(&got);
    let m = repo(&format!("{DIR}/moments_binary.csv"));
    let (got, _) = sites(
        &dir,
        &["--moments", m.to_str().unwrap(), "--effect", "log-or"],
    );
    check_log_or(&got);
}

/// The effects file reads with `pondus fit --measure smd` / `log-or`
/// without `--col`, and the fit equals that of the reference g (or log OR)
/// and variance given directly as effects.
#[test]
fn effects_file_fits_like_the_reference_effects() {
    let dir = TempDir::new().unwrap();
    let rows = repo(&format!("{DIR}/rows.csv"));
    let want = table(&repo(&format!("{DIR}/expected.csv")));
    for (effect, measure, y, est, var) in [
        ("smd", "smd", "score", "g", "var_g"),
        ("log-or", "log-or", "passed", "log_or", "var_log_or"),
    ] {
        let effects = dir.path().join(format!("{effect}.csv"));
        pondus()
            .arg("sites")
            .arg(&rows)
            .args(["--site", "lab", "--x", "arm", "--y", y, "--effect", effect])
            .args(
                ["--treat", "treatment", "--event", "yes"]
                    .iter()
                    .take(if effect == "smd" { 2 } else { 4 }),
            )
            .arg("--out")
            .arg(&effects)
            .arg("-q")
            .assert()
            .success();
        let direct = dir.path().join(format!("{effect}-direct.csv"));
        let mut text = String::from("study,effect,variance\n");
        let mut labs: Vec<&String> = want.keys().collect();
        labs.sort();
        for lab in labs {
            text.push_str(&format!("{lab},{},{}\n", want[lab][est], want[lab][var]));
        }
        std::fs::write(&direct, text).unwrap();
        let fit = |file: &Path, measure: &str, name: &str| -> serde_json::Value {
            let json = dir.path().join(name);
            pondus()
                .arg("fit")
                .arg(file)
                .args(["--measure", measure, "-q", "--json"])
                .arg(&json)
                .assert()
                .success();
            serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap()
        };
        let a = fit(&effects, measure, "a.json");
        let b = fit(&direct, "effect", "b.json");
        assert_eq!(a["k"], 8, "{effect}");
        for key in ["estimate", "se"] {
            close(
                &format!("{effect} pooled {key}"),
                a["coefficients"][0][key].as_f64().unwrap(),
                b["coefficients"][0][key].as_f64().unwrap(),
                1e-8,
                1e-10,
            );
        }
        close(
            &format!("{effect} tau2"),
            a["tau2"]["estimate"].as_f64().unwrap(),
            b["tau2"]["estimate"].as_f64().unwrap(),
            1e-6,
            1e-9,
        );
        let from = if effect == "smd" { "t" } else { "counts" };
        assert_eq!(a["studies"][0]["computed_from"], from, "{effect}");
    }
}

/// Group columns coded 0/1 as numbers need no --treat; the same g as with
/// the text labels.
#[test]
fn numeric_groups_need_no_level() {
    let dir = TempDir::new().unwrap();
    let text = std::fs::read_to_string(repo(&format!("{DIR}/rows.csv"))).unwrap();
    let coded = text
        .replace(",treatment,", ",1,")
        .replace(",control,", ",0,");
    let path = dir.path().join("coded.csv");
    std::fs::write(&path, coded).unwrap();
    let (got, _) = sites(
        &dir,
        &[
            path.to_str().unwrap(),
            "--site",
            "lab",
            "--x",
            "arm",
            "--y",
            "score",
            "--effect",
            "smd",
        ],
    );
    check_smd(&got);
}

/// Sites with one group only, or too few rows, are listed with the reason;
/// the others are kept.
#[test]
fn sites_without_both_groups_are_listed() {
    let dir = TempDir::new().unwrap();
    let mut text = String::from("site,g,y\n");
    for (i, y) in [3.0, 4.5, 5.0, 7.5, 6.0, 2.0].iter().enumerate() {
        text.push_str(&format!("a,{},{y}\n", i % 2));
    }
    text.push_str("b,1,3\nb,1,4\nb,1,6\nc,0,2\nc,1,4\n");
    let path = dir.path().join("rows.csv");
    std::fs::write(&path, text).unwrap();
    let o = pondus()
        .arg("sites")
        .arg(&path)
        .args(["--site", "site", "--x", "g", "--y", "y", "--effect", "smd"])
        .arg("--out")
        .arg(dir.path().join("e.csv"))
        .output()
        .unwrap();
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{out}");
    assert!(
        out.contains("'b' (n = 3): no rows in the control group"),
        "{out}"
    );
    assert!(out.contains("'c' (n = 2): too few rows"), "{out}");
}

/// A text --x on the slope route: one message, however many rows hold
/// text (issue 18 asked for this instead of one message per row).
#[test]
fn text_x_gives_one_message() {
    let dir = TempDir::new().unwrap();
    let mut text = String::from("site,arm,y\n");
    for i in 0..60 {
        let arm = if i % 2 == 0 { "control" } else { "treatment" };
        text.push_str(&format!("s{},{arm},{}\n", i % 3, i as f64 * 0.5));
    }
    let path = dir.path().join("rows.csv");
    std::fs::write(&path, text).unwrap();
    let o = pondus()
        .arg("sites")
        .arg(&path)
        .args(["--site", "site", "--x", "arm", "--y", "y"])
        .arg("--out")
        .arg(dir.path().join("e.csv"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.contains("'control' on line 2") && err.contains("--effect smd"),
        "{err}"
    );
    // The same rows as groups work.
    let (got, _) = sites(
        &dir,
        &[
            path.to_str().unwrap(),
            "--site",
            "site",
            "--x",
            "arm",
            "--y",
            "y",
            "--effect",
            "smd",
            "--treat",
            "treatment",
        ],
    );
    assert_eq!(got.len(), 3);
}

/// A moments table is coded in the database: --treat is refused with the
/// reason, and a table with w columns cannot give a group comparison.
#[test]
fn moments_route_refusals() {
    let dir = TempDir::new().unwrap();
    let m = repo(&format!("{DIR}/moments.csv"));
    let o = pondus()
        .arg("sites")
        .args(["--moments", m.to_str().unwrap(), "--effect", "smd"])
        .args(["--treat", "treatment", "--out"])
        .arg(dir.path().join("e.csv"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("--treat") && err.contains("coded 0/1"),
        "{err}"
    );
    // A table with w columns (one made-up site; the layout is what counts).
    let names = ["x", "w", "xw", "y"];
    let mut header = vec!["site".to_string(), "n".into()];
    header.extend(names.iter().map(|n| format!("mean_{n}")));
    for i in 0..4 {
        for j in i..4 {
            header.push(format!("cov_{}_{}", names[i], names[j]));
        }
    }
    let row = std::iter::once("a".to_string())
        .chain(std::iter::repeat_n("1".to_string(), header.len() - 1))
        .collect::<Vec<_>>()
        .join(",");
    let with_w = dir.path().join("with-w.csv");
    std::fs::write(&with_w, format!("{}\n{row}\n", header.join(","))).unwrap();
    let o = pondus()
        .arg("sites")
        .args([
            "--moments",
            with_w.to_str().unwrap(),
            "--effect",
            "smd",
            "--out",
        ])
        .arg(dir.path().join("e.csv"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("w or covariate columns"), "{err}");
    let w = repo("tests/golden/inputs/moments.csv");
    // A table whose x is not 0/1 (the slope data of the golden case):
    // every site left out with the reason, so the run stops.
    let o = pondus()
        .arg("sites")
        .args(["--moments", w.to_str().unwrap(), "--effect", "smd", "--out"])
        .arg(dir.path().join("e.csv"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success(), "{err}");
    assert!(err.contains("not coded 0/1"), "{err}");
}
