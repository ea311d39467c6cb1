//! `pondus sites` and `pondus sql`: per-site OLS and HC3 against statsmodels,
//! the large-offset stability check, the effects file as `pondus fit` input,
//! the join, and bad input.

use crate::util::{close, repo};
use assert_cmd::Command;
use pondus::sites::{from_rows, RowInput, SitesSettings};
use pondus::tolerance::{LARGE_OFFSET_REL, REFERENCE_ABS, REFERENCE_REL};
use predicates::str::contains;
use std::collections::HashMap;
use std::path::Path;
use tempfile::TempDir;

fn pondus() -> Command {
    Command::cargo_bin("pondus").expect("the pondus binary is built")
}

/// Reads a fixture CSV into rows of (study → column → value).
fn expected(path: &str) -> HashMap<String, HashMap<String, f64>> {
    let mut r = csv::Reader::from_path(repo(path)).expect("fixture present");
    let headers = r.headers().unwrap().clone();
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            let vals = headers
                .iter()
                .zip(rec.iter())
                .skip(1)
                .map(|(h, v)| (h.to_string(), v.parse::<f64>().unwrap()))
                .collect();
            (rec[0].to_string(), vals)
        })
        .collect()
}

fn settings(w: bool, covariates: &[&str], robust: bool) -> SitesSettings {
    SitesSettings {
        site: "site".into(),
        x: "x".into(),
        y: "y".into(),
        w: w.then(|| "w".into()),
        covariates: covariates.iter().map(|c| c.to_string()).collect(),
        robust,
        center_within: false,
        decimal: None,
        effect: Default::default(),
        treat: None,
        event: None,
    }
}

/// Reference: statsmodels 0.14.6 OLS (classical and cov_type='HC3') in
/// tests/reference/sites.py, on the generated rows of
/// tests/data/reference/sites/raw.csv (7 sites, heteroskedastic errors,
/// one covariate, a participant-level moderator, rows shuffled).
#[test]
fn per_site_ols_and_hc3_match_statsmodels() {
    let want = expected("tests/data/reference/sites/expected.csv");
    let raw = repo("tests/data/reference/sites/raw.csv");
    for robust in [false, true] {
        for center in [false, true] {
            let mut s = settings(true, &["c"], robust);
            s.center_within = center;
            let r = from_rows("raw.csv", RowInput::File(&raw), &s).unwrap();
            assert_eq!(r.sites.len(), want.len());
            assert!(r.excluded.is_empty());
            for site in &r.sites {
                let e = &want[&site.study];
                let (se, ise) = if robust {
                    ("se_hc3", "interaction_se_hc3")
                } else {
                    ("se", "interaction_se")
                };
                let tag = |what: &str| {
                    format!("{} {what} (robust {robust}, centred {center})", site.study)
                };
                assert_eq!(site.n as f64, e["n"]);
                close(
                    &tag("slope"),
                    site.slope,
                    e["slope"],
                    REFERENCE_REL,
                    REFERENCE_ABS,
                );
                close(&tag(se), site.se, e[se], REFERENCE_REL, REFERENCE_ABS);
                close(&tag("r"), site.r, e["r"], REFERENCE_REL, REFERENCE_ABS);
                close(
                    &tag("b3"),
                    site.interaction.unwrap(),
                    e["interaction"],
                    REFERENCE_REL,
                    REFERENCE_ABS,
                );
                close(
                    &tag(ise),
                    site.interaction_se.unwrap(),
                    e[ise],
                    REFERENCE_REL,
                    REFERENCE_ABS,
                );
                close(
                    &tag("mean_x"),
                    site.mean_x,
                    e["mean_x"],
                    REFERENCE_REL,
                    REFERENCE_ABS,
                );
                close(
                    &tag("mean_w"),
                    site.mean_w.unwrap(),
                    e["mean_w"],
                    REFERENCE_REL,
                    REFERENCE_ABS,
                );
            }
        }
    }
}

/// x and y around 1e9, varying by a few units (tests/reference/sites.py,
/// reference from statsmodels on the exactly shifted values). The naive
/// one-pass formula Sxy = Σxy − ΣxΣy/n works with sums near 1e21 whose
/// last-place unit is about 1.3e5, larger than the co-moments themselves:
/// it is computed here too and shown to fail, while the Welford co-moments
/// keep about 1e-7 relative accuracy.
#[test]
fn large_offset_slopes_stay_accurate_where_naive_sums_fail() {
    let want = expected("tests/data/reference/sites/offset_expected.csv");
    let path = repo("tests/data/reference/sites/offset_raw.csv");
    for robust in [false, true] {
        let r = from_rows(
            "offset_raw.csv",
            RowInput::File(&path),
            &settings(false, &[], robust),
        )
        .unwrap();
        for site in &r.sites {
            let e = &want[&site.study];
            let se = if robust { "se_hc3" } else { "se" };
            close(
                &format!("{} slope", site.study),
                site.slope,
                e["slope"],
                LARGE_OFFSET_REL,
                0.0,
            );
            close(
                &format!("{} {se}", site.study),
                site.se,
                e[se],
                LARGE_OFFSET_REL,
                0.0,
            );
            close(
                &format!("{} r", site.study),
                site.r,
                e["r"],
                LARGE_OFFSET_REL,
                0.0,
            );
        }
    }
    // The naive raw-sums slope on the same rows.
    let mut rd = csv::Reader::from_path(&path).unwrap();
    let mut sums: HashMap<String, [f64; 5]> = HashMap::new();
    for rec in rd.records() {
        let rec = rec.unwrap();
        let (x, y): (f64, f64) = (rec[1].parse().unwrap(), rec[2].parse().unwrap());
        let s = sums.entry(rec[0].to_string()).or_default();
        *s = [s[0] + 1.0, s[1] + x, s[2] + y, s[3] + x * x, s[4] + x * y];
    }
    let mut worst: f64 = 0.0;
    for (site, [n, sx, sy, sxx, sxy]) in sums {
        let naive = (sxy - sx * sy / n) / (sxx - sx * sx / n);
        let truth = want[&site]["slope"];
        worst = worst.max(((naive - truth) / truth).abs());
    }
    assert!(
        worst >= 0.01,
        "the naive sums should be off by more than 1% here (worst relative error {worst})"
    );
}

fn choir_args(out: &Path) -> Vec<String> {
    [
        "sites",
        repo("data-examples/choir-participants.csv")
            .to_str()
            .unwrap(),
        "--site",
        "choir",
        "--x",
        "rehearsal_hours",
        "--y",
        "breath_hold_s",
        "--w",
        "age",
        "--covariate",
        "wind",
        "--info",
        repo("data-examples/choir-sites.csv").to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]
    .map(String::from)
    .to_vec()
}

#[test]
fn effects_file_feeds_pondus_fit_directly() {
    let dir = TempDir::new().unwrap();
    let out = dir.path().join("effects.csv");
    let o = pondus().args(choir_args(&out)).output().unwrap();
    assert!(o.status.success());
    // The report wraps at its width: compare with the line breaks undone.
    let said = String::from_utf8(o.stdout).unwrap();
    let said = said.split_whitespace().collect::<Vec<_>>().join(" ");
    for name in [
        "'Mirefield Choir'",
        "'Greyfriars Choir'",
        "'Hollowcombe Choir' (n = 2): too few rows",
    ] {
        assert!(said.contains(name), "{name}: {said}");
    }
    let text = std::fs::read_to_string(&out).unwrap();
    assert_eq!(
        text.lines().next().unwrap(),
        "study,n,slope,se,r,interaction,interaction_se,mean_x,mean_w,conductor_years,region"
    );
    assert_eq!(
        text.lines().count(),
        1 + 29,
        "29 estimated sites, none dropped by the join"
    );
    let json = |measure: &str| -> serde_json::Value {
        let o = pondus()
            .args([
                "fit",
                out.to_str().unwrap(),
                "--measure",
                measure,
                "--moderator",
                "conductor_years",
                "--json",
                "-",
            ])
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        serde_json::from_slice(&o.stdout).unwrap()
    };
    let slope = json("slope");
    assert_eq!(
        slope["k"], 28,
        "Mirefield has no conductor_years and is listed"
    );
    assert_eq!(slope["excluded"][0]["study"], "Mirefield Choir");
    let r = json("r");
    assert_eq!(r["k"], 28);
}

#[test]
fn fit_stage_reports_within_and_across_side_by_side() {
    let dir = TempDir::new().unwrap();
    let out = dir.path().join("effects.csv");
    let json = dir.path().join("sites.json");
    let mut args = choir_args(&out);
    args.extend(["--fit", "--moderator", "conductor_years", "--json"].map(String::from));
    args.push(json.to_str().unwrap().into());
    pondus()
        .args(&args)
        .assert()
        .success()
        .stdout(contains("Within-site moderation"))
        .stdout(contains("Across-site moderation"))
        .stdout(contains("ecological"))
        .stdout(contains("Cautions"));
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let within = &v["stages"]["within"];
    let across = &v["stages"]["across"];
    // The invented data have within-choir b3 = −0.03 and a contextual effect
    // +0.05 of the choir mean age (data-examples/make_sites_example.py): the
    // across-site coefficient estimates about C + L = +0.02. One draw with 29
    // choirs: a 4-SE band around the truth, signs opposite.
    let b3 = within["coefficients"][0]["estimate"].as_f64().unwrap();
    let b3_se = within["coefficients"][0]["se"].as_f64().unwrap();
    assert!((b3 + 0.03).abs() < 4.0 * b3_se, "{b3} ± {b3_se}");
    let across_c = across["coefficients"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["term"] == "mean_w")
        .unwrap();
    let (a, a_se) = (
        across_c["estimate"].as_f64().unwrap(),
        across_c["se"].as_f64().unwrap(),
    );
    assert!((a - 0.02).abs() < 4.0 * a_se, "{a} ± {a_se}");
    assert!(b3 < 0.0 && a > 0.0);
}

fn write(dir: &TempDir, name: &str, text: &str) -> String {
    let p = dir.path().join(name);
    std::fs::write(&p, text).unwrap();
    p.to_str().unwrap().to_string()
}

fn run_sites(file: &str, extra: &[&str]) -> assert_cmd::assert::Assert {
    let mut args = vec!["sites", file, "--site", "site", "--x", "x", "--y", "y"];
    args.extend_from_slice(extra);
    pondus().args(args).assert()
}

#[test]
fn bad_input_is_named_with_lines() {
    let d = TempDir::new().unwrap();
    let out = d.path().join("o.csv");
    let o = out.to_str().unwrap();
    let f = write(&d, "a.csv", "site,x,y\na,1,2\n\n,2,3\na,3,4\nb,2,x7\n");
    run_sites(&f, &["--out", o])
        .code(2)
        .stderr(contains("line 4, column 'site'"))
        .stderr(contains("site id is missing"))
        .stderr(contains("line 6, column 'y' (value 'x7')"));
    assert!(!out.exists(), "nothing written on bad input");
    let f = write(&d, "c.csv", "site,x,y\na,5,2\na,5,3\nb,5,4\nb,5,1\n");
    run_sites(&f, &["--out", o])
        .code(2)
        .stderr(contains("is 5 in every used row"));
    let good = write(
        &d,
        "g.csv",
        "site,x,y\na,1,2\na,2,3\na,3,5\nb,1,4\nb,2,1\nb,4,2\n",
    );
    let info = write(&d, "i.csv", "site,size\na,1\nb,2\na,3\n");
    run_sites(&good, &["--out", o, "--info", &info])
        .code(2)
        .stderr(contains("line 4, column 'site' (value 'a')"))
        .stderr(contains("already has a row on line 2"));
    run_sites(&good, &["--out", o, "--x", "z"]).code(2);
    run_sites(
        &good,
        &[
            "--out",
            o,
            "--info",
            &write(&d, "j.csv", "site,slope\na,1\n"),
        ],
    )
    .code(2)
    .stderr(contains("also a column of the effects file"));
    pondus()
        .args([
            "sites", "-", "--site", "site", "--x", "x", "--y", "y", "--robust", "--out", o,
        ])
        .write_stdin("site,x,y\na,1,2\n")
        .assert()
        .code(2)
        .stderr(contains("standard input cannot be read twice"));
    run_sites(&good, &["--out", &good])
        .code(2)
        .stderr(contains("never writes over its input"));
    run_sites(&good, &[])
        .code(2)
        .stderr(contains("nothing to do"));
}

#[test]
fn standard_input_and_file_agree() {
    let text = std::fs::read_to_string(repo("tests/data/reference/sites/raw.csv")).unwrap();
    let a = pondus()
        .args([
            "sites", "-", "--site", "site", "--x", "x", "--y", "y", "--w", "w", "--out", "-",
        ])
        .write_stdin(text)
        .output()
        .unwrap();
    let b = pondus()
        .args([
            "sites",
            repo("tests/data/reference/sites/raw.csv").to_str().unwrap(),
            "--site",
            "site",
            "--x",
            "x",
            "--y",
            "y",
            "--w",
            "w",
            "--out",
            "-",
        ])
        .output()
        .unwrap();
    assert!(a.status.success() && b.status.success());
    assert_eq!(a.stdout, b.stdout);
    assert!(String::from_utf8_lossy(&a.stdout)
        .starts_with("study,n,slope,se,r,interaction,interaction_se,mean_x,mean_w\n"));
}

#[test]
fn sql_query_is_printed_with_quoted_identifiers() {
    pondus()
        .args([
            "sql", "--table", "raw rows", "--site", "lab\"id", "--x", "x", "--y", "y", "--w", "w",
        ])
        .assert()
        .success()
        .stdout(contains("FROM \"raw rows\""))
        .stdout(contains("\"lab\"\"id\" AS \"site\""))
        .stdout(contains("COVAR_POP("));
}
