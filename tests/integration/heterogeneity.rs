//! Heterogeneity as an answer (issue 17): `--shrink`, `--beyond` and
//! `--all-subsets` against the independent scipy/statsmodels script
//! `tests/reference/heterogeneity.py` (fixtures in
//! `tests/data/reference/heterogeneity/`), on the BCG vaccine trials
//! (Colditz et al. 1994, JAMA 271:698, an open published data set) and
//! invented data; consistency with the prediction interval; invariances;
//! bad input.

use crate::util::repo;
use assert_cmd::Command;
use pondus::tolerance::HETEROGENEITY_REF;
use serde_json::Value;

pub(crate) fn load(name: &str) -> Value {
    let path = repo(&format!("tests/data/reference/heterogeneity/{name}"));
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

pub(crate) fn case<'a>(file: &'a Value, name: &str) -> &'a Value {
    file["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == name)
        .unwrap_or_else(|| panic!("no case {name}"))
}

pub(crate) fn pondus_json(args: &[&str]) -> Value {
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .args(args)
        .args(["--json", "-"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "pondus failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

pub(crate) fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

/// |a − b| ≤ tol·max(1, |b|).
pub(crate) fn near(what: &str, a: f64, b: f64, tol: f64) {
    assert!(
        (a - b).abs() <= tol * b.abs().max(1.0),
        "{what}: pondus {a} vs reference {b}"
    );
}

const BCG: &str = "tests/data/reference/bcg.csv";
const SIM: &str = "tests/data/reference/sim_k20.csv";

fn bcg_args<'a>(bcg: &'a str, extra: &[&'a str]) -> Vec<&'a str> {
    let mut v = vec![bcg, "--measure", "log-rr"];
    v.extend_from_slice(extra);
    v
}

fn check_shrink(got: &Value, want: &Value) {
    let studies = got["studies"].as_array().unwrap();
    let tol = HETEROGENEITY_REF;
    near(
        "tau2",
        num(&got["tau2"]["estimate"]),
        num(&want["tau2"]),
        tol,
    );
    for (i, s) in studies.iter().enumerate() {
        let sh = &s["shrunken"];
        for (key, fixture) in [
            ("estimate", "shrunken"),
            ("se", "shrunken_se"),
            ("ci_low", "shrunken_low"),
            ("ci_high", "shrunken_high"),
            ("own_weight", "own_weight"),
        ] {
            near(
                &format!("study {i} {key}"),
                num(&sh[key]),
                num(&want[fixture][i]),
                tol,
            );
        }
    }
    near(
        "beyond at the average",
        num(&got["beyond"]["average"]),
        num(&want["beyond"]["average"]),
        tol,
    );
    assert_eq!(got["beyond"]["df"].as_f64(), want["beyond"]["df"].as_f64());
}

#[test]
fn shrunken_estimates_and_beyond_match_the_reference_on_bcg() {
    let f = load("shrink.json");
    let want = case(&f, "bcg_ablat_kh");
    let bcg = repo(BCG);
    let bcg = bcg.to_str().unwrap();
    // The value is given on the reading scale (a risk ratio of 0.6).
    let got = pondus_json(&bcg_args(
        bcg,
        &["--moderator", "ablat", "--shrink", "--beyond", "0.6"],
    ));
    check_shrink(&got, want);
    near(
        "value on the analysis scale",
        num(&got["beyond"]["value_analysis"]),
        0.6f64.ln(),
        1e-15,
    );
}

#[test]
fn shrunken_estimates_and_beyond_match_the_reference_on_invented_data() {
    let f = load("shrink.json");
    let want = case(&f, "sim_k20_dose_region_z");
    let sim = repo(SIM);
    let got = pondus_json(&[
        sim.to_str().unwrap(),
        "--moderator",
        "dose",
        "--moderator",
        "region",
        "--inference",
        "z",
        "--shrink",
        "--beyond",
        "0.4",
    ]);
    check_shrink(&got, want);
}

/// The probability agrees with the reported prediction interval: the
/// interval's ends are the level's quantiles of the same distribution, so
/// the chance beyond its upper end is (1 − level)/2, beyond its lower end
/// (1 + level)/2, and beyond the centre 1/2 (this holds whatever form the
/// prediction interval takes, as long as `--beyond` follows it).
#[test]
fn beyond_agrees_with_the_prediction_interval() {
    let sim = repo(SIM);
    let sim = sim.to_str().unwrap();
    let base = pondus_json(&[sim, "--moderator", "dose", "--at", "dose=5"]);
    let avg = &base["average"];
    let at = &base["predictions"][0];
    for (what, e) in [("average", avg), ("at dose=5", at)] {
        for (value, want) in [
            (num(&e["pi_high"]), 0.025),
            (num(&e["pi_low"]), 0.975),
            (num(&e["estimate"]), 0.5),
        ] {
            let v = format!("{value}");
            let got = pondus_json(&[sim, "--moderator", "dose", "--at", "dose=5", "--beyond", &v]);
            let p = if what == "average" {
                num(&got["beyond"]["average"])
            } else {
                num(&got["beyond"]["at"][0]["probability"])
            };
            assert!((p - want).abs() < 1e-9, "{what} beyond {v}: {p} vs {want}");
        }
    }
}

fn check_model_set(got: &Value, want: &Value) {
    let ms = &got["model_set"];
    let tol = HETEROGENEITY_REF;
    let models = ms["models"].as_array().unwrap();
    let wanted = want["models"].as_array().unwrap();
    assert_eq!(models.len(), wanted.len());
    for (m, w) in models.iter().zip(wanted) {
        assert_eq!(m["terms"], w["terms"], "ranking order");
        assert_eq!(m["parameters"], w["parameters"]);
        for key in ["log_likelihood", "aicc", "delta", "weight"] {
            near(key, num(&m[key]), num(&w[key]), tol);
        }
    }
    for (m, w) in ms["importance"]
        .as_array()
        .unwrap()
        .iter()
        .zip(want["importance"].as_array().unwrap())
    {
        assert_eq!(m["moderator"], w["moderator"]);
        near(
            "importance",
            num(&m["importance"]),
            num(&w["importance"]),
            tol,
        );
    }
    for (m, w) in ms["averaged"]
        .as_array()
        .unwrap()
        .iter()
        .zip(want["averaged"].as_array().unwrap())
    {
        assert_eq!(m["term"], w["term"]);
        near("averaged", num(&m["estimate"]), num(&w["estimate"]), tol);
        near("unconditional SE", num(&m["se"]), num(&w["se"]), tol);
    }
}

#[test]
fn all_subsets_match_the_reference_on_bcg() {
    let f = load("subsets.json");
    let want = case(&f, "bcg_ablat_year_alloc");
    let bcg = repo(BCG);
    let bcg = bcg.to_str().unwrap();
    let got = pondus_json(&bcg_args(
        bcg,
        &[
            "--moderator",
            "ablat",
            "--moderator",
            "year",
            "--moderator",
            "alloc",
            "--all-subsets",
        ],
    ));
    check_model_set(&got, want);
    // The all-terms model is the full ML fit of `--tau2 ml`.
    let ml = pondus_json(&bcg_args(
        bcg,
        &[
            "--moderator",
            "ablat",
            "--moderator",
            "year",
            "--moderator",
            "alloc",
            "--tau2",
            "ml",
        ],
    ));
    let all = got["model_set"]["models"]
        .as_array()
        .unwrap()
        .iter()
        .find(|m| m["terms"].as_array().unwrap().len() == 3)
        .unwrap();
    near(
        "all-terms log-likelihood = --tau2 ml",
        num(&all["log_likelihood"]),
        num(&ml["model"]["log_likelihood"]),
        1e-12,
    );
    near(
        "full ML tau2 vs reference",
        num(&ml["tau2"]["estimate"]),
        num(&want["full_ml"]["tau2"]),
        HETEROGENEITY_REF,
    );
}

#[test]
fn all_subsets_match_the_reference_on_invented_data() {
    let f = load("subsets.json");
    let want = case(&f, "sim_k20_dose_region");
    let sim = repo(SIM);
    let got = pondus_json(&[
        sim.to_str().unwrap(),
        "--moderator",
        "dose",
        "--moderator",
        "region",
        "--all-subsets",
    ]);
    check_model_set(&got, want);
    let w: f64 = got["model_set"]["models"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| num(&m["weight"]))
        .sum();
    assert!((w - 1.0).abs() < 1e-12, "weights sum to {w}");
}

/// Reordering the studies leaves every shrunken value (by study), the
/// probabilities and the model ranking unchanged.
#[test]
fn answers_do_not_depend_on_study_order() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(repo(SIM)).unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    let head = lines.remove(0);
    lines.reverse();
    let path = dir.path().join("reversed.csv");
    std::fs::write(&path, format!("{head}\n{}\n", lines.join("\n"))).unwrap();
    let args = |p: &str| -> Value {
        pondus_json(&[
            p,
            "--moderator",
            "dose",
            "--moderator",
            "region",
            "--shrink",
            "--beyond",
            "0.3",
            "--all-subsets",
        ])
    };
    let a = args(repo(SIM).to_str().unwrap());
    let b = args(path.to_str().unwrap());
    let by_study = |r: &Value| -> Vec<(String, f64)> {
        let mut v: Vec<(String, f64)> = r["studies"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| {
                (
                    s["study"].as_str().unwrap().to_string(),
                    num(&s["shrunken"]["estimate"]),
                )
            })
            .collect();
        v.sort_by(|x, y| x.0.cmp(&y.0));
        v
    };
    for (x, y) in by_study(&a).iter().zip(by_study(&b)) {
        assert_eq!(x.0, y.0);
        assert!((x.1 - y.1).abs() < 1e-10, "{x:?} vs {y:?}");
    }
    near(
        "beyond",
        num(&a["beyond"]["average"]),
        num(&b["beyond"]["average"]),
        1e-10,
    );
    for (m, n) in a["model_set"]["models"]
        .as_array()
        .unwrap()
        .iter()
        .zip(b["model_set"]["models"].as_array().unwrap())
    {
        assert_eq!(m["terms"], n["terms"]);
        near("aicc", num(&m["aicc"]), num(&n["aicc"]), 1e-10);
    }
}

fn fails(args: &[&str]) -> String {
    let out = Command::cargo_bin("pondus")
        .unwrap()
        .arg("fit")
        .args(args)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(2),
        "{:?}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stderr).into_owned()
}

#[test]
fn bad_answers_are_refused_with_exit_2() {
    let sim = repo(SIM);
    let sim = sim.to_str().unwrap();
    let r = repo("data-examples/consortium-correlations.csv");
    let r = r.to_str().unwrap();
    let e = fails(&[r, "--measure", "r", "--beyond", "1.5"]);
    assert!(
        e.contains("--beyond") && e.contains("between -1 and 1"),
        "{e}"
    );
    let bcg = repo(BCG);
    let e = fails(&bcg_args(bcg.to_str().unwrap(), &["--beyond", "0"]));
    assert!(e.contains("above 0"), "{e}");
    let e = fails(&[sim, "--beyond", "nan"]);
    assert!(e.contains("--beyond"), "{e}");
    let e = fails(&[sim, "--all-subsets"]);
    assert!(
        e.contains("--all-subsets") && e.contains("--moderator"),
        "{e}"
    );
    // 16 candidates (invented numeric columns).
    let dir = tempfile::tempdir().unwrap();
    let mut csv = String::from("study,effect,variance");
    for j in 0..16 {
        csv.push_str(&format!(",m{j}"));
    }
    csv.push('\n');
    for i in 0..40 {
        csv.push_str(&format!("s{i},{},{}", (i % 7) as f64 * 0.1, 0.05));
        for j in 0..16 {
            csv.push_str(&format!(
                ",{:.4}",
                ((i as f64 + 1.0) * (j as f64 + 1.3)).sin()
            ));
        }
        csv.push('\n');
    }
    let path = dir.path().join("many.csv");
    std::fs::write(&path, csv).unwrap();
    let mut args = vec![path.to_str().unwrap().to_string()];
    for j in 0..16 {
        args.extend(["--moderator".to_string(), format!("m{j}")]);
    }
    args.push("--all-subsets".into());
    let a: Vec<&str> = args.iter().map(String::as_str).collect();
    let e = fails(&a);
    assert!(
        e.contains("16 candidates") && e.contains("at most 15"),
        "{e}"
    );
    // Too few studies for the AICc of the largest model.
    let small = dir.path().join("small.csv");
    std::fs::write(
        &small,
        "study,effect,variance,a,b\ns1,0.1,0.01,1,3\ns2,0.3,0.02,2,1\ns3,0.2,0.01,3,2\ns4,0.5,0.03,4,5\n",
    )
    .unwrap();
    let e = fails(&[small.to_str().unwrap(), "--moderator", "a", "--all-subsets"]);
    assert!(e.contains("too few"), "{e}");
}

/// The location-scale model of the library (`model::location_scale::fit`,
/// which `--spread-by` runs; `spread.rs` checks the binary) against scipy
/// maximising the likelihood directly: α to 1e-4, α's SEs to 1e-2
/// (numerical Hessians on both sides), β and its SEs, the log-likelihood
/// and the LR test against one τ².
#[test]
fn location_scale_model_matches_scipy() {
    use pondus::model::location_scale;
    use pondus::model::tau2::Tau2Method;
    use pondus::model::{fit_parts, FitOptions, Inference};
    use pondus::tolerance::SPREAD_SE_REF;
    let f = load("spread.json");
    let text =
        std::fs::read_to_string(repo("tests/data/reference/heterogeneity/spread_k40.csv")).unwrap();
    let rows: Vec<Vec<String>> = text
        .lines()
        .skip(1)
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    let y: Vec<f64> = rows.iter().map(|r| r[1].parse().unwrap()).collect();
    let v: Vec<f64> = rows.iter().map(|r| r[2].parse().unwrap()).collect();
    let size: Vec<f64> = rows.iter().map(|r| r[3].parse().unwrap()).collect();
    let b: Vec<f64> = rows.iter().map(|r| f64::from(r[4] == "b")).collect();
    let x: Vec<f64> = size.iter().flat_map(|s| [1.0, *s]).collect();
    for (name, z, m, restricted) in [
        (
            "spread_k40_group_reml",
            b.iter().flat_map(|g| [1.0, *g]).collect::<Vec<f64>>(),
            2,
            true,
        ),
        (
            "spread_k40_group_size_ml",
            b.iter()
                .zip(&size)
                .flat_map(|(g, s)| [1.0, *g, *s])
                .collect(),
            3,
            false,
        ),
    ] {
        let want = case(&f, name);
        let opts = FitOptions {
            method: if restricted {
                Tau2Method::Reml
            } else {
                Tau2Method::Ml
            },
            inference: Inference::Z,
            level: 0.95,
        };
        let one = fit_parts(&y, &v, &x, 2, opts, false).unwrap();
        let ls = location_scale::fit(&y, &v, &x, 2, &z, m, one.tau2.estimate, restricted).unwrap();
        for (j, a) in want["alpha"].as_array().unwrap().iter().enumerate() {
            near(
                &format!("{name} alpha {j}"),
                ls.alpha[j],
                num(&a["estimate"]),
                HETEROGENEITY_REF,
            );
            near(
                &format!("{name} alpha SE {j}"),
                ls.alpha_cov[(j, j)].sqrt(),
                num(&a["se"]),
                SPREAD_SE_REF,
            );
        }
        for (j, c) in want["beta"].as_array().unwrap().iter().enumerate() {
            near("beta", ls.beta[j], num(&c["estimate"]), HETEROGENEITY_REF);
            near(
                "beta SE",
                ls.beta_cov[(j, j)].sqrt(),
                num(&c["se"]),
                HETEROGENEITY_REF,
            );
        }
        near(
            "log-likelihood",
            ls.log_likelihood,
            num(&want["log_likelihood"]),
            HETEROGENEITY_REF,
        );
        let lr = 2.0 * (ls.log_likelihood - one.log_likelihood.unwrap());
        near(
            "LR statistic",
            lr,
            num(&want["test"]["statistic"]),
            HETEROGENEITY_REF,
        );
        // Recoding the reference level of the group leaves every τ_i² unchanged.
        if m == 2 {
            let z2: Vec<f64> = b.iter().flat_map(|g| [1.0, 1.0 - *g]).collect();
            let ls2 =
                location_scale::fit(&y, &v, &x, 2, &z2, 2, one.tau2.estimate, restricted).unwrap();
            for (t1, t2) in ls.tau2.iter().zip(&ls2.tau2) {
                assert!((t1 - t2).abs() < 1e-8 * t1, "{t1} vs {t2}");
            }
        }
    }
}
