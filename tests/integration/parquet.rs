//! Issue 18, point 3: Parquet input for `pondus sites` and `pondus fit`.
//!
//! The fixtures in tests/data/parquet/ are written by pyarrow 26.0.1
//! (tests/reference/parquet_fixtures.py), an independent writer; each
//! Parquet file with a CSV twin holds the same values, and both must give
//! the same JSON apart from the input record (and the words "row"/"line"
//! with the numbering of a note on left-out rows: a Parquet file's rows are
//! numbered from 1, a CSV file's lines count the header). Bad cells are
//! named by row and column, unsupported column types by name and type, and
//! damaged files get a message and exit code 2, never a panic.

use crate::util::repo;
use assert_cmd::Command;
use serde_json::Value;
use std::path::{Path, PathBuf};

fn pondus() -> Command {
    Command::cargo_bin("pondus").expect("the pondus binary is built")
}

fn data(name: &str) -> PathBuf {
    repo(&format!("tests/data/parquet/{name}"))
}

/// Runs pondus with `args` (`{dir}` replaced by a scratch folder); returns
/// (exit code, stderr, the JSON written to {dir}/out.json if any, the
/// effects file {dir}/e.csv if any).
fn run(args: &[&str]) -> (i32, String, Option<Value>, Option<String>) {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path().display().to_string();
    let args: Vec<String> = args.iter().map(|a| a.replace("{dir}", &d)).collect();
    let o = pondus().args(&args).output().unwrap();
    let json = std::fs::read_to_string(dir.path().join("out.json"))
        .ok()
        .map(|t| serde_json::from_str(&t).unwrap());
    let effects = std::fs::read_to_string(dir.path().join("e.csv")).ok();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stderr).into_owned(),
        json,
        effects,
    )
}

/// `pondus sites FILE ARGS --out {dir}/e.csv --json {dir}/out.json`.
fn sites(file: &Path, args: &[&str]) -> (Value, String) {
    let f = file.display().to_string();
    let mut all = vec!["sites", f.as_str()];
    all.extend_from_slice(args);
    all.extend_from_slice(&[
        "--out",
        "{dir}/e.csv",
        "--json",
        "{dir}/out.json",
        "--quiet",
    ]);
    let (code, err, json, effects) = run(&all);
    assert_eq!(code, 0, "pondus {all:?}: {err}");
    (json.unwrap(), effects.unwrap())
}

/// Removes the input record; returns it.
fn strip_input(v: &mut Value) -> Value {
    v.as_object_mut().unwrap().remove("input").unwrap()
}

/// The note on rows left out for missing values, with the numbers of the
/// first rows; the other notes as they are.
fn split_notes(v: &mut Value) -> (Vec<String>, Option<String>) {
    let notes = v
        .as_object_mut()
        .unwrap()
        .remove("notes")
        .unwrap_or(Value::Null);
    let mut rest = Vec::new();
    let mut missing = None;
    for n in notes.as_array().into_iter().flatten() {
        let t = n.as_str().unwrap().to_string();
        if t.contains("left out for an empty or missing-mark value") {
            missing = Some(t);
        } else {
            rest.push(t);
        }
    }
    (rest, missing)
}

#[test]
fn sites_from_parquet_give_the_json_of_the_same_rows_in_csv() {
    let csv = data("participants.csv");
    let pq = data("participants.parquet");
    let runs: [&[&str]; 5] = [
        &["--site", "site", "--x", "x", "--y", "y"],
        &[
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
        ],
        &[
            "--site",
            "site",
            "--x",
            "x",
            "--y",
            "score_text",
            "--covariate",
            "small",
            "--covariate",
            "band",
            "--robust",
        ],
        &[
            "--site", "site", "--x", "arm", "--y", "y", "--effect", "smd",
        ],
        &[
            "--site",
            "site",
            "--x",
            "x",
            "--y",
            "y",
            "--w",
            "c",
            "--center-within",
            "--robust",
        ],
    ];
    for args in runs {
        let (mut a, ea) = sites(&csv, args);
        let (mut b, eb) = sites(&pq, args);
        let (ia, ib) = (strip_input(&mut a), strip_input(&mut b));
        let (na, ma) = split_notes(&mut a);
        let (nb, mb) = split_notes(&mut b);
        assert_eq!(a.to_string(), b.to_string(), "{args:?}");
        assert_eq!(na, nb, "{args:?}");
        assert_eq!(ea, eb, "effects files differ for {args:?}");
        assert_eq!(ib["delimiter"], "parquet");
        assert_eq!(ia["rows"], 600);
        assert_eq!(ib["rows"], 600);
        assert_eq!(ia["missing_rows"], ib["missing_rows"]);
        // A CSV line is the Parquet row number plus one (the header line).
        let lines: Vec<u64> = ia["missing_lines"]
            .as_array()
            .unwrap()
            .iter()
            .map(|l| l.as_u64().unwrap() - 1)
            .collect();
        let rows: Vec<u64> = ib["missing_lines"]
            .as_array()
            .unwrap()
            .iter()
            .map(|l| l.as_u64().unwrap())
            .collect();
        assert_eq!(lines, rows, "{args:?}");
        if let (Some(ma), Some(mb)) = (ma, mb) {
            assert!(
                ma.contains("(first lines:") && mb.contains("(first rows:"),
                "{ma} / {mb}"
            );
            assert_eq!(ma.split("(first").next(), mb.split("(first").next());
        }
    }
}

/// The sites and the missing rows are what the fixture was written with
/// (12 sites; 8 rows with one null among x, w, c and y), so the comparison
/// above is not between two equally wrong readings.
#[test]
fn the_parquet_rows_are_all_read() {
    let (v, effects) = sites(
        &data("participants.parquet"),
        &[
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
        ],
    );
    assert_eq!(v["input"]["rows"], 600);
    let missing = v["input"]["missing_rows"].as_u64().unwrap();
    assert!((1..=8).contains(&missing), "{missing}");
    let ids: Vec<&str> = v["sites"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["study"].as_str().unwrap())
        .collect();
    assert_eq!(ids.len(), 12, "{ids:?}");
    assert!(
        ids.contains(&"Ward \"B\" 3") && ids.contains(&"St. Anne's") && ids.contains(&"padded"),
        "{ids:?}"
    );
    assert!(effects.contains("\"Ward \"\"B\"\" 3\""), "{effects}");
    let n: u64 = v["sites"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["n"].as_u64().unwrap())
        .sum();
    assert_eq!(n + missing, 600);
}

/// Every `line` field of a CSV run's JSON less 1: the Parquet row number
/// of the same row (a CSV file's line 1 is its header).
fn lines_to_rows(v: &mut Value) {
    match v {
        Value::Object(m) => {
            for (k, x) in m.iter_mut() {
                match (k.as_str(), x.as_u64()) {
                    ("line", Some(n)) => *x = Value::from(n - 1),
                    _ => lines_to_rows(x),
                }
            }
        }
        Value::Array(a) => a.iter_mut().for_each(lines_to_rows),
        _ => {}
    }
}

#[test]
fn fit_from_parquet_gives_the_json_of_the_csv() {
    let csv = repo("data-examples/classroom-extraction.csv");
    let pq = data("studies.parquet");
    for args in [
        vec!["--measure", "smd"],
        vec!["--measure", "smd", "--moderator", "weeks"],
    ] {
        let go = |f: &Path| {
            let f = f.display().to_string();
            let mut all = vec!["fit", f.as_str()];
            all.extend_from_slice(&args);
            all.extend_from_slice(&["--json", "{dir}/out.json", "--quiet"]);
            let (code, err, json, _) = run(&all);
            assert_eq!(code, 0, "{all:?}: {err}");
            json.unwrap()
        };
        let (mut a, mut b) = (go(&csv), go(&pq));
        strip_input(&mut a);
        lines_to_rows(&mut a);
        let input = strip_input(&mut b);
        assert_eq!(a.to_string(), b.to_string(), "{args:?}");
        assert_eq!(input["delimiter"], "parquet");
    }
}

#[test]
fn bad_cells_are_named_by_row_and_column() {
    let f = data("bad-cells.parquet").display().to_string();
    // Text in x on the slope route: the one message, with the row.
    let (code, err, _, _) = run(&[
        "sites",
        &f,
        "--site",
        "site",
        "--x",
        "x",
        "--y",
        "y",
        "--out",
        "{dir}/e.csv",
    ]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("'abc' on row 23") && err.contains("code them 0/1"),
        "{err}"
    );
    // The same column as y: every problem listed by row and column.
    let (code, err, _, _) = run(&[
        "sites",
        &f,
        "--site",
        "site",
        "--x",
        "y",
        "--y",
        "x",
        "--out",
        "{dir}/e.csv",
    ]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("bad-cells.parquet"), "{err}");
    assert!(
        err.contains("row 7, column 'site'") && err.contains("site id is missing"),
        "{err}"
    );
    assert!(err.contains("row 23, column 'x' (value 'abc')"), "{err}");
    assert!(err.contains("row 31, column 'x' (value '1,5')"), "{err}");
    assert!(!err.contains("line "), "{err}");
}

#[test]
fn unsupported_column_types_are_refused_by_name_and_type() {
    let f = data("bad-types.parquet").display().to_string();
    for (col, word) in [
        ("when", "date"),
        ("stamp", "timestamp"),
        ("tags", "nested"),
        ("blob", "binary"),
        ("point", "nested"),
    ] {
        let (code, err, _, _) = run(&[
            "sites",
            &f,
            "--site",
            "site",
            "--x",
            col,
            "--y",
            "y",
            "--out",
            "{dir}/e.csv",
        ]);
        assert_eq!(code, 2, "{col}: {err}");
        assert!(
            err.contains(&format!("column '{col}'")) && err.contains(word),
            "{col}: {err}"
        );
    }
    // The unsupported columns do not matter when they are not asked for.
    let (code, err, _, _) = run(&[
        "sites",
        &f,
        "--site",
        "site",
        "--x",
        "x",
        "--y",
        "y",
        "--out",
        "{dir}/e.csv",
    ]);
    assert_eq!(code, 0, "{err}");
}

/// A file cut short, one with bytes overwritten in its data pages, and text
/// saved under a .parquet name: each a message naming the file and exit
/// code 2, never a panic. Overwritten bytes in a column the command does
/// not read may go unnoticed, so a damaged file that is accepted must give
/// exactly the undamaged file's JSON (never a silently wrong number: the
/// fixture has page checksums, which are verified).
#[test]
fn damaged_files_get_a_message_not_a_panic() {
    let good = std::fs::read(data("participants.parquet")).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let mut cases: Vec<(String, Vec<u8>)> = vec![
        ("text.parquet".into(), b"site,x,y\na,1,2\n".to_vec()),
        ("empty.parquet".into(), Vec::new()),
    ];
    for cut in [good.len() / 2, good.len() - 3, 100] {
        cases.push((format!("cut{cut}.parquet"), good[..cut].to_vec()));
    }
    // Overwrite stretches of the data pages (between the leading magic and
    // the footer) with a fixed pattern, at several places.
    for (k, at) in [200usize, 5_000, 20_000, 40_000].into_iter().enumerate() {
        let mut bad = good.clone();
        let end = (at + 400).min(bad.len() - 2_000);
        for (i, b) in bad[at..end].iter_mut().enumerate() {
            *b = (i as u8).wrapping_mul(37) ^ 0x5A;
        }
        cases.push((format!("scrambled{k}.parquet"), bad));
    }
    for (name, bytes) in cases {
        let path = dir.path().join(&name);
        std::fs::write(&path, &bytes).unwrap();
        let p = path.display().to_string();
        let commands = |f: &str| {
            let f = f.to_string();
            [
                vec![
                    "sites".to_string(),
                    f.clone(),
                    "--site".into(),
                    "site".into(),
                    "--x".into(),
                    "x".into(),
                    "--y".into(),
                    "y".into(),
                    "--w".into(),
                    "w".into(),
                    "--out".into(),
                    "{dir}/e.csv".into(),
                    "--json".into(),
                    "{dir}/out.json".into(),
                ],
                vec![
                    "fit".to_string(),
                    f,
                    "--col".into(),
                    "effect=x".into(),
                    "--col".into(),
                    "variance=small".into(),
                    "--json".into(),
                    "{dir}/out.json".into(),
                ],
            ]
        };
        let good_path = data("participants.parquet").display().to_string();
        for (cmd, good_cmd) in commands(&p).into_iter().zip(commands(&good_path)) {
            let cmd: Vec<&str> = cmd.iter().map(String::as_str).collect();
            let (code, err, json, _) = run(&cmd);
            assert!(!err.contains("panicked"), "{name} {cmd:?}: {err}");
            if code == 0 && name.starts_with("scrambled") {
                let good_cmd: Vec<&str> = good_cmd.iter().map(String::as_str).collect();
                let (_, _, good, _) = run(&good_cmd);
                let (mut a, mut b) = (json.unwrap(), good.unwrap());
                strip_input(&mut a);
                strip_input(&mut b);
                assert_eq!(a, b, "{name} {cmd:?}: a damaged file gave other numbers");
                continue;
            }
            assert_ne!(code, 0, "{name} {cmd:?}: accepted a damaged file");
            if !name.starts_with("scrambled") {
                assert!(err.contains("cannot be read as Parquet"), "{name}: {err}");
            }
            assert!(err.contains(&name), "{name}: {err}");
        }
    }
}

#[test]
fn a_codec_this_build_lacks_is_named() {
    let f = data("participants-zstd.parquet").display().to_string();
    let (code, err, _, _) = run(&[
        "sites",
        &f,
        "--site",
        "site",
        "--x",
        "x",
        "--y",
        "y",
        "--out",
        "{dir}/e.csv",
    ]);
    assert_eq!(code, 2, "{err}");
    assert!(err.to_lowercase().contains("zstd"), "{err}");
    assert!(err.contains("snappy"), "{err}");
}
