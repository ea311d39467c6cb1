//! The command-line conventions of issue 22, through the binary: colour on
//! a terminal only (NO_COLOR, `--color`), decimal commas read when
//! unambiguous and the choice stated, one answer for `plan`'s k, and the
//! common look of the terminal reports (width, headings, no exponent in a
//! table of decimals).

use crate::util::repo;
use assert_cmd::Command;
use serde_json::Value;
use tempfile::TempDir;

fn pondus() -> Command {
    let mut c = Command::cargo_bin("pondus").unwrap();
    c.env_remove("NO_COLOR");
    c
}

fn stdout(c: &mut Command) -> String {
    let o = c.output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8(o.stdout).unwrap()
}

const FIT: [&str; 6] = [
    "fit",
    "data-examples/precomputed-effects.csv",
    "--measure",
    "effect",
    "--moderator",
    "duration_weeks",
];

fn fit_args(extra: &[&str]) -> Vec<String> {
    let mut a: Vec<String> = FIT.iter().map(|s| s.to_string()).collect();
    a[1] = repo(FIT[1]).display().to_string();
    a.extend(extra.iter().map(|s| s.to_string()));
    a
}

#[test]
fn colour_only_when_asked_or_on_a_terminal_without_no_color() {
    // Standard output here is a pipe: auto gives no escapes, always does.
    let auto = stdout(pondus().args(fit_args(&[])));
    assert!(!auto.contains('\x1b'));
    let always = stdout(pondus().args(fit_args(&["--color", "always"])));
    assert!(always.contains("\x1b[1m") && always.contains("\x1b[0m"));
    // The flag overrides NO_COLOR, as the convention asks.
    let forced = stdout(
        pondus()
            .env("NO_COLOR", "1")
            .args(fit_args(&["--color", "always"])),
    );
    assert_eq!(forced, always);
    let never = stdout(pondus().args(fit_args(&["--color", "never"])));
    assert_eq!(never, auto);
    let no_color = stdout(pondus().env("NO_COLOR", "1").args(fit_args(&[])));
    assert_eq!(no_color, auto);
    // The escapes are the only difference: taken out, the text is the plain one.
    let stripped = always
        .replace("\x1b[1;36m", "")
        .replace("\x1b[1;33m", "")
        .replace("\x1b[36m", "")
        .replace("\x1b[1m", "")
        .replace("\x1b[2m", "")
        .replace("\x1b[0m", "");
    assert_eq!(stripped, auto);
    // Colour is for the terminal report only: the JSON stays plain.
    let dir = TempDir::new().unwrap();
    let json = dir.path().join("out.json");
    pondus()
        .args(fit_args(&[
            "--color",
            "always",
            "--json",
            json.to_str().unwrap(),
        ]))
        .assert()
        .success();
    assert!(!std::fs::read_to_string(&json).unwrap().contains('\x1b'));
    // plan and sites take the flag too.
    let plan = stdout(pondus().args([
        "plan",
        "--measure",
        "r",
        "--k",
        "20",
        "--n",
        "50",
        "--tau2",
        "0.02",
        "--share",
        "0.5",
        "--moderator-effect",
        "0.2",
        "--test",
        "z",
        "--color",
        "always",
    ]));
    assert!(
        plan.contains("\x1b[1;36mPower with k = 20 sites\x1b[0m"),
        "{plan}"
    );
}

#[test]
fn reports_share_one_look_and_stay_within_100_columns() {
    // The data file sits in a folder whose path alone is wider than a line,
    // as a deep checkout or a shared drive gives: the Data line must still
    // wrap (between folders) within 100 columns.
    let dir = TempDir::new().unwrap();
    let deep = dir
        .path()
        .join("a-folder-name-long-enough-to-push-the-data-line-past-one-hundred-columns")
        .join("and-one-more-level");
    std::fs::create_dir_all(&deep).unwrap();
    let choir = deep.join("choir-participants.csv");
    std::fs::copy(repo("data-examples/choir-participants.csv"), &choir).unwrap();
    let sites = stdout(pondus().args([
        "sites",
        choir.to_str().unwrap(),
        "--site",
        "choir",
        "--x",
        "rehearsal_hours",
        "--y",
        "breath_hold_s",
        "--w",
        "age",
        "--fit",
    ]));
    let plan = stdout(pondus().args([
        "plan",
        "--measure",
        "r",
        "--k",
        "20",
        "--n",
        "50",
        "--tau2",
        "0.02",
        "--share",
        "0.5",
        "--moderator-effect",
        "0.2",
        "--test",
        "z",
        "--target-power",
        "0.8",
    ]));
    let fit = stdout(pondus().args(fit_args(&[])));
    for (name, text) in [("sites", &sites), ("plan", &plan), ("fit", &fit)] {
        assert!(text.starts_with("pondus "), "{name}: {text}");
        assert!(text.lines().nth(1).unwrap().starts_with("───"), "{name}");
        // Headings stand alone, without a colon; cautions come once.
        assert_eq!(text.matches("\nCautions\n").count(), 1, "{name}: {text}");
        assert!(!text.contains("Cautions:"), "{name}");
        for line in text.lines() {
            // Paragraphs wrap at 100 columns (tables keep their rows whole,
            // and these are narrower).
            assert!(line.chars().count() <= 100, "{name}: {line}");
        }
    }
    // Brackenby Choir's interaction is 4.910e-5: a table of decimals shows 0.0000.
    assert!(!sites.contains("e-5"), "{sites}");
    assert!(sites.contains("Brackenby Choir"), "{sites}");
}

#[test]
fn decimal_commas_are_read_when_unambiguous_and_said() {
    let dir = TempDir::new().unwrap();
    let json = |file: &str, extra: &[&str]| -> Value {
        let out = dir.path().join("out.json");
        let mut a = fit_args(extra);
        a[1] = repo(file).display().to_string();
        if file.ends_with("ambiguous.csv") {
            // That file has no moderator column.
            a.drain(4..6);
        }
        a.extend(["--json".into(), out.display().to_string(), "--quiet".into()]);
        pondus().args(&a).assert().success();
        serde_json::from_str(&std::fs::read_to_string(&out).unwrap()).unwrap()
    };
    let point = json("data-examples/precomputed-effects.csv", &[]);
    let comma = json("tests/data/decimal/effects-semicolon-comma.csv", &[]);
    // The same analysis: every coefficient identical.
    assert_eq!(point["coefficients"], comma["coefficients"]);
    assert_eq!(point["tau2"], comma["tau2"]);
    let notes = comma["notes"].to_string();
    assert!(
        notes.contains("read with a decimal comma") && notes.contains("'0,078'"),
        "{notes}"
    );
    assert!(!point["notes"].to_string().contains("decimal"));
    // Forcing the comma says so too.
    let forced = json(
        "tests/data/decimal/effects-semicolon-comma.csv",
        &["--decimal", ","],
    );
    assert_eq!(forced["coefficients"], point["coefficients"]);
    assert!(forced["notes"].to_string().contains("(--decimal ,)"));
    // Ambiguous and mixed files: a clear message, exit 2, nothing computed.
    for (file, says) in [
        (
            "tests/data/decimal/ambiguous.csv",
            "could be a decimal comma (1.250) or a thousands separator (1250)",
        ),
        (
            "tests/data/decimal/mixed.csv",
            "mix decimal marks: '0,25' (line 2, column 'effect')",
        ),
    ] {
        let o = pondus()
            .args(["fit", repo(file).to_str().unwrap(), "--measure", "effect"])
            .output()
            .unwrap();
        assert_eq!(o.status.code(), Some(2));
        let err = String::from_utf8(o.stderr).unwrap();
        assert!(err.contains(says) && err.contains("--decimal ,"), "{err}");
    }
    // --decimal , settles the ambiguous file: 1,250 is 1.25.
    let settled = json("tests/data/decimal/ambiguous.csv", &["--decimal", ","]);
    let effect: Vec<f64> = settled["studies"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["effect"].as_f64().unwrap())
        .collect();
    assert_eq!(effect, [1.25, 2.125, 1.5]);
    // --decimal . reads the commas as thousands separators.
    let thousands = json("tests/data/decimal/ambiguous.csv", &["--decimal", "."]);
    assert_eq!(thousands["studies"][0]["effect"].as_f64(), Some(1250.0));
    // A bad value is a usage error.
    let o = pondus()
        .args(fit_args(&["--decimal", ";"]))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn decimal_commas_in_sites_rows_and_plan_values() {
    let dir = TempDir::new().unwrap();
    // The first 200 participant rows, with semicolons and decimal commas,
    // give the same site effects as with points (the streaming reader).
    let plain = dir.path().join("plain.csv");
    let text = std::fs::read_to_string(repo("data-examples/choir-participants.csv")).unwrap();
    std::fs::write(
        &plain,
        text.lines().take(201).collect::<Vec<_>>().join("\n") + "\n",
    )
    .unwrap();
    let effects = |input: &std::path::Path, name: &str| -> (String, Value) {
        let out = dir.path().join(format!("{name}-effects.csv"));
        let json = dir.path().join(format!("{name}.json"));
        pondus()
            .args([
                "sites",
                input.to_str().unwrap(),
                "--site",
                "choir",
                "--x",
                "rehearsal_hours",
            ])
            .args(["--y", "breath_hold_s", "--w", "age", "--quiet"])
            .args([
                "--out",
                out.to_str().unwrap(),
                "--json",
                json.to_str().unwrap(),
            ])
            .assert()
            .success();
        (
            std::fs::read_to_string(out).unwrap(),
            serde_json::from_str(&std::fs::read_to_string(json).unwrap()).unwrap(),
        )
    };
    let (a, _) = effects(&plain, "plain");
    let (b, json) = effects(
        &repo("tests/data/decimal/choir-semicolon-comma.csv"),
        "comma",
    );
    assert_eq!(a, b);
    assert!(
        json["notes"]
            .to_string()
            .contains("read with a decimal comma"),
        "{json}"
    );
    // Planned moderator values with decimal commas.
    let plan = |extra: &[&str]| {
        pondus()
            .args([
                "plan",
                "--measure",
                "r",
                "--k",
                "10",
                "--n",
                "50",
                "--tau2",
                "0.02",
            ])
            .args(["--moderator-effect", "0.1", "--test", "z", "--json", "-"])
            .args(extra)
            .output()
            .unwrap()
    };
    let values = repo("tests/data/decimal/values-comma.txt");
    let o = plan(&["--moderator-values", values.to_str().unwrap()]);
    assert!(o.status.success());
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert!(
        v["moderator"].as_str().unwrap().contains("mean 2.1000"),
        "{v}"
    );
    assert!(v["notes"].to_string().contains("decimal comma"), "{v}");
    let points = dir.path().join("values.txt");
    std::fs::write(&points, "0.5\n1.5\n2\n2.5\n4\n").unwrap();
    let o2 = plan(&["--moderator-values", points.to_str().unwrap()]);
    let v2: Value = serde_json::from_slice(&o2.stdout).unwrap();
    assert_eq!(v["power"], v2["power"]);
}

#[test]
fn sites_moments_accepts_the_raw_rows_flags_and_checks_them() {
    let dir = TempDir::new().unwrap();
    let m = repo("tests/golden/inputs/moments.csv");
    let json = dir.path().join("m.json");
    let out = dir.path().join("m-effects.csv");
    let text = stdout(pondus().args([
        "sites",
        "--moments",
        m.to_str().unwrap(),
        "--site",
        "choir",
        "--x",
        "rehearsal_hours",
        "--y",
        "breath_hold_s",
        "--out",
        out.to_str().unwrap(),
        "--json",
        json.to_str().unwrap(),
    ]));
    let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains("Slope breath_hold_s on rehearsal_hours"),
        "{text}"
    );
    assert!(flat.contains("x = rehearsal_hours"), "{text}");
    let v: Value = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    assert_eq!(v["model"]["x"], "rehearsal_hours");
    // The same effects as without the names.
    let plain = dir.path().join("plain-effects.csv");
    pondus()
        .args([
            "sites",
            "--moments",
            m.to_str().unwrap(),
            "--out",
            plain.to_str().unwrap(),
        ])
        .assert()
        .success();
    assert_eq!(std::fs::read(&out).unwrap(), std::fs::read(&plain).unwrap());
    // Flags the table cannot match: a clear usage error.
    for (args, says) in [
        (vec!["--w", "age"], "no w columns"),
        (vec!["--covariate", "wind"], "the moments table has 0"),
    ] {
        let o = pondus()
            .args([
                "sites",
                "--moments",
                m.to_str().unwrap(),
                "--out",
                plain.to_str().unwrap(),
            ])
            .args(args)
            .output()
            .unwrap();
        assert_eq!(o.status.code(), Some(2));
        assert!(String::from_utf8_lossy(&o.stderr).contains(says));
    }
}

#[test]
fn sites_fit_without_w_gives_a_complete_answer() {
    let dir = TempDir::new().unwrap();
    let html = dir.path().join("s.html");
    let choir = repo("data-examples/choir-participants.csv");
    let text = stdout(pondus().args([
        "sites",
        choir.to_str().unwrap(),
        "--site",
        "choir",
        "--x",
        "rehearsal_hours",
        "--y",
        "breath_hold_s",
        "--fit",
        "--report",
        html.to_str().unwrap(),
    ]));
    assert!(text.contains("\nThe pooled slope across sites\n"), "{text}");
    let page = std::fs::read_to_string(&html).unwrap();
    let start = page.find("<div class=\"answer\"").unwrap();
    let answer = &page[start..start + page[start..].find("</div>").unwrap()];
    assert!(
        answer.contains("<strong>Average slope</strong>: across 29 sites"),
        "{answer}"
    );
    assert!(answer.contains("prediction interval"), "{answer}");
}

/// The terminal output of every bundled example (the stdout and stderr of
/// each command in `tests/golden/`) stays within 100 columns: paragraphs
/// wrap, list items hang, and the tables with free-text columns (leave-one-
/// out, influence) fit by wrapping that text and leaving out term columns.
/// Not checked: the JSON and SQL printed on standard output (data, not a
/// report), clap's usage line, and the error cases of the catalogue (one
/// message per line, so that it can be searched for).
#[test]
fn every_bundled_example_prints_within_100_columns() {
    let mut checked = 0;
    let mut too_wide = Vec::new();
    for entry in std::fs::read_dir(repo("tests/golden")).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().and_then(|e| e.to_str()) != Some("txt") {
            continue;
        }
        let text = std::fs::read_to_string(&path).unwrap();
        let (mut command, mut terminal) = (String::new(), false);
        for line in text.lines() {
            if let Some(head) = line.strip_prefix("━━━━ ") {
                if let Some(c) = head.strip_prefix("command: ") {
                    command = c.to_string();
                }
                if head.starts_with("case: ") {
                    command.clear();
                }
                let data = command.contains("--json -") || command.starts_with("pondus sql");
                terminal = !command.is_empty() && !data && (head == "stdout" || head == "stderr");
                continue;
            }
            if !terminal || line.starts_with("Usage: ") {
                continue;
            }
            checked += 1;
            if line.chars().count() > 100 {
                too_wide.push(format!("{}: {line}", path.display()));
            }
        }
    }
    assert!(checked > 1000, "only {checked} lines checked");
    assert!(too_wide.is_empty(), "{}", too_wide.join("\n"));
}
