//! The HTML report (`--report`): built for every data example, checked for
//! self-containment (no web addresses, no scripts), escaping of data, the
//! sections a reader needs, and accessible markup. The rendering in a real
//! browser is checked in `browser.rs`.

use crate::util::repo;
use assert_cmd::Command;
use std::path::{Path, PathBuf};

/// Every data example with one effect per row, with the options its README
/// line describes (the participant-row example is run by `sites_report`).
pub const EXAMPLES: &[(&str, &str)] = &[
    (
        "consortium-correlations.csv",
        "--measure r --moderator session_minutes --moderator mode --probe session_minutes --regions --compare-levels",
    ),
    (
        "programme-sites.csv",
        "--measure smd --moderator dosage_hours --moderator delivery --at dosage_hours=40,delivery=staff",
    ),
    (
        "published-slopes.csv",
        "--measure slope --moderator mean_age --loo --influence --small-study --cumulative-by study",
    ),
    (
        "trial-events.csv",
        "--measure log-or --moderator followup_months --moderator setting --permutations 199 --seed 11",
    ),
    ("precomputed-effects.csv", "--measure effect --moderator duration_weeks"),
    ("partial-correlations.csv", "--measure partial-r --moderator remote_share"),
    (
        "lab-conditions.csv",
        "--cluster lab --moderator lab_years --moderator session_minutes --robust",
    ),
    (
        "hiring-validity.csv",
        "--measure r --reliability-x rel_exercise --reliability-y rel_rating --range-ratio range_ratio --moderator hired_share",
    ),
];

/// Runs `pondus ARGS --report OUT -q`, asserts success, and returns the
/// page's path and text.
fn report_of(args: Vec<std::ffi::OsString>, out: PathBuf) -> (PathBuf, String) {
    let o = Command::cargo_bin("pondus")
        .expect("the pondus binary is built")
        .args(&args)
        .arg("--report")
        .arg(&out)
        .arg("-q")
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "pondus {args:?} --report failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    let page = std::fs::read_to_string(&out).expect("the report is written");
    (out, page)
}

fn words(args: &str) -> impl Iterator<Item = std::ffi::OsString> + '_ {
    args.split_whitespace().map(Into::into)
}

/// Runs `pondus fit FILE ARGS --report DIR/report.html -q` and returns the page.
pub fn fit_report(file: &Path, args: &str, dir: &Path) -> (PathBuf, String) {
    let mut a: Vec<std::ffi::OsString> = vec!["fit".into(), file.into()];
    a.extend(words(args));
    report_of(a, dir.join("report.html"))
}

/// Runs `pondus plan ARGS --report DIR/plan.html -q` and returns the page.
pub fn plan_report(args: &str, dir: &Path) -> (PathBuf, String) {
    let mut a: Vec<std::ffi::OsString> = vec!["plan".into()];
    a.extend(words(args));
    report_of(a, dir.join("plan.html"))
}

/// The planning run the report tests use (a quick z-test plan).
pub const PLAN_ARGS: &str =
    "--measure r --k 20 --n 80 --tau2 0.01 --moderator-effect 0.1 --moderator-sd 1 --target-power 0.8 --simulate 200 --seed 7";

fn example(name: &str) -> PathBuf {
    repo(&format!("data-examples/{name}"))
}

/// Asserts the page names no web address in any form a browser would fetch
/// or follow, and carries no script.
fn assert_self_contained(what: &str, page: &str) {
    assert!(
        !page.contains("http://") && !page.contains("https://"),
        "{what}: the report contains a web address"
    );
    let lower = page.to_ascii_lowercase();
    assert!(
        !lower.contains("<script"),
        "{what}: the report has a script"
    );
    assert!(
        !lower.contains("<link"),
        "{what}: the report links a resource"
    );
    assert!(
        !lower.contains("<iframe"),
        "{what}: the report embeds a frame"
    );
    for attr in [" src=\"", " href=\"//", "url(//", "@import"] {
        assert!(!lower.contains(attr), "{what}: the report has `{attr}`");
    }
    // Every url(...) in the style sheet is a data URL (the font).
    for (i, _) in lower.match_indices("url(") {
        assert!(
            lower[i..].starts_with("url(data:"),
            "{what}: a url() that is not a data URL at byte {i}"
        );
    }
    // Internal links only.
    for (i, _) in lower.match_indices("href=\"") {
        assert!(
            lower[i + 6..].starts_with('#'),
            "{what}: a link that leaves the page at byte {i}"
        );
    }
}

#[test]
fn every_example_report_is_self_contained_and_has_every_section() {
    let dir = tempfile::tempdir().unwrap();
    for (name, args) in EXAMPLES {
        let (_, page) = fit_report(&example(name), args, dir.path());
        assert_self_contained(name, &page);
        assert!(page.starts_with("<!DOCTYPE html>"), "{name}");
        assert!(page.contains("Content-Security-Policy"), "{name}");
        for id in [
            "question",
            "care",
            "data",
            "pooled",
            "moderators",
            "plots",
            "studies",
            "reproduce",
        ] {
            assert!(
                page.contains(&format!("id=\"{id}\"")),
                "{name}: no section {id}"
            );
        }
        // Three pictures (each model has a moderator), the sensitivity
        // plot with --small-study or --selection and the influence plot
        // with --influence; each an accessible SVG.
        let n = 3
            + usize::from(args.contains("--small-study") || args.contains("--selection"))
            + usize::from(args.contains("--influence"));
        assert_eq!(page.matches("<figure class=\"plot\"").count(), n, "{name}");
        assert_eq!(page.matches("<svg ").count(), n, "{name}");
        assert_eq!(
            page.matches("role=\"img\" aria-labelledby=").count(),
            n,
            "{name}"
        );
        assert_eq!(page.matches("<title id=\"fig-").count(), n, "{name}");
        // Tables have header cells with scope.
        assert!(page.contains("<th scope=\"col\">"), "{name}");
        // Reproducibility: the command, the version and the input's SHA-256.
        let bytes = std::fs::read(example(name)).unwrap();
        assert!(
            page.contains(&pondus::support::hash::sha256_hex(&bytes)),
            "{name}: no input SHA-256"
        );
        assert!(page.contains(&format!("pondus {}", env!("CARGO_PKG_VERSION"))));
        assert!(page.contains(&format!("pondus fit {}", example(name).display())));
        // The cautions are on the page.
        assert!(page.contains("observational"), "{name}: no caution");
    }
}

#[test]
fn probes_regions_and_contrasts_get_their_own_section() {
    let dir = tempfile::tempdir().unwrap();
    let (_, page) = fit_report(&example(EXAMPLES[0].0), EXAMPLES[0].1, dir.path());
    assert!(page.contains("id=\"interpretation\""));
    assert!(page.contains("href=\"#interpretation\""));
    for heading in [
        "Conditional effects",
        "Differences between levels",
        "Regions of significance (Johnson–Neyman)",
        "How the picture changes",
    ] {
        assert!(page.contains(heading), "no {heading}");
    }
    assert!(page.contains("(mean − 1 SD)"));
    // Without those flags the section is absent.
    let (_, plain) = fit_report(
        &example(EXAMPLES[0].0),
        "--measure r --moderator session_minutes",
        dir.path(),
    );
    assert!(!plain.contains("id=\"interpretation\""));
}

#[test]
fn artifact_corrections_are_listed_per_study() {
    let dir = tempfile::tempdir().unwrap();
    let (_, page) = fit_report(
        &example("hiring-validity.csv"),
        "--measure r --reliability-x rel_exercise --reliability-y rel_rating --range-ratio range_ratio --moderator hired_share",
        dir.path(),
    );
    assert!(page.contains("Artifact corrections"));
    assert!(page.contains("corrected r"));
}

#[test]
fn robustness_checks_get_their_own_section_and_the_seed_is_recorded() {
    let dir = tempfile::tempdir().unwrap();
    let (_, page) = fit_report(&example(EXAMPLES[2].0), EXAMPLES[2].1, dir.path());
    assert!(page.contains("id=\"robustness\"") && page.contains("href=\"#robustness\""));
    for heading in [
        "Leaving out one study at a time",
        "How far each study moves the answer",
        "Small-study effects",
        "Cumulative meta-analysis",
    ] {
        assert!(page.contains(heading), "no {heading}");
    }
    assert!(page.contains("asymmetry has causes other than publication bias"));
    let (_, page) = fit_report(&example(EXAMPLES[3].0), EXAMPLES[3].1, dir.path());
    assert!(page.contains("Permutation test of the moderators"));
    assert!(page.contains("199 random permutations of the moderator rows (seed 11)"));
    assert!(page.contains("<dt>Random seed</dt><dd>11</dd>"));
    let (_, plain) = fit_report(&example(EXAMPLES[3].0), "--measure log-or", dir.path());
    assert!(!plain.contains("id=\"robustness\"") && !plain.contains("Random seed"));
}

#[test]
fn clustered_effects_get_a_dependence_section() {
    let dir = tempfile::tempdir().unwrap();
    let (name, args) = EXAMPLES
        .iter()
        .find(|(n, _)| *n == "lab-conditions.csv")
        .unwrap();
    let (_, page) = fit_report(&example(name), args, dir.path());
    assert!(page.contains("id=\"dependence\"") && page.contains("href=\"#dependence\""));
    for needle in [
        "Variance components (profile-likelihood intervals)",
        "Likelihood-ratio tests of each component",
        "lab_years varies between clusters only",
        "session_minutes varies within clusters",
        "Cluster-robust (CR2) standard errors with Satterthwaite degrees of freedom",
    ] {
        assert!(page.contains(needle), "no '{needle}'");
    }
    let (_, plain) = fit_report(&example(name), "--moderator lab_years", dir.path());
    assert!(!plain.contains("id=\"dependence\""));
}

#[test]
fn excluded_rows_appear_with_their_reason() {
    // programme-sites.csv: Site 11 has no dosage (data-examples/README.md).
    let dir = tempfile::tempdir().unwrap();
    let (_, page) = fit_report(
        &example("programme-sites.csv"),
        "--measure smd --moderator dosage_hours --moderator delivery",
        dir.path(),
    );
    assert!(page.contains("Rows left out of the model, with the reason"));
    assert!(page.contains("missing moderator dosage_hours"));
}

#[test]
fn labels_and_headers_are_escaped_as_text() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("hostile.csv");
    std::fs::write(
        &csv,
        "study,effect,variance,<b>dose</b>\n\
         \"<script>alert('x')</script>\",0.1,0.01,1\n\
         \"<img src=x onerror=alert(1)>\",0.3,0.02,2\n\
         \"A & B \"\"quoted\"\"\",0.2,0.015,3\n\
         plain,0.25,0.01,4\n",
    )
    .unwrap();
    let (_, page) = fit_report(&csv, "--moderator <b>dose</b> --inference z", dir.path());
    assert_self_contained("hostile", &page);
    assert!(page.contains("&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt;"));
    assert!(page.contains("&lt;img src=x onerror=alert(1)&gt;"));
    assert!(page.contains("A &amp; B &quot;quoted&quot;"));
    assert!(page.contains("&lt;b&gt;dose&lt;/b&gt;"));
    assert!(!page.contains("<b>dose</b>"));
    assert!(!page.contains("<img"));
}

#[test]
fn report_without_moderators_has_no_bubble_plot_and_says_why() {
    let dir = tempfile::tempdir().unwrap();
    let (_, page) = fit_report(
        &example("consortium-correlations.csv"),
        "--measure r",
        dir.path(),
    );
    assert_eq!(page.matches("<figure class=\"plot\"").count(), 2);
    assert!(page.contains("No bubble plot"));
    assert!(page.contains("This model has no moderators"));
}

#[test]
fn plan_report_is_self_contained_with_table_curve_and_seed() {
    let dir = tempfile::tempdir().unwrap();
    let (_, page) = plan_report(PLAN_ARGS, dir.path());
    assert_self_contained("plan", &page);
    assert!(page.contains("id=\"table\""));
    assert_eq!(page.matches("<figure class=\"plot\"").count(), 1);
    assert!(page.contains("Random seed"));
    assert!(page.contains("<dd>7</dd>"));
}

#[test]
fn report_needs_an_html_name_and_never_overwrites_the_input() {
    let dir = tempfile::tempdir().unwrap();
    let o = Command::cargo_bin("pondus")
        .unwrap()
        .args(["fit"])
        .arg(example("published-slopes.csv"))
        .args(["--measure", "slope", "--report"])
        .arg(dir.path().join("out.txt"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("--report") && err.contains(".html"), "{err}");

    let csv = dir.path().join("data.html");
    std::fs::copy(example("published-slopes.csv"), &csv).unwrap();
    let before = std::fs::read(&csv).unwrap();
    let o = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .arg(&csv)
        .args(["--measure", "slope", "--report"])
        .arg(&csv)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(
        std::fs::read(&csv).unwrap(),
        before,
        "the input was changed"
    );
}

#[test]
fn report_to_standard_output_replaces_the_terminal_text() {
    let o = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .arg(example("published-slopes.csv"))
        .args([
            "--measure",
            "slope",
            "--moderator",
            "mean_age",
            "--report",
            "-",
        ])
        .output()
        .unwrap();
    assert!(o.status.success());
    let out = String::from_utf8(o.stdout).unwrap();
    assert!(out.starts_with("<!DOCTYPE html>"));
    assert!(out.trim_end().ends_with("</html>"));
}

/// The `pondus sites` run the report tests use: the invented choir data
/// with both stages and a site characteristic.
pub const SITES_ARGS: &str = "--site choir --x rehearsal_hours --y breath_hold_s --w age --covariate wind --fit --moderator conductor_years";

/// Runs `pondus sites` on the choir example with `--report DIR/sites.html`.
pub fn sites_report(dir: &Path) -> (PathBuf, String) {
    let mut a: Vec<std::ffi::OsString> =
        vec!["sites".into(), example("choir-participants.csv").into()];
    a.extend(words(SITES_ARGS));
    a.extend(["--info".into(), example("choir-sites.csv").into()]);
    report_of(a, dir.join("sites.html"))
}

#[test]
fn sites_report_has_both_stages_exclusions_join_and_digest() {
    let dir = tempfile::tempdir().unwrap();
    let (_, page) = sites_report(dir.path());
    assert_self_contained("sites", &page);
    for needle in [
        "Within sites</strong>: the pooled product term rehearsal_hours·age is",
        "Across sites</strong>: the site slope changes by",
        "Within sites: the pooled product term",
        "Across sites: the slopes on the site characteristics",
        "Sites left out, with the reason",
        "Hollowcombe Choir",
        "Mirefield Choir",
        "ecological bias",
    ] {
        assert!(page.contains(needle), "no '{needle}'");
    }
    let bytes = std::fs::read(example("choir-participants.csv")).unwrap();
    assert!(page.contains(&pondus::support::hash::sha256_hex(&bytes)));
    assert_eq!(page.matches("<figure class=\"plot\"").count(), 3);
}
