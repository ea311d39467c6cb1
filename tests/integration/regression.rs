//! Regression tests, each named after what it guards. The data files under
//! `tests/data/regression/` were found by the property tests (random,
//! invented data) and are kept as they were found.

use crate::util::{fit_text, repo, settings};
use assert_cmd::Command;
use pondus::effect::Measure;
use pondus::model::design::ModeratorSpec;
use pondus::model::tau2::Tau2Method;
use pondus::model::Inference;

/// The ML likelihood of this data set has a local maximum at τ² = 0 and a
/// higher one at τ² ≈ 0.0091445 (ℓ ≈ −16.4275; both checked independently
/// by a plain-Python evaluation of the likelihood on a fine grid), with a
/// dip near 1e-3 in between: the scan must look below its first point.
#[test]
fn ml_finds_a_second_maximum_close_to_zero() {
    let csv = std::fs::read_to_string(repo(
        "tests/data/regression/ml-second-maximum-near-zero.csv",
    ))
    .unwrap();
    let mut s = settings(
        Measure::Effect,
        &["x1", "x2", "g"],
        Tau2Method::Ml,
        Inference::Z,
    );
    s.moderators[2] = ModeratorSpec {
        name: "g".into(),
        categorical: true,
        reference: None,
        center: false,
    };
    let r = fit_text(&s, &csv);
    assert!(
        (r.tau2.estimate - 0.009_144_5).abs() < 1e-6,
        "τ² = {}",
        r.tau2.estimate
    );
    let ll = r.model.log_likelihood.unwrap();
    assert!((ll - -16.4275).abs() < 1e-4, "ℓ = {ll}");
}

#[test]
fn identical_effects_under_knapp_hartung_give_an_error_not_a_panic() {
    for effects in [[0.0, 0.0, 0.0], [0.5, 0.5, 0.5]] {
        let csv = format!(
            "study,effect,variance\nA,{},0.01\nB,{},0.02\nC,{},0.03\n",
            effects[0], effects[1], effects[2]
        );
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("same.csv");
        std::fs::write(&path, csv).unwrap();
        let out = Command::cargo_bin("pondus")
            .unwrap()
            .arg("fit")
            .arg(&path)
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{stderr}");
        assert!(
            stderr.contains("--inference z") && !stderr.contains("panicked"),
            "{stderr}"
        );
        let ok = Command::cargo_bin("pondus")
            .unwrap()
            .args(["fit", "--inference", "z", "--json", "-"])
            .arg(&path)
            .output()
            .unwrap();
        assert_eq!(ok.status.code(), Some(0));
        let j: serde_json::Value = serde_json::from_slice(&ok.stdout).unwrap();
        assert_eq!(j["tau2"]["estimate"].as_f64(), Some(0.0));
        assert!((j["average"]["estimate"].as_f64().unwrap() - effects[0]).abs() < 1e-15);
    }
}

/// A study that alone carries a coefficient (the only one in its level) has
/// a residual of variance 0: no standardised residual, even when another
/// moderator has a large offset (computed on the standardised design).
#[test]
fn a_study_alone_in_its_level_has_no_standardised_residual() {
    let mut csv = String::from("study,effect,variance,year,g\n");
    let rows = [
        (0.1, 0.02, "a"),
        (0.3, 0.03, "a"),
        (0.2, 0.01, "a"),
        (0.5, 0.04, "b"),
        (0.4, 0.02, "a"),
        (0.25, 0.03, "a"),
    ];
    for (i, (y, v, g)) in rows.iter().enumerate() {
        csv.push_str(&format!("s{i},{y},{v},{},{g}\n", 1990.0 + 3.7 * i as f64));
    }
    let r = fit_text(
        &settings(
            Measure::Effect,
            &["year", "g"],
            Tau2Method::Reml,
            Inference::Kh,
        ),
        &csv,
    );
    let lone = r.studies.iter().find(|s| s.study == "s3").unwrap();
    assert_eq!(lone.std_residual, None);
    assert!(r
        .studies
        .iter()
        .filter(|s| s.study != "s3")
        .all(|s| s.std_residual.is_some()));
}

/// Guards against an emptied or edited README (it once lost its content in
/// a faulty edit while every other check stayed green): the two set-up
/// commands are there, and the test command is the one `.ci/run` calls.
#[test]
fn readme_keeps_its_two_set_up_commands() {
    let readme = std::fs::read_to_string(repo("README.md")).unwrap();
    let ci = std::fs::read_to_string(repo(".ci/run")).unwrap();
    let demo = "cargo run --release -- fit data-examples/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode";
    let setup = &readme[readme.find("## Set up").expect("a set-up section")..];
    let setup = &setup[..setup.find("\n## Usage").expect("usage after set-up")];
    let blocks: Vec<&str> = setup
        .split("```sh\n")
        .skip(1)
        .map(|b| b.split("```").next().unwrap().trim())
        .collect();
    assert_eq!(blocks, [demo, "cargo test"], "README set-up commands");
    assert!(
        ci.lines().any(|l| l.trim() == "cargo test"),
        ".ci/run runs the README's test command"
    );
    assert!(
        repo("data-examples/consortium-correlations.csv").exists(),
        "the demo data are bundled"
    );
}

fn fit_bin(csv: &str, args: &[&str]) -> (Option<i32>, String, String) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("data.csv");
    std::fs::write(&path, csv).unwrap();
    let o = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .arg(&path)
        .args(args)
        .output()
        .unwrap();
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

/// Moderator values near 1e-300 were called "collinear" (their squares
/// underflow in the rank check); now the rank check is scale-free and the
/// user is asked to rescale, since the coefficient's variance (∝ 1/spread²)
/// cannot be represented.
#[test]
fn tiny_moderator_values_ask_for_rescaling_not_collinearity() {
    let csv = "study,effect,variance,m\na,0.1,0.01,1e-300\nb,0.3,0.02,2e-300\nc,0.2,0.01,3e-300\nd,0.25,0.01,4e-300\n";
    let (code, _, err) = fit_bin(csv, &["--moderator", "m"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("moderator 'm'") && err.contains("other units"),
        "{err}"
    );
    assert!(!err.contains("collinear"), "{err}");
    let huge = csv.replace("e-300", "e300");
    let (code, _, err) = fit_bin(&huge, &["--moderator", "m"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("other units"), "{err}");
}

/// A moderator that is small but well inside floating point (1e-8 units)
/// gives the same test as the same moderator in units of 1: the rank check
/// and the internal standardisation do not depend on the scale.
#[test]
fn moderator_scale_does_not_change_the_test() {
    let base = "study,effect,variance,m\na,0.1,0.01,1\nb,0.3,0.02,2\nc,0.2,0.01,3\nd,0.25,0.01,4\ne,0.4,0.03,5\n";
    let small = base
        .lines()
        .enumerate()
        .map(|(i, l)| {
            if i == 0 {
                l.to_string()
            } else {
                let (head, m) = l.rsplit_once(',').unwrap();
                format!("{head},{m}e-8")
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    let json = |csv: &str| {
        let (code, out, err) = fit_bin(csv, &["--moderator", "m", "--json", "-"]);
        assert_eq!(code, Some(0), "{err}");
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        v["moderator_test"]["p"].as_f64().unwrap()
    };
    let (a, b) = (json(base), json(&small));
    assert!((a - b).abs() <= 1e-9 * a.abs(), "{a} vs {b}");
}

/// `--col effect=a --col effect=b` used to keep the last silently.
#[test]
fn a_role_given_twice_in_col_is_refused() {
    let csv = "study,effect,variance,m\na,0.1,0.01,1\nb,0.3,0.02,2\n";
    let (code, _, err) = fit_bin(csv, &["--col", "effect=variance", "--col", "effect=m"]);
    assert_eq!(code, Some(2));
    assert!(
        err.contains("--col") && err.contains("given twice"),
        "{err}"
    );
}

/// Correlations of ±0.999999 from 100,000 people and one from 10¹² people:
/// Fisher's z = atanh(r) and its variance 1/(n − 3) stay finite and exact
/// (checked against the closed form), and the fit reports finite numbers.
#[test]
fn extreme_correlations_and_huge_n_stay_finite() {
    let csv = "study,r,n\na,0.999999,100000\nb,-0.999999,100000\nc,0.5,1000000000000\nd,0.3,50\n";
    let (code, out, err) = fit_bin(csv, &["--measure", "r", "--inference", "z", "--json", "-"]);
    assert_eq!(code, Some(0), "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let studies = v["studies"].as_array().unwrap();
    let expect = [
        (0.999999f64.atanh(), 1.0 / 99_997.0),
        ((-0.999999f64).atanh(), 1.0 / 99_997.0),
        (0.5f64.atanh(), 1.0 / (1e12 - 3.0)),
        (0.3f64.atanh(), 1.0 / 47.0),
    ];
    for (s, (z, var)) in studies.iter().zip(expect) {
        let (e, vv) = (
            s["effect"].as_f64().unwrap(),
            s["variance"].as_f64().unwrap(),
        );
        assert!((e - z).abs() <= 1e-12 * z.abs(), "{e} vs {z}");
        assert!((vv - var).abs() <= 1e-12 * var, "{vv} vs {var}");
    }
    for key in ["estimate", "se", "ci_low", "ci_high", "pi_low", "pi_high"] {
        assert!(v["average"][key].as_f64().unwrap().is_finite(), "{key}");
    }
    assert!(v["tau2"]["estimate"].as_f64().unwrap().is_finite());
}

/// Runs `pondus` with `args` in a scratch folder holding copies of the
/// named `data-examples/` files; returns the exit code, standard error and
/// the names of the files in the folder afterwards (sorted).
fn run_in_scratch(inputs: &[&str], args: &[&str]) -> (Option<i32>, String, Vec<String>) {
    let dir = tempfile::tempdir().unwrap();
    for name in inputs {
        std::fs::copy(
            repo(&format!("data-examples/{name}")),
            dir.path().join(name),
        )
        .unwrap();
    }
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .current_dir(dir.path())
        .args(args)
        .output()
        .unwrap();
    let mut files: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    files.sort();
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
        files,
    )
}

/// `fit` wrote `--json` before it drew the report's plots; a `--sort` that
/// names no moderator fails only there, so the run exited 2 and left
/// `out.json` behind. Every output is now rendered before any is written.
#[test]
fn fit_with_a_failing_report_leaves_no_json_behind() {
    let (code, err, files) = run_in_scratch(
        &["precomputed-effects.csv"],
        &[
            "fit",
            "precomputed-effects.csv",
            "--measure",
            "effect",
            "--json",
            "out.json",
            "--report",
            "r.html",
            "--sort",
            "nosuchmod",
        ],
    );
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("--sort") && err.contains("nosuchmod"), "{err}");
    assert_eq!(files, ["precomputed-effects.csv"], "{err}");
}

/// `sites` wrote the effects file (`--out`) before the JSON; when the JSON
/// could not be written (its folder does not exist) the run failed and left
/// `effects.csv` behind. Now no file is renamed into place until every
/// output has been written completely.
#[test]
fn sites_with_an_unwritable_json_leaves_no_effects_file_behind() {
    let (code, err, files) = run_in_scratch(
        &["choir-participants.csv"],
        &[
            "sites",
            "choir-participants.csv",
            "--site",
            "choir",
            "--x",
            "rehearsal_hours",
            "--y",
            "breath_hold_s",
            "--out",
            "effects.csv",
            "--json",
            "no-such-folder/sites.json",
        ],
    );
    assert_eq!(code, Some(1), "{err}");
    assert!(err.contains("no-such-folder/sites.json"), "{err}");
    assert_eq!(files, ["choir-participants.csv"], "{err}");
}

/// The refusal of `--loo` with too few studies had a run of 22 spaces in
/// the middle of its sentence (a line break inside the string without a
/// continuation backslash).
#[test]
fn loo_with_too_few_studies_message_has_no_run_of_spaces() {
    let csv = "study,effect,variance,m\na,0.1,0.01,1\nb,0.3,0.02,2\nc,0.2,0.01,3\n";
    let (code, _, err) = fit_bin(csv, &["--moderator", "m", "--loo"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("leaving a study out of 3 studies"), "{err}");
    assert!(
        err.contains("2 coefficients; at least 4 studies are needed"),
        "{err}"
    );
    assert!(!err.contains("  "), "{err}");
}

// ---- Output paths: what is at the path is respected --------------------
//
// Every path below is inside a fresh temporary folder: a FIFO made there
// with `mkfifo`, a link there to a file there, a file there with mode 600.

/// A scratch folder holding a copy of `precomputed-effects.csv`.
fn scratch_with_effects() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    std::fs::copy(
        repo("data-examples/precomputed-effects.csv"),
        dir.path().join("precomputed-effects.csv"),
    )
    .unwrap();
    dir
}

/// `pondus fit precomputed-effects.csv -q ARGS` to run in `dir`.
fn fit_in(dir: &std::path::Path, args: &[&str]) -> std::process::Command {
    let mut c = std::process::Command::new(assert_cmd::cargo::cargo_bin("pondus"));
    c.current_dir(dir)
        .args([
            "fit",
            "precomputed-effects.csv",
            "--measure",
            "effect",
            "-q",
        ])
        .args(args)
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped());
    c
}

/// Waits at most `secs` seconds for `child`; `None` when it is still running.
fn wait_for(child: &mut std::process::Child, secs: u64) -> Option<std::process::ExitStatus> {
    let end = std::time::Instant::now() + std::time::Duration::from_secs(secs);
    while std::time::Instant::now() < end {
        if let Some(status) = child.try_wait().unwrap() {
            return Some(status);
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    None
}

/// Makes a FIFO at `path` (inside a test's temporary folder).
fn mkfifo(path: &std::path::Path) {
    let ok = std::process::Command::new("mkfifo")
        .arg(path)
        .status()
        .unwrap()
        .success();
    assert!(ok, "mkfifo {}", path.display());
}

/// The names in a folder, sorted.
fn names_in(dir: &std::path::Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

/// `--json` naming a FIFO renamed a regular file over it: the FIFO was
/// gone and its reader waited for ever. A special file is now written
/// directly and stays what it was.
#[test]
fn fit_json_into_a_fifo_writes_through_it_and_keeps_the_fifo() {
    use std::os::unix::fs::FileTypeExt;
    let dir = scratch_with_effects();
    let fifo = dir.path().join("pipe.json");
    mkfifo(&fifo);
    let mut reader = std::process::Command::new("cat")
        .arg(&fifo)
        .stdout(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let mut writer = fit_in(dir.path(), &["--json", "pipe.json"])
        .spawn()
        .unwrap();
    let wrote = wait_for(&mut writer, 120);
    let read = wait_for(&mut reader, if wrote.is_some() { 30 } else { 1 });
    if wrote.is_none() || read.is_none() {
        let _ = writer.kill();
        let _ = reader.kill();
        let _ = writer.wait();
        let _ = reader.wait();
    }
    assert!(read.is_some(), "the reader of the FIFO got no end of file");
    assert_eq!(wrote.map(|s| s.code()), Some(Some(0)), "pondus failed");
    let mut json = String::new();
    std::io::Read::read_to_string(&mut reader.stdout.take().unwrap(), &mut json).unwrap();
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    assert!(v["tau2"]["estimate"].as_f64().is_some(), "{json}");
    let kind = std::fs::symlink_metadata(&fifo).unwrap().file_type();
    assert!(kind.is_fifo(), "the FIFO was replaced: {kind:?}");
    assert_eq!(
        names_in(dir.path()),
        ["pipe.json", "precomputed-effects.csv"]
    );
}

/// `--json /dev/full` replaced the device with a regular file and exited
/// 0. A device is now written directly and its error (ENOSPC) is a
/// failure that names the flag. The device here is a private node made
/// with `mknod` inside a temporary folder (the same device numbers as
/// `/dev/full`, 1:7), so the machine's own `/dev/full` is never touched;
/// where making a node is not allowed (not root), the test says so and
/// checks nothing.
#[test]
fn fit_json_into_a_full_device_fails_and_keeps_the_device() {
    use std::os::unix::fs::FileTypeExt;
    let dir = scratch_with_effects();
    let full = dir.path().join("full.json");
    let made = std::process::Command::new("mknod")
        .arg(&full)
        .args(["c", "1", "7"])
        .status()
        .is_ok_and(|s| s.success());
    if !made {
        eprintln!("mknod is not allowed here: the ENOSPC check did not run");
        return;
    }
    let out = fit_in(dir.path(), &["--json", "full.json", "--table", "t.csv"])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(err.contains("--json") && err.contains("full.json"), "{err}");
    assert!(err.contains("No space left on device"), "{err}");
    let kind = std::fs::symlink_metadata(&full).unwrap().file_type();
    assert!(kind.is_char_device(), "the device was replaced: {kind:?}");
    // All or nothing: the table waiting beside it was not put in place.
    assert_eq!(
        names_in(dir.path()),
        ["full.json", "precomputed-effects.csv"]
    );
}

/// `--json` naming a symbolic link replaced the link with a regular file
/// and left the file it pointed to as it was. The link is now followed:
/// its target gets the output (written and renamed in the target's
/// folder) and the link stays a link.
#[test]
fn fit_json_through_a_symlink_writes_its_target_and_keeps_the_link() {
    let dir = scratch_with_effects();
    std::fs::create_dir(dir.path().join("store")).unwrap();
    let real = dir.path().join("store").join("real.json");
    std::fs::write(&real, "old").unwrap();
    let link = dir.path().join("link.json");
    std::os::unix::fs::symlink("store/real.json", &link).unwrap();
    let out = fit_in(dir.path(), &["--json", "link.json"])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(std::fs::symlink_metadata(&link)
        .unwrap()
        .file_type()
        .is_symlink());
    assert_eq!(
        std::fs::read_link(&link).unwrap(),
        std::path::Path::new("store/real.json")
    );
    let json = std::fs::read_to_string(&real).unwrap();
    assert!(json.contains("\"tau2\""), "{json}");
    assert_eq!(names_in(&dir.path().join("store")), ["real.json"]);
}

/// Replacing an existing output gave it the permission bits of a new file
/// (0644 under the usual umask): a mode-600 result became readable by
/// everyone. The replacement now keeps the mode, and the owner where the
/// process may set it (as root).
#[test]
fn fit_json_over_a_mode_600_file_keeps_mode_600() {
    use std::os::unix::fs::{MetadataExt, PermissionsExt};
    let dir = scratch_with_effects();
    let out_path = dir.path().join("out.json");
    std::fs::write(&out_path, "old").unwrap();
    std::fs::set_permissions(&out_path, std::fs::Permissions::from_mode(0o600)).unwrap();
    let root = std::fs::metadata(&out_path).unwrap().uid() == 0;
    if root {
        std::os::unix::fs::chown(&out_path, Some(4242), Some(4343)).unwrap();
    }
    let out = fit_in(dir.path(), &["--json", "out.json"])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let m = std::fs::metadata(&out_path).unwrap();
    assert!(std::fs::read_to_string(&out_path)
        .unwrap()
        .contains("\"tau2\""));
    assert_eq!(m.mode() & 0o7777, 0o600, "mode {:o}", m.mode() & 0o7777);
    if root {
        assert_eq!((m.uid(), m.gid()), (4242, 4343));
    }
}

/// `--json x.json --table ./x.json` (x.json not existing yet) passed the
/// check, which compared the two paths as text; the table was written over
/// the JSON. Paths are now compared normalised.
#[test]
fn fit_json_and_table_on_one_file_by_two_spellings_is_refused() {
    for second in ["./x.json", "sub/../x.json"] {
        let dir = scratch_with_effects();
        std::fs::create_dir(dir.path().join("sub")).unwrap();
        let out = fit_in(dir.path(), &["--json", "x.json", "--table", second])
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{second}: {err}");
        assert!(err.contains("--json") && err.contains("--table"), "{err}");
        assert_eq!(names_in(dir.path()), ["precomputed-effects.csv", "sub"]);
    }
}

/// An output whose folder does not exist failed with the path alone
/// ("writing failed: No such file or directory"); the message now names
/// the flag and says that the folder is missing, and no other output is
/// moved into place.
#[test]
fn an_output_into_a_missing_folder_names_the_flag_and_the_folder() {
    let dir = scratch_with_effects();
    let out = fit_in(
        dir.path(),
        &["--json", "out.json", "--table", "no-such-folder/t.csv"],
    )
    .output()
    .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(
        err.starts_with("pondus: error: --table: no-such-folder/t.csv: writing failed"),
        "{err}"
    );
    assert!(
        err.contains("the folder 'no-such-folder' is missing"),
        "{err}"
    );
    assert_eq!(names_in(dir.path()), ["precomputed-effects.csv"]);
}

/// SIGINT or SIGTERM while the outputs were being written left the
/// temporary files (`.NAME.pondus-PID.tmp`) behind. The output step now
/// removes them and exits with 130 or 143. The run is held in the output
/// step by a FIFO without a reader: `--table` is already staged in its
/// temporary file while `--json` waits to open the FIFO.
#[test]
fn an_interrupt_while_writing_removes_the_temporary_files() {
    for (signal, code) in [("TERM", 143), ("INT", 130)] {
        let dir = scratch_with_effects();
        mkfifo(&dir.path().join("pipe.json"));
        let mut child = fit_in(dir.path(), &["--json", "pipe.json", "--table", "t.csv"])
            .spawn()
            .unwrap();
        let end = std::time::Instant::now() + std::time::Duration::from_secs(120);
        let mut staged = false;
        while !staged && std::time::Instant::now() < end && child.try_wait().unwrap().is_none() {
            staged = names_in(dir.path()).iter().any(|n| n.contains(".pondus-"));
            std::thread::sleep(std::time::Duration::from_millis(20));
        }
        if staged {
            let sent = std::process::Command::new("kill")
                .arg(format!("-{signal}"))
                .arg(child.id().to_string())
                .status()
                .unwrap();
            assert!(sent.success());
        }
        let status = wait_for(&mut child, 30);
        if status.is_none() {
            let _ = child.kill();
            let _ = child.wait();
        }
        assert!(
            staged,
            "SIG{signal}: no temporary file was seen ({status:?})"
        );
        assert_eq!(status.and_then(|s| s.code()), Some(code), "SIG{signal}");
        assert_eq!(
            names_in(dir.path()),
            ["pipe.json", "precomputed-effects.csv"],
            "SIG{signal}"
        );
    }
}

/// Ten studies with two numeric moderators, one of them named with a ':'.
const DOSE_CSV: &str = "study,effect,variance,age,dose:mg\n\
                        a,0.50,0.010,20,5\nb,0.87,0.012,23,11\nc,0.95,0.014,26,22\n\
                        d,1.90,0.016,29,40\ne,0.62,0.018,32,6\nf,1.10,0.010,35,10\n\
                        g,1.85,0.012,38,21\nh,3.05,0.014,41,42\ni,0.80,0.016,44,7\n\
                        j,1.75,0.018,47,12\n";

/// The words of a region of significance were chosen by reading the
/// quantity's name: one containing ':' was taken for a level difference,
/// so the slope of a numeric moderator named `dose:mg` was called "the
/// difference dose:mg". The region now carries the kind of its quantity.
#[test]
fn a_numeric_moderator_named_with_a_colon_has_a_slope_region() {
    let csv = DOSE_CSV;
    let args = [
        "--moderator",
        "age",
        "--moderator",
        "dose:mg",
        "--interaction",
        "age,dose:mg",
        "--regions",
    ];
    let (code, out, err) = fit_bin(csv, &args);
    assert_eq!(code, Some(0), "{err}");
    let text = out.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(text.contains("slope of dose:mg along age:"), "{out}");
    assert!(
        text.contains("confidence interval of the slope of dose:mg excludes 0"),
        "{out}"
    );
    assert!(!text.contains("difference dose:mg"), "{out}");

    let (code, json, err) = fit_bin(csv, &[&args[..], &["--json", "-"]].concat());
    assert_eq!(code, Some(0), "{err}");
    let j: serde_json::Value = serde_json::from_str(&json).unwrap();
    let regions = j["regions_of_significance"].as_array().unwrap();
    let kinds: Vec<(&str, &str, &str)> = regions
        .iter()
        .map(|r| {
            (
                r["moderator"].as_str().unwrap(),
                r["quantity"].as_str().unwrap(),
                r["quantity_kind"].as_str().unwrap(),
            )
        })
        .collect();
    assert_eq!(
        kinds,
        [
            ("age", "effect", "mean_effect"),
            ("age", "dose:mg", "slope"),
            ("dose:mg", "effect", "mean_effect"),
            ("dose:mg", "age", "slope"),
        ]
    );
    assert!(
        regions[1]["words"]
            .as_str()
            .unwrap()
            .contains("of the slope of dose:mg excludes 0"),
        "{json}"
    );
}

/// The simple slopes of `--probe` had the same defect as the regions: the
/// slope of `dose:mg` was printed as "difference dose:mg". A simple slope
/// now carries the kind of its quantity too.
#[test]
fn a_numeric_moderator_named_with_a_colon_has_simple_slopes() {
    let args = [
        "--moderator",
        "age",
        "--moderator",
        "dose:mg",
        "--interaction",
        "age,dose:mg",
        "--probe",
        "age",
    ];
    let (code, out, err) = fit_bin(DOSE_CSV, &args);
    assert_eq!(code, Some(0), "{err}");
    let text = out.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        text.contains("slope of dose:mg (per unit) at age ="),
        "{out}"
    );
    assert!(!text.contains("difference dose:mg"), "{out}");

    let (code, json, err) = fit_bin(DOSE_CSV, &[&args[..], &["--json", "-"]].concat());
    assert_eq!(code, Some(0), "{err}");
    let j: serde_json::Value = serde_json::from_str(&json).unwrap();
    let slopes = j["simple_slopes"].as_array().unwrap();
    assert_eq!(slopes.len(), 3, "{json}");
    for s in slopes {
        assert_eq!(s["of"], "dose:mg", "{s}");
        assert_eq!(s["quantity_kind"], "slope", "{s}");
    }
}
