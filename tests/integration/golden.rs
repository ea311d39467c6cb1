//! Golden outputs: what every command prints and writes on the bundled
//! examples, compared byte for byte with the files in `tests/golden/`.
//!
//! Each case runs one or more `pondus` commands in a scratch folder that
//! holds a copy of `data-examples/` (and `tests/golden/inputs/`), so the
//! paths in the commands are the ones the README and docs use. The golden
//! file of a case holds, for every step, the command, the exit code,
//! standard output and standard error, and then every file the steps
//! wrote. Two things are not stored as they are, and both are still
//! compared exactly: the bundled font that SVG plots and HTML reports
//! carry inline (about 1 MB of base64 each time) is stored as its SHA-256,
//! and a PNG as its SHA-256 and size.
//!
//! The bad-input catalogue (`catalogue.rs`) has a golden file too: the whole
//! message of every case.
//!
//! A change that alters an output on purpose rewrites the files with
//! `PONDUS_BLESS=1 cargo test --test integration golden` and says why in
//! its commit.

use crate::catalogue;
use assert_cmd::Command;
use pondus::support::hash::sha256_hex;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::util::repo;

/// One case: a name (the golden file's stem) and the commands it runs, in
/// order, in one scratch folder.
struct Case {
    id: &'static str,
    steps: &'static [&'static str],
}

#[rustfmt::skip]
const CASES: &[Case] = &[
    // The README's set-up command and its usage examples.
    Case { id: "readme-main", steps: &["fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode"] },
    Case { id: "consortium-at-all-outputs", steps: &["fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode --at session_minutes=30,mode=online --json out.json --table table.csv --report report.html --forest forest.svg --bubble bubble.svg --funnel funnel.svg"] },
    Case { id: "programme-smd", steps: &["fit data-examples/programme-sites.csv --measure smd --moderator dosage_hours --moderator delivery --reference delivery=staff --json out.json --table table.csv --report report.html --forest forest.svg --bubble bubble.svg --funnel funnel.svg --contours"] },
    Case { id: "slopes-centred", steps: &["fit data-examples/published-slopes.csv --measure slope --moderator mean_age --center mean_age --json out.json --forest forest.svg --sort mean_age --show-fitted"] },
    Case { id: "trials-log-or", steps: &["fit data-examples/trial-events.csv --measure log-or --moderator followup_months --json out.json --table table.csv --forest forest.svg --sort effect --funnel funnel.svg --contours --report report.html"] },
    Case { id: "trials-log-rr-dl-z", steps: &["fit data-examples/trial-events.csv --measure log-rr --moderator setting --tau2 dl --inference z --json out.json --forest forest.svg --sort precision"] },
    Case { id: "trials-risk-diff-common", steps: &["fit data-examples/trial-events.csv --measure risk-diff --tau2 none --json out.json --level 0.9"] },
    Case { id: "precomputed-json-stdout", steps: &["fit data-examples/precomputed-effects.csv --measure effect --moderator duration_weeks --json -"] },
    Case { id: "partial-r-table", steps: &["fit data-examples/partial-correlations.csv --measure partial-r --moderator remote_share --table per-study.csv --json out.json --tau2 pm"] },
    Case { id: "slopes-estimators", steps: &[
        "fit data-examples/published-slopes.csv --measure slope --moderator mean_age --tau2 ml --json ml.json",
        "fit data-examples/published-slopes.csv --measure slope --moderator mean_age --tau2 he --json he.json",
        "fit data-examples/published-slopes.csv --measure slope --moderator mean_age --tau2 sj --json sj.json",
    ] },
    // Robustness checks (README, tutorial).
    Case { id: "trials-diagnostics", steps: &["fit data-examples/trial-events.csv --measure log-or --moderator followup_months --loo --influence --permutations 999 --seed 7 --small-study --cumulative-by followup_months --json out.json --table table.csv --report report.html --funnel funnel.svg"] },
    Case { id: "consortium-permutations-loo", steps: &["fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode --permutations 5000 --seed 7 --loo --json out.json"] },
    Case { id: "trials-selection", steps: &["fit data-examples/trial-events.csv --measure log-or --moderator followup_months --small-study --selection 0.025 --favoured negative --sensitivity-plot sensitivity.svg --json out.json --report report.html"] },
    Case { id: "hiring-small-study", steps: &["fit data-examples/hiring-validity.csv --measure r --loo --influence --small-study --funnel funnel.svg --json out.json --table table.csv"] },
    Case { id: "consortium-influence-plot", steps: &["fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode --influence --table table.csv --influence-plot influence.svg"] },
    // Interpretation (docs/interpretation.md, tutorial).
    Case { id: "consortium-interaction-regions", steps: &["fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode --interaction session_minutes,mode --probe mode --regions --json out.json --bubble bubble.svg --report report.html"] },
    Case { id: "consortium-probe-compare", steps: &["fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode --probe session_minutes --probe mode --compare-levels --regions --json out.json --bubble bubble.svg --bubble-x mode"] },
    Case { id: "consortium-probe-values", steps: &["fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode --probe session_minutes=15,30,60 --categorical mode --json out.json"] },
    Case { id: "hiring-artifacts", steps: &["fit data-examples/hiring-validity.csv --measure r --reliability-x rel_exercise --reliability-y rel_rating --range-ratio range_ratio --moderator hired_share --json out.json --table table.csv --report report.html"] },
    Case { id: "hiring-range-check", steps: &["fit data-examples/hiring-validity.csv --measure r --moderator range_ratio --reliability-x rel_exercise --reliability-y rel_rating --range-ratio range_ratio"] },
    // Predictions and the shareable report (tutorial, part C and D).
    Case { id: "programme-predictions", steps: &["fit data-examples/programme-sites.csv --measure smd --moderator dosage_hours --moderator delivery --at dosage_hours=40,delivery=volunteer --at dosage_hours=20,delivery=volunteer --probe dosage_hours --report programme.html --forest forest.png --json out.json"] },
    // Heterogeneity as an answer (tutorial B5, B6 and C3, methods §17).
    Case { id: "programme-threshold-shrink", steps: &["fit data-examples/programme-sites.csv --measure smd --moderator dosage_hours --moderator delivery --at dosage_hours=20,delivery=volunteer --at dosage_hours=60,delivery=staff --beyond 0.2 --shrink --json out.json --table table.csv --report report.html --forest sites.svg"] },
    Case { id: "consortium-all-subsets", steps: &["fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode --all-subsets --json out.json --report report.html"] },
    Case { id: "consortium-spread-by", steps: &["fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes --spread-by mode --json out.json --report report.html --forest forest.svg --bubble bubble.svg"] },
    // Effects from whatever each study reports, straight from the spreadsheet (tutorial, part E).
    Case { id: "classroom-routes", steps: &[
        "columns --measure smd",
        "fit data-examples/classroom-extraction.xlsx --sheet extraction --measure smd --moderator weeks --forest forest.svg --table table.csv --report report.html --json out.json",
    ] },
    // Dependent effects (README, methods §16).
    Case { id: "lab-cluster-robust", steps: &["fit data-examples/lab-conditions.csv --cluster lab --moderator lab_years --moderator session_minutes --robust --json out.json --table table.csv --report report.html"] },
    Case { id: "lab-cluster-ml", steps: &["fit data-examples/lab-conditions.csv --cluster lab --moderator lab_years --tau2 ml --inference z --json out.json"] },
    Case { id: "lab-levels-2-robust", steps: &["fit data-examples/lab-conditions.csv --cluster lab --levels 2 --robust --moderator session_minutes --json out.json"] },
    // Planning (docs/planning.md, tutorial).
    Case { id: "plan-kh-target", steps: &["plan --measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --target-power 0.8"] },
    Case { id: "plan-z-solve-n", steps: &["plan --measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --test z --target-power 0.8 --solve n --json -"] },
    Case { id: "plan-effect-alpha", steps: &["plan --measure effect --variance 0.04 --k 12 --tau2 0.01 --share 0.25 --moderator-effect 0.3 --alpha 0.01 --json -"] },
    Case { id: "plan-curve-report", steps: &["plan --measure smd --k 30 --n 60 --tau2 0.02 --share 0.5 --moderator-effect 0.3 --test z --target-power 0.8 --curve power.svg --report plan.html --json plan.json"] },
    Case { id: "plan-moderator-sd", steps: &["plan --measure smd --k 30 --n 80 --tau2 0.05 --moderator-sd 10 --moderator-effect 0.02 --test z --curve power.svg"] },
    // Participant rows (docs/sites.md, tutorial).
    Case { id: "sites-choir", steps: &[
        "sites data-examples/choir-participants.csv --site choir --x rehearsal_hours --y breath_hold_s --w age --covariate wind --info data-examples/choir-sites.csv --out choir-effects.csv --fit --moderator conductor_years --report choir.html --json sites.json",
        "fit choir-effects.csv --measure slope --moderator conductor_years",
        "fit choir-effects.csv --measure r --moderator conductor_years --json r.json",
    ] },
    Case { id: "sites-choir-one-stage", steps: &["sites data-examples/choir-participants.csv --site choir --x rehearsal_hours --y breath_hold_s --w age --covariate wind --fit --one-stage --json sites.json --report choir.html"] },
    Case { id: "sites-robust-centred", steps: &["sites data-examples/choir-participants.csv --site choir --x rehearsal_hours --y breath_hold_s --w age --robust --center-within --out effects.csv --json sites.json"] },
    Case { id: "sites-moments", steps: &["sites --moments inputs/moments.csv --out effects.csv --json sites.json"] },
    // Two groups in every site (docs/sites.md): Hedges' g and log odds ratios.
    Case { id: "sites-choir-smd", steps: &[
        "sites data-examples/choir-participants.csv --site choir --x wind --y breath_hold_s --effect smd --info data-examples/choir-sites.csv --out wind-effects.csv --fit --moderator conductor_years --json sites.json --report wind.html",
        "fit wind-effects.csv --measure smd --moderator conductor_years",
    ] },
    Case { id: "sites-log-or", steps: &[
        "sites inputs/group-rows.csv --site lab --x arm --y passed --effect log-or --treat treatment --event yes --out effects.csv --fit --json sites.json",
        "fit effects.csv --measure log-or",
        "sites --moments inputs/group-moments-binary.csv --effect log-or --out moments-effects.csv --json moments.json",
    ] },
    Case { id: "sql-query", steps: &[
        "sql --table choir_rows --site choir --x rehearsal_hours --y breath_hold_s --w age",
        "sql --table lab.rows --site site --x dose --y outcome --covariate sex --covariate age",
        "sql --table choir_rows --site choir --x rehearsal_hours --y breath_hold_s --w age --engine sqlite",
        "sql --table lab.rows --site site --x dose --y outcome --covariate sex --engine spark",
    ] },
    // Help texts: the flags and their wording are part of what the CLI prints.
    Case { id: "help", steps: &["--help", "fit --help", "plan --help", "sites --help", "sql --help"] },
];

/// The golden folder.
fn golden_dir() -> PathBuf {
    repo("tests/golden")
}

/// Whether this run rewrites the golden files instead of comparing.
fn bless() -> bool {
    std::env::var_os("PONDUS_BLESS").is_some_and(|v| v == "1")
}

/// Copies a folder's files (one level) into `to`.
fn copy_files(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        if entry.file_type().unwrap().is_file() {
            std::fs::copy(entry.path(), to.join(entry.file_name())).unwrap();
        }
    }
}

/// The text with every long base64 payload of a data URL (the embedded
/// font) replaced by its SHA-256, so the golden file stays small while the
/// comparison stays exact.
fn fold_blobs(text: &str) -> String {
    const MARK: &str = ";base64,";
    const LONG: usize = 4096;
    let mut out = String::with_capacity(text.len().min(1 << 20));
    let mut rest = text;
    while let Some(i) = rest.find(MARK) {
        let start = i + MARK.len();
        out.push_str(&rest[..start]);
        let tail = &rest[start..];
        let end = tail
            .find(|c: char| !(c.is_ascii_alphanumeric() || c == '+' || c == '/' || c == '='))
            .unwrap_or(tail.len());
        if end >= LONG {
            write!(
                out,
                "[{} base64 characters, SHA-256 {}]",
                end,
                sha256_hex(&tail.as_bytes()[..end])
            )
            .unwrap();
        } else {
            out.push_str(&tail[..end]);
        }
        rest = &tail[end..];
    }
    out.push_str(rest);
    out
}

/// How a file or stream is shown in a golden file.
fn show(bytes: &[u8]) -> String {
    match std::str::from_utf8(bytes) {
        Ok(text) if !bytes.starts_with(b"\x89PNG") => fold_blobs(text),
        _ => format!(
            "[binary: {} bytes, SHA-256 {}]\n",
            bytes.len(),
            sha256_hex(bytes)
        ),
    }
}

/// Appends one titled block.
fn block(out: &mut String, title: &str, body: &str) {
    writeln!(out, "━━━━ {title}").unwrap();
    out.push_str(body);
    if !body.is_empty() && !body.ends_with('\n') {
        out.push_str("\n━━━━ (no newline at the end)\n");
    }
}

/// Runs one case and renders everything it printed and wrote.
fn render_case(case: &Case) -> String {
    let dir = tempfile::tempdir().unwrap();
    copy_files(&repo("data-examples"), &dir.path().join("data-examples"));
    copy_files(&golden_dir().join("inputs"), &dir.path().join("inputs"));
    let mut out = String::new();
    for step in case.steps {
        let o = Command::cargo_bin("pondus")
            .unwrap()
            .current_dir(dir.path())
            .args(step.split_whitespace())
            .env("COLUMNS", "100")
            .write_stdin(Vec::new())
            .output()
            .unwrap();
        block(&mut out, &format!("command: pondus {step}"), "");
        block(&mut out, "exit", &format!("{:?}\n", o.status.code()));
        block(&mut out, "stdout", &show(&o.stdout));
        block(&mut out, "stderr", &show(&o.stderr));
    }
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.is_file())
        .collect();
    files.sort();
    for path in files {
        let name = path.file_name().unwrap().to_string_lossy().into_owned();
        block(
            &mut out,
            &format!("file: {name}"),
            &show(&std::fs::read(&path).unwrap()),
        );
    }
    out
}

/// Compares (or, when blessing, writes) one golden file; returns a line
/// describing a difference.
fn check(name: &str, actual: &str) -> Option<String> {
    let path = golden_dir().join(name);
    if bless() {
        std::fs::write(&path, actual).unwrap();
        return None;
    }
    let expected = std::fs::read_to_string(&path).unwrap_or_default();
    if expected == actual {
        return None;
    }
    let first = expected
        .lines()
        .zip(actual.lines())
        .position(|(a, b)| a != b)
        .unwrap_or_else(|| expected.lines().count().min(actual.lines().count()));
    let line = |t: &str| t.lines().nth(first).unwrap_or("<end>").to_string();
    Some(format!(
        "{name}: differs from line {}:\n  golden: {}\n  now:    {}",
        first + 1,
        line(&expected),
        line(actual)
    ))
}

#[test]
fn every_example_prints_and_writes_its_golden_output() {
    let failures: Vec<String> = CASES
        .iter()
        .filter_map(|c| check(&format!("{}.txt", c.id), &render_case(c)))
        .collect();
    assert!(
        failures.is_empty(),
        "{} golden outputs differ (rewrite on purpose with PONDUS_BLESS=1 and say why in the commit):\n{}",
        failures.len(),
        failures.join("\n")
    );
}

#[test]
fn every_bad_input_prints_its_golden_message() {
    let mut out = String::new();
    for case in catalogue::CASES {
        let (code, err) = catalogue::run(case);
        block(&mut out, &format!("case: {} ({})", case.id, case.args), "");
        block(&mut out, "exit", &format!("{code:?}\n"));
        block(&mut out, "stderr", &err);
    }
    if let Some(diff) = check("catalogue.txt", &out) {
        panic!("{diff}\n(rewrite on purpose with PONDUS_BLESS=1 and say why in the commit)");
    }
}

#[test]
fn golden_case_names_are_unique_and_every_golden_file_has_a_case() {
    let mut names: Vec<String> = CASES.iter().map(|c| format!("{}.txt", c.id)).collect();
    names.push("catalogue.txt".into());
    let mut sorted = names.clone();
    sorted.sort();
    sorted.dedup();
    assert_eq!(sorted.len(), names.len(), "two cases share a name");
    for entry in std::fs::read_dir(golden_dir()).unwrap() {
        let name = entry.unwrap().file_name().to_string_lossy().into_owned();
        if name.ends_with(".txt") {
            assert!(names.contains(&name), "tests/golden/{name} has no case");
        }
    }
}

#[test]
fn folding_keeps_short_payloads_and_hashes_long_ones() {
    let long = "A".repeat(5000);
    let folded = fold_blobs(&format!("x;base64,{long}) y;base64,QUJD) z"));
    assert!(folded.contains("[5000 base64 characters, SHA-256 "));
    assert!(folded.ends_with("y;base64,QUJD) z"));
    assert!(!folded.contains(&long));
}
