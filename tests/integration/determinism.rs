//! Determinism: the same input and options give byte-identical JSON
//! whatever the number of threads. The data set is large enough (k above
//! the parallel threshold of `src/model/wls.rs`) that the per-study sums
//! run in parallel chunks.

use assert_cmd::Command;

/// A seeded table of `k` studies with one numeric and one categorical
/// moderator (a small linear congruential generator, fixed seed; the
/// numbers are arbitrary, for this test only).
fn table(k: usize) -> String {
    let mut next = crate::util::uniform_draws(0x9E37_79B9_7F4A_7C15);
    let mut s = String::from("study,effect,variance,dose,arm\n");
    for i in 0..k {
        let dose = 10.0 * next();
        let v = 0.01 + 0.2 * next();
        let e = 0.1 + 0.03 * dose + (next() - 0.5) * 0.8;
        let arm = ["a", "b", "c"][i % 3];
        s.push_str(&format!("s{i},{e:.6},{v:.6},{dose:.4},{arm}\n"));
    }
    s
}

fn json_with_threads(csv: &std::path::Path, threads: &str, extra: &[&str]) -> Vec<u8> {
    let o = Command::cargo_bin("pondus")
        .unwrap()
        .env("RAYON_NUM_THREADS", threads)
        .arg("fit")
        .arg(csv)
        .args(["--moderator", "dose", "--moderator", "arm", "--json", "-"])
        .args(extra)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    o.stdout
}

#[test]
fn fit_json_is_byte_identical_with_one_and_two_threads() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("large.csv");
    // Above the 65,536-row threshold at which the sums run in parallel.
    std::fs::write(&csv, table(70_000)).unwrap();
    for extra in [&[][..], &["--tau2", "dl", "--inference", "z"][..]] {
        let one = json_with_threads(&csv, "1", extra);
        let two = json_with_threads(&csv, "2", extra);
        let four = json_with_threads(&csv, "4", extra);
        assert!(!one.is_empty());
        assert!(
            one == two,
            "JSON differs between 1 and 2 threads ({extra:?})"
        );
        assert!(
            one == four,
            "JSON differs between 1 and 4 threads ({extra:?})"
        );
    }
}

/// Issue 20: without per-study records (`Detail::Summary`, what the command
/// line asks for when it writes nothing) the report is the full one with
/// its `studies` left empty: every other number, message and excluded row
/// is the same.
#[test]
fn a_report_without_per_study_records_differs_only_there() {
    use pondus::fit::{run_with_detail, Detail};
    use pondus::model::{tau2::Tau2Method, Inference};
    let mut csv = table(300);
    csv.push_str("s-missing,,0.1,1.0,a\n");
    let s = crate::util::settings(
        pondus::effect::Measure::Effect,
        &["dose", "arm"],
        Tau2Method::Reml,
        Inference::Kh,
    );
    let mut s = s;
    s.moderators[1].categorical = true;
    let run = |d| run_with_detail(&s, "t.csv", csv.as_bytes(), &|_| {}, d).unwrap();
    let mut full = run(Detail::Full);
    let summary = run(Detail::Summary);
    assert_eq!(full.studies.len(), 300);
    assert!(summary.studies.is_empty());
    assert_eq!(summary.excluded.len(), 1);
    full.studies = pondus::result::StudyList::new();
    assert_eq!(
        serde_json::to_string(&full).unwrap(),
        serde_json::to_string(&summary).unwrap()
    );
}

/// A PNG is drawn in strips on all threads (`src/render/figure/export.rs`):
/// the same bytes with 1, 2 and 3 threads, for a picture of several strips
/// (300 studies at 300 dpi: about 3,125 × 15,000 pixels, 6 strips).
#[test]
fn png_is_byte_identical_whatever_the_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("t.csv");
    std::fs::write(&csv, table(300)).unwrap();
    let png = |threads: &str| {
        let out = dir.path().join(format!("forest-{threads}.png"));
        let o = Command::cargo_bin("pondus")
            .unwrap()
            .env("RAYON_NUM_THREADS", threads)
            .arg("fit")
            .arg(&csv)
            .args(["--moderator", "dose", "--dpi", "300", "-q", "--forest"])
            .arg(&out)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        std::fs::read(&out).unwrap()
    };
    let one = png("1");
    let height = u32::from_be_bytes(one[20..24].try_into().unwrap());
    assert!(
        u64::from(height) * 3125 > 3 * 8_000_000,
        "several strips: {height} rows"
    );
    assert_eq!(one, png("2"));
    assert_eq!(one, png("3"));
}

/// `pondus sites` reads a CSV file in pieces of 1 MiB on all threads and
/// merges the pieces' per-site moments and HC3 sums in file order: the JSON
/// is byte-identical with 1, 2 and 4 threads, and within 1e-10 of the same
/// rows read as one stream from standard input (the pieces' moments are
/// merged by Chan et al.'s exact formulas, so only the rounding differs).
/// About 3.4 MB of seeded invented rows (4 pieces), with a few missing
/// values and blank lines.
#[test]
fn sites_json_is_byte_identical_whatever_the_thread_count() {
    let mut next = crate::util::uniform_draws(0x2545_F491_4F6C_DD1D);
    let mut text = String::from("site,x,w,y\n");
    for i in 0..120_000u64 {
        let site = (i * 7919) % 37;
        let (x, w) = (10.0 * next(), 5.0 * next());
        let y =
            1.0 + 0.3 * x + 0.2 * w + 0.05 * x * w + (next() - 0.5) * (1.0 + site as f64 / 10.0);
        if i % 9973 == 5 {
            text.push_str(&format!("s{site},{x:.5},NA,{y:.5}\n\n"));
        } else {
            text.push_str(&format!("s{site},{x:.5},{w:.4},{y:.6}\n"));
        }
    }
    assert!(text.len() > 3 << 20, "{} bytes", text.len());
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("rows.csv");
    std::fs::write(&csv, &text).unwrap();
    let base = [
        "sites", "--site", "site", "--x", "x", "--y", "y", "--w", "w", "--json", "-", "-q",
    ];
    let run = |threads: &str, extra: &[&str]| {
        let o = Command::cargo_bin("pondus")
            .unwrap()
            .env("RAYON_NUM_THREADS", threads)
            .args(base)
            .arg(&csv)
            .args(extra)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        o.stdout
    };
    // With --robust the second pass (HC3 sums) is read in pieces too.
    let one = run("1", &["--robust"]);
    assert_eq!(
        one,
        run("2", &["--robust"]),
        "JSON differs between 1 and 2 threads"
    );
    assert_eq!(
        one,
        run("4", &["--robust"]),
        "JSON differs between 1 and 4 threads"
    );
    let one = run("1", &[]);
    assert_eq!(one, run("2", &[]), "JSON differs between 1 and 2 threads");
    let o = Command::cargo_bin("pondus")
        .unwrap()
        .args(base)
        .arg("-")
        .write_stdin(text.clone())
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let a: serde_json::Value = serde_json::from_slice(&one).unwrap();
    let b: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(a["input"]["rows"], 120_000);
    assert_eq!(a["input"]["missing_rows"], b["input"]["missing_rows"]);
    let (sa, sb) = (
        a["sites"].as_array().unwrap(),
        b["sites"].as_array().unwrap(),
    );
    assert_eq!(sa.len(), 37);
    assert_eq!(sa.len(), sb.len());
    for (p, q) in sa.iter().zip(sb) {
        assert_eq!(p["study"], q["study"]);
        assert_eq!(p["n"], q["n"]);
        for key in ["slope", "se", "interaction", "interaction_se"] {
            let (x, y) = (p[key].as_f64().unwrap(), q[key].as_f64().unwrap());
            assert!((x - y).abs() <= 1e-10 * y.abs(), "{key}: {x} vs {y}");
        }
    }
}
