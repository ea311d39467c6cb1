//! Issue 20, memory: a job that builds no per-study record
//! (`Detail::Summary`) hands the design matrix to the fit, which
//! standardises it in place and keeps no per-study array, and the
//! intercept-only fit keeps only its summary numbers. These tests check
//! that the report is still the full one with its `studies` left empty,
//! both on that path (no option that reads the design matrix again) and
//! with each option that makes the job keep the matrix.

use pondus::fit::{run_with_detail, Detail, FitSettings};
use pondus::model::multilevel::Levels;
use pondus::model::{tau2::Tau2Method, Inference};

/// A seeded table of `k` studies in 40 labs, with a numeric moderator, a
/// calendar year (a column the fit must centre) and a categorical one (a
/// small linear congruential generator, fixed seed; invented numbers, for
/// this test only).
fn table(k: usize) -> String {
    let mut next = crate::util::uniform_draws(0x2545_F491_4F6C_DD1D);
    let mut s = String::from("study,effect,variance,dose,year,arm,lab\n");
    for i in 0..k {
        let dose = 10.0 * next();
        let year = 1990.0 + (30.0 * next()).floor();
        let v = 0.01 + 0.2 * next();
        let e = 0.1 + 0.03 * dose + 0.004 * (year - 2000.0) + (next() - 0.5) * 0.8;
        let arm = ["a", "b", "c"][i % 3];
        s.push_str(&format!(
            "s{i},{e:.6},{v:.6},{dose:.4},{year},{arm},lab{}\n",
            i % 40
        ));
    }
    s
}

fn settings(method: Tau2Method, inference: Inference) -> FitSettings {
    let mut s = crate::util::settings(
        pondus::effect::Measure::Effect,
        &["dose", "year", "arm"],
        method,
        inference,
    );
    s.moderators[2].categorical = true;
    s
}

/// The report of `csv` under `s` with and without per-study records:
/// equal once the records are emptied.
#[track_caller]
fn summary_equals_full(s: &FitSettings, csv: &str, what: &str) {
    let run = |d| {
        run_with_detail(s, "t.csv", csv.as_bytes(), &|_| {}, d)
            .unwrap_or_else(|e| panic!("{what}: {e}"))
    };
    let mut full = run(Detail::Full);
    let summary = run(Detail::Summary);
    assert!(!full.studies.is_empty(), "{what}");
    if !s.answers.shrink {
        assert!(summary.studies.is_empty(), "{what}");
        full.studies = pondus::result::StudyList::new();
    }
    assert_eq!(
        serde_json::to_string(&full).unwrap(),
        serde_json::to_string(&summary).unwrap(),
        "{what}"
    );
}

/// Above the 65,536-row threshold at which the sums run in parallel
/// chunks, under each τ² estimator kind (likelihood, moments, none).
#[test]
fn mem20_summary_path_gives_the_full_reports_numbers() {
    let csv = table(70_000);
    for (method, inference) in [
        (Tau2Method::Reml, Inference::Kh),
        (Tau2Method::Ml, Inference::Z),
        (Tau2Method::Dl, Inference::KhFloor),
        (Tau2Method::None, Inference::Z),
    ] {
        let s = settings(method, inference);
        summary_equals_full(&s, &csv, &format!("{method:?} {inference:?}"));
    }
}

/// Each option that reads the design matrix or the per-study arrays after
/// the fit (so the job keeps them) gives the same numbers in both details.
#[test]
fn mem20_options_that_keep_the_design_matrix() {
    let csv = table(300);
    let base = settings(Tau2Method::Reml, Inference::Kh);
    let mut cases: Vec<(&str, FitSettings)> = Vec::new();
    let mut s = base.clone();
    s.dependence.cluster = Some("lab".into());
    cases.push(("three-level", s.clone()));
    s.dependence.levels = Levels::Two;
    s.dependence.robust = true;
    cases.push(("two-level robust", s));
    let mut s = base.clone();
    s.answers.shrink = true;
    cases.push(("shrink", s));
    let mut s = base.clone();
    s.answers.all_subsets = true;
    cases.push(("all subsets", s));
    let mut s = base.clone();
    s.answers.spread_by = vec![s.moderators[0].clone()];
    s.options.inference = Inference::Z;
    cases.push(("spread by", s));
    let mut s = base.clone();
    s.diagnostics.loo = true;
    s.diagnostics.influence = true;
    cases.push(("leave one out", s));
    for (what, s) in &cases {
        summary_equals_full(s, &csv, what);
    }
}
