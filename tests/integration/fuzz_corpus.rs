//! The fuzz targets' checks (`fuzz/fuzz_targets/`) as ordinary tests over
//! the committed seed corpus and every input a fuzzing run found to fail
//! (`fuzz/regressions/`): each must give a result with only finite numbers
//! or a plain error, never a panic. The coverage-guided runs themselves
//! need cargo-fuzz and a sanitizer build; see docs/reliability.md.

use crate::util::repo;

#[path = "../../fuzz/fuzz_targets/common.rs"]
mod common;

fn files(dir: &str) -> Vec<std::path::PathBuf> {
    let mut v: Vec<_> = std::fs::read_dir(repo(dir))
        .map(|d| d.filter_map(|e| e.ok().map(|e| e.path())).collect())
        .unwrap_or_default();
    v.sort();
    v
}

#[test]
fn fit_csv_seeds_and_regressions_run_clean() {
    let all: Vec<_> = files("fuzz/seeds/fit_csv")
        .into_iter()
        .chain(files("fuzz/regressions/fit_csv"))
        .collect();
    assert!(all.len() >= 50, "the seed corpus is missing");
    for p in all {
        let data = std::fs::read(&p).unwrap();
        let r = std::panic::catch_unwind(|| common::fit_csv(&data));
        assert!(r.is_ok(), "{} fails", p.display());
    }
}

#[test]
fn fit_numbers_seeds_and_regressions_run_clean() {
    let all: Vec<_> = files("fuzz/seeds/fit_numbers")
        .into_iter()
        .chain(files("fuzz/regressions/fit_numbers"))
        .collect();
    assert!(all.len() >= 5, "the seed corpus is missing");
    for p in all {
        let data = std::fs::read(&p).unwrap();
        let r = std::panic::catch_unwind(|| common::fit_numbers(&data));
        assert!(r.is_ok(), "{} fails", p.display());
    }
}

#[test]
fn sites_csv_seeds_and_regressions_run_clean() {
    let all: Vec<_> = files("fuzz/seeds/sites_csv")
        .into_iter()
        .chain(files("fuzz/regressions/sites_csv"))
        .collect();
    assert!(all.len() >= 4, "the seed corpus is missing");
    for p in all {
        let data = std::fs::read(&p).unwrap();
        let r = std::panic::catch_unwind(|| common::sites_csv(&data));
        assert!(r.is_ok(), "{} fails", p.display());
    }
}

#[test]
fn fit_dependent_seeds_and_regressions_run_clean() {
    let all: Vec<_> = files("fuzz/seeds/fit_dependent")
        .into_iter()
        .chain(files("fuzz/regressions/fit_dependent"))
        .collect();
    assert!(all.len() >= 10, "the seed corpus is missing");
    for p in all {
        let data = std::fs::read(&p).unwrap();
        let r = std::panic::catch_unwind(|| common::fit_dependent(&data));
        assert!(r.is_ok(), "{} fails", p.display());
    }
}
