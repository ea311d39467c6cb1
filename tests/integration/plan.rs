//! Tests of `pondus plan` through the binary.
//!
//! Reference values come from tests/reference/power_values.py, computed
//! independently with numpy and scipy 1.16.3 (scipy.stats.norm for the
//! closed-form z power, scipy.stats.ncf for the noncentral F approximation).

use assert_cmd::Command;
use pondus::tolerance::NONCENTRAL_REF_ABS;
use serde_json::Value;
use tempfile::TempDir;

/// The first planning problem of power_values.py.
const BASE: &str = "--measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2";
/// scipy 1.16.3: closed-form z power Φ(δ − z) + Φ(−δ − z) for BASE.
const Z_POWER: f64 = 0.5953367183203992;
/// scipy 1.16.3: noncentral F approximation P(F₁,₁₈(λ) > F₁,₁₈;.95) for BASE.
const F_POWER: f64 = 0.5490093886325786;
/// power_values.py: smallest k with z power ≥ 0.8 for BASE, and smallest n at k = 20.
const K_NEEDED: u64 = 33;
const N_NEEDED: f64 = 186.0;

fn plan(args: &str) -> Command {
    let mut c = Command::cargo_bin("pondus").expect("the pondus binary is built");
    c.arg("plan").args(args.split_whitespace());
    c
}

fn json(args: &str) -> Value {
    let out = plan(&format!("{args} --json -")).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn num(v: &Value, key: &str) -> f64 {
    v[key].as_f64().unwrap_or_else(|| panic!("{key} in {v}"))
}

#[test]
fn z_power_and_sites_needed_match_scipy() {
    let v = json(&format!("{BASE} --test z --target-power 0.8"));
    assert!(
        (num(&v, "power") - Z_POWER).abs() < NONCENTRAL_REF_ABS,
        "{v}"
    );
    assert_eq!(v["k_needed"].as_u64(), Some(K_NEEDED));
    let rows = v["table"].as_array().unwrap();
    assert!(rows
        .iter()
        .any(|r| r["k"] == 20 && (num(r, "power") - Z_POWER).abs() < NONCENTRAL_REF_ABS));
    assert!(v["cautions"].as_array().unwrap().len() >= 3);
    let v = json(&format!("{BASE} --test z --target-power 0.8 --solve n"));
    assert_eq!(v["n_needed"].as_f64(), Some(N_NEEDED));
    assert!(v["k_needed"].is_null());
}

#[test]
fn kh_power_is_simulated_with_a_seed_and_the_f_approximation_matches_scipy() {
    let args = format!("{BASE} --simulate 500 --seed 9");
    let a = json(&args);
    let b = json(&args);
    assert_eq!(a["power"], b["power"], "same seed, same answer");
    assert!((num(&a, "power_f_approximation") - F_POWER).abs() < NONCENTRAL_REF_ABS);
    let sim = &a["simulation"];
    assert_eq!(sim["simulations"], 500);
    let se = num(sim, "monte_carlo_se");
    assert!((num(&a, "power") - F_POWER).abs() < 5.0 * se + 0.05, "{a}");
    let c = json(&format!("{BASE} --simulate 500 --seed 10"));
    assert_ne!(a["power"], c["power"], "another seed, another stream");
}

#[test]
fn unreachable_target_says_so() {
    let v = json("--measure effect --variance 0.05 --k 10 --tau2 0.5 --moderator-sd 1 --moderator-effect 0.01 --test z --target-power 0.8 --max-k 200");
    assert!(v["k_needed"].is_null());
    let notes = v["notes"].to_string();
    assert!(notes.contains("up to 200"), "{notes}");
}

#[test]
fn terminal_report_and_curve() {
    let dir = TempDir::new().unwrap();
    let svg = dir.path().join("curve.svg");
    let png = dir.path().join("curve.png");
    let out = plan(&format!(
        "{BASE} --test z --target-power 0.8 --curve {}",
        svg.display()
    ))
    .output()
    .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    // One answer for k, with the method it comes from (issue 22).
    assert!(
        text.contains("Sites needed for power 0.8\n  k = 33, from the noncentral chi-square"),
        "{text}"
    );
    assert!(text.contains("\nCautions\n") && text.contains("observational"));
    let s = std::fs::read_to_string(&svg).unwrap();
    assert!(s.starts_with("<svg") || s.contains("<svg"));
    plan(&format!(
        "{BASE} --simulate 100 --curve {} -q",
        png.display()
    ))
    .assert()
    .success()
    .stdout("");
    let bytes = std::fs::read(&png).unwrap();
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
}

#[test]
fn bad_input_names_the_flag_and_exits_2() {
    for (args, flag) in [
        ("--measure slope --k 20 --tau2 0.02 --share 0.5 --moderator-effect 0.2", "--variance"),
        ("--measure r --k 20 --tau2 0.02 --share 0.5 --moderator-effect 0.2", "--n"),
        ("--measure r --k 20 --n 50 --variance 0.1 --tau2 0.02 --share 0.5 --moderator-effect 0.2", "--variance"),
        ("--measure r --k 2 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2", "--k"),
        ("--measure r --k 20 --n 50 --tau2 -1 --share 0.5 --moderator-effect 0.2", "--tau2"),
        ("--measure r --k 20 --n 50 --tau2 0.02 --share 1.5 --moderator-effect 0.2", "--share"),
        ("--measure r --k 20 --n 50 --tau2 0.02 --share 0.01 --moderator-effect 0.2", "--share"),
        ("--measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --alpha 5", "--alpha"),
        ("--measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --test z --seed 3", "--seed"),
        ("--measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --target-power 0.01", "--target-power"),
        ("--measure effect --variance 0.1 --k 20 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --target-power 0.8 --solve n", "--solve"),
        ("--measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --curve c.jpg", "--curve"),
        ("--measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --simulate 5", "--simulate"),
        ("--measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-sd 1 --moderator-effect 0.2", "--moderator-sd"),
        ("--measure r --k 20 --n 50 --tau2 0.02 --moderator-effect 0.2", "--moderator-sd"),
    ] {
        let out = plan(args).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{args}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(flag), "{args}: {err}");
        assert!(!err.contains("panicked"), "{args}: {err}");
    }
}

#[test]
fn enormous_noncentrality_gives_power_one_not_a_failure() {
    // λ = 49·1e9 is far beyond the Poisson mixture's range; the z power uses
    // the identical normal form there, Φ(δ − z) + Φ(−δ − z) = 1 to double precision.
    let v = json("--measure effect --variance 1e-9 --k 50 --tau2 0 --moderator-sd 1 --moderator-effect 1 --test z --target-power 0.8");
    assert_eq!(num(&v, "power"), 1.0);
    assert_eq!(v["k_needed"].as_u64(), Some(3));
    // Under kh the F approximation is not computed there; the simulated
    // search starts at the planned k and steps down to 3 within its bound.
    let v = json("--measure effect --variance 1e-9 --k 50 --tau2 0 --moderator-sd 1 --moderator-effect 1 --simulate 100 --target-power 0.8");
    assert!(v["k_needed"].is_null());
    let c = &v["k_needed_simulated"];
    assert_eq!(c["k"].as_u64(), Some(3), "{c}");
    assert!(c["evaluated"].as_array().unwrap().len() <= 10);
}

/// scipy 1.16.3 (power_values.py): z power for r, k 40, n 100, τ² 0, and the
/// numeric moderator np.linspace(-1, 1, 40) scaled to SD 1, effect 0.05.
const Z_POWER_VALUES: f64 = 0.8676480514753485;

#[test]
fn moderator_values_from_a_file() {
    let dir = TempDir::new().unwrap();
    let path = dir.path().join("x.txt");
    let raw: Vec<f64> = (0..40).map(|i| -1.0 + 2.0 * i as f64 / 39.0).collect();
    let ss: f64 = raw.iter().map(|x| x * x).sum();
    let sd = (ss / 39.0).sqrt();
    let mut text = String::from("planned_x\n");
    for x in &raw {
        text.push_str(&format!("{:?}\n", x / sd));
    }
    std::fs::write(&path, text).unwrap();
    let base = format!(
        "--measure r --k 40 --n 100 --tau2 0 --moderator-effect 0.05 --test z --moderator-values {}",
        path.display()
    );
    let v = json(&base);
    assert!(
        (num(&v, "power") - Z_POWER_VALUES).abs() < NONCENTRAL_REF_ABS,
        "{v}"
    );
    assert_eq!(v["notes"].as_array().unwrap().len(), 0);
    // Another k repeats the values, and says so.
    let v = json(&base.replace("--k 40", "--k 80"));
    assert!(v["notes"].to_string().contains("repeated"));
    // Bad files name the flag and the line.
    std::fs::write(&path, "x\n1\n2\nabc\n").unwrap();
    let out = plan(&base).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("--moderator-values") && err.contains("line 4"),
        "{err}"
    );
    std::fs::write(&path, "2\n2\n2\n").unwrap();
    let out = plan(&base).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--moderator-values"));
    let missing = dir.path().join("none.txt");
    let out = plan(&base.replace(&path.display().to_string(), &missing.display().to_string()))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    // The output may not overwrite the values file.
    std::fs::write(&path, "1\n2\n3\n").unwrap();
    let out = plan(&format!("{base} --json {}", path.display()))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert_eq!(std::fs::read_to_string(&path).unwrap(), "1\n2\n3\n");
}

/// scipy 1.16.3 (power_values.py): r, n = 30, 60, 120 repeated in order,
/// τ² = 0.01, share 0.5, β = 0.3, k = 10.
const Z_POWER_N_LIST: f64 = 0.8066457369324039;

#[test]
fn a_list_of_site_sizes() {
    let base =
        "--measure r --k 10 --n 30,60,120 --tau2 0.01 --share 0.5 --moderator-effect 0.3 --test z";
    let v = json(base);
    assert!(
        (num(&v, "power") - Z_POWER_N_LIST).abs() < NONCENTRAL_REF_ABS,
        "{v}"
    );
    assert_eq!(v["n_sites"], serde_json::json!([30.0, 60.0, 120.0]));
    assert!(v["n"].is_null());
    assert!(v["notes"].to_string().contains("repeated"));
    for (args, flag) in [
        (base.replace("30,60,120", "30,abc"), "--n"),
        (base.replace("30,60,120", "30,2"), "--n"),
        (format!("{base} --target-power 0.8 --solve n"), "--solve"),
    ] {
        let out = plan(&args).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{args}");
        assert!(
            String::from_utf8_lossy(&out.stderr).contains(flag),
            "{args}"
        );
    }
}

#[test]
fn z_test_simulated_beside_the_analytic_power() {
    let v = json(&format!("{BASE} --test z --simulate 2000 --seed 4"));
    // The headline power stays the exact one; the simulation sits beside it.
    assert!(
        (num(&v, "power") - Z_POWER).abs() < NONCENTRAL_REF_ABS,
        "{v}"
    );
    assert!((num(&v, "power_analytic") - Z_POWER).abs() < NONCENTRAL_REF_ABS);
    let sim = &v["simulation"];
    assert_eq!(sim["simulations"], 2000);
    assert_eq!(sim["seed"], 4);
    let (p, se) = (num(sim, "power"), num(sim, "monte_carlo_se"));
    assert!(se > 0.0 && se < 0.02, "{sim}");
    // REML's τ̂² is noisy at k = 20, so the realised z rate may differ from the
    // τ²-known figure a little beyond Monte-Carlo error.
    assert!((p - Z_POWER).abs() < 5.0 * se + 0.03, "{v}");
    assert!(json(&format!("{BASE} --test z"))["simulation"].is_null());
    let text = plan(&format!("{BASE} --test z --simulate 500"))
        .output()
        .unwrap();
    let text = String::from_utf8(text.stdout).unwrap();
    assert!(
        text.contains("analytic     0.595")
            && text.contains("simulated ")
            && text.contains("Monte-Carlo SE"),
        "{text}"
    );
    // The old spelling still works.
    let a = json(&format!("{BASE} --test z --simulations 300 --seed 2"));
    let b = json(&format!("{BASE} --test z --simulate 300 --seed 2"));
    assert_eq!(a, b);
}

#[test]
fn kh_side_by_side_and_default_simulation_count() {
    let v = json(BASE);
    assert_eq!(v["simulation"]["simulations"], 2000);
    assert!((num(&v, "power_analytic") - F_POWER).abs() < NONCENTRAL_REF_ABS);
    assert_eq!(v["power"], v["simulation"]["power"]);
}

fn run_with_threads(args: &str, threads: &str) -> Vec<u8> {
    let out = plan(&format!("{args} --json -"))
        .env("RAYON_NUM_THREADS", threads)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // Not a terminal: no progress bar on stderr.
    assert!(
        out.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    out.stdout
}

#[test]
fn the_answer_does_not_depend_on_the_number_of_threads() {
    for args in [
        format!("{BASE} --test z --simulate 1100 --seed 7"),
        format!("{BASE} --simulate 600 --seed 7 --target-power 0.7"),
    ] {
        let one = run_with_threads(&args, "1");
        let two = run_with_threads(&args, "2");
        assert_eq!(one, two, "{args}");
    }
}

#[test]
fn kh_k_needed_is_confirmed_by_simulation() {
    let v = json(&format!(
        "{BASE} --simulate 1000 --seed 3 --target-power 0.8"
    ));
    let approx = v["k_needed"].as_u64().unwrap() as usize;
    let c = &v["k_needed_simulated"];
    let evaluated = c["evaluated"].as_array().unwrap();
    assert!(!evaluated.is_empty() && evaluated.len() <= 10, "{c}");
    assert_eq!(c["max_evaluations"], 10);
    // The search starts at the approximate k.
    assert_eq!(evaluated[0]["k"].as_u64(), Some(approx as u64));
    let k = c["k"].as_u64().unwrap();
    let at = |j: u64| {
        evaluated
            .iter()
            .find(|e| e["k"].as_u64() == Some(j))
            .map(|e| num(e, "power"))
    };
    assert!(at(k).unwrap() >= 0.8, "{c}");
    assert_eq!(c["bracketed"], true, "{c}");
    assert!(at(k - 1).unwrap() < 0.8, "{c}");
    // The simulated crossing is near the approximate one here (F ≈ 0.807 at k = 35).
    assert!((k as i64 - approx as i64).abs() <= 4, "{c}");
    let text = String::from_utf8(
        plan(&format!(
            "{BASE} --simulate 1000 --seed 3 --target-power 0.8"
        ))
        .output()
        .unwrap()
        .stdout,
    )
    .unwrap();
    // One answer (the simulated k) and the approximation as its check.
    assert!(
        text.contains(&format!(
            "  k = {k}, from simulation (1000 data sets per k, seed 3"
        )) && text.contains(&format!(
            "  check: the noncentral F approximation gives k = {approx}"
        )),
        "{text}"
    );
    assert_eq!(v["k_needed_answer"]["k"].as_u64(), Some(k), "{v}");
    assert_eq!(v["k_needed_answer"]["method"], "simulation");
    assert_eq!(
        v["k_needed_answer"]["check_k"].as_u64(),
        Some(approx as u64)
    );
    // The z test has no such search.
    assert!(json(&format!(
        "{BASE} --test z --simulate 300 --target-power 0.8"
    ))["k_needed_simulated"]
        .is_null());
}

#[test]
fn each_bad_value_exits_2_naming_its_flag() {
    let ok = "--measure r --k 20 --n 50 --tau2 0.02 --share 0.5 --moderator-effect 0.2 --test z";
    for (from, to, flag) in [
        ("--tau2 0.02", "--tau2 -0.01", "--tau2"),
        ("--n 50", "--n 3", "--n"),
        ("--n 50", "--n 2", "--n"),
        ("--measure r", "--measure smd", ""),
        ("--k 20", "--k 2", "--k"),
        ("--k 20", "--k 1", "--k"),
        ("--test z", "--test z --target-power 0", "--target-power"),
        ("--test z", "--test z --target-power 1", "--target-power"),
        ("--test z", "--test z --target-power 1.2", "--target-power"),
        ("--test z", "--test z --target-power -0.5", "--target-power"),
        ("--test z", "--test z --alpha 0", "--alpha"),
        ("--test z", "--test z --alpha 1", "--alpha"),
        ("--test z", "--test z --alpha -0.05", "--alpha"),
        ("--test z", "--test z --seed 3", "--seed"),
        ("--test z", "--test z --simulate 0", "--simulate"),
    ] {
        if flag.is_empty() {
            // smd at n = 50 is fine; n = 3 is below its 4.
            let args = ok.replace(from, to).replace("--n 50", "--n 3");
            let out = plan(&args).output().unwrap();
            assert_eq!(out.status.code(), Some(2), "{args}");
            assert!(
                String::from_utf8_lossy(&out.stderr).contains("--n"),
                "{args}"
            );
            assert!(json(&ok.replace(from, to).replace("--n 50", "--n 4"))["power"].is_number());
            continue;
        }
        let args = ok.replace(from, to);
        assert_ne!(args, ok);
        let out = plan(&args).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{args}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(flag), "{args}: {err}");
        assert!(!err.contains("panicked"), "{args}: {err}");
    }
    // The same plan with good values runs.
    assert!(json(ok)["power"].is_number());
}

#[test]
fn power_curve_marks_the_solved_k_on_the_target_line_and_no_simulation_when_none_ran() {
    use crate::plots::parse_svg;
    let dir = TempDir::new().unwrap();
    let out = dir.path().join("power.svg");
    let o = plan(&format!(
        "{BASE} --test z --target-power 0.8 --json - --curve"
    ))
    .arg(&out)
    .output()
    .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["k_needed"].as_u64(), Some(K_NEEDED));
    let svg = parse_svg(&std::fs::read(&out).unwrap());
    // The curve's points: one filled dot per row of the table, in k order.
    let dots: Vec<(f64, f64)> = svg
        .iter()
        .filter(|e| e.tag == "circle" && e.attr("fill") == Some("#0072B2"))
        .map(|e| (e.num("cx"), e.num("cy")))
        .collect();
    let table = v["table"].as_array().unwrap();
    assert_eq!(dots.len(), table.len());
    let at = |k: u64| {
        let i = table
            .iter()
            .position(|r| r["k"].as_u64() == Some(k))
            .unwrap();
        (dots[i], num(&table[i], "power"))
    };
    // The diamond: centred at the solved k's column, on the target power's row
    // (the power axis is linear: read it off two points of the curve).
    let diamond = svg
        .iter()
        .find(|e| e.tag == "polygon" && e.attr("fill") == Some("#D55E00"))
        .expect("the solved k is marked")
        .points();
    let cx = diamond.iter().map(|p| p.0).sum::<f64>() / 4.0;
    let cy = diamond.iter().map(|p| p.1).sum::<f64>() / 4.0;
    let ((p1, pow1), (p2, pow2)) = (at(3), at(K_NEEDED));
    assert!((cx - p2.0).abs() < 0.01, "{cx} vs {}", p2.0);
    let y_target = p1.1 + (0.8 - pow1) / (pow2 - pow1) * (p2.1 - p1.1);
    assert!((cy - y_target).abs() < 0.05, "{cy} vs {y_target}");
    assert!(crate::plots::has_text(
        &svg,
        &format!("k needed = {K_NEEDED}")
    ));
    // Nothing was simulated: no open circles and no key entry for them.
    assert!(!svg
        .iter()
        .any(|e| e.tag == "circle" && e.attr("stroke") == Some("#009E73")));
    assert!(!crate::plots::has_text(&svg, "simulated"));
}
