//! Seeded simulation of `pondus sites --one-stage` beside the two-stage
//! answers of `--fit` (docs/sites.md, "Simulated behaviour of the two
//! routes"): rejection rates at α = 0.05 of the within-site and across-site
//! interaction tests in two invented scenarios.
//!
//! Not a test and not run by CI: `cargo run --release --example
//! simulate_one_stage [REPLICATIONS]` (default 2000 per scenario; about 1 minute). Each
//! replication draws K = 20 sites of 20 to 80 rows (uniform), site means of
//! w w̄_j ~ N(0, 1), w_ij = w̄_j + N(0, 1), a random slope u_j ~ N(0, 0.15²)
//! and errors N(0, 1), and runs the library exactly as `pondus sites --w w
//! --fit --one-stage` does (`sites::from_rows_with_moments`,
//! `sites::stages::run` with REML and Knapp–Hartung, `sites::one_stage::fit`).
//!
//! - **across**: only an across-site interaction: the slope is
//!   0.5 + 0.3·w̄_j + u_j, x ~ N(0, 1) independent of w; y also has
//!   0.2·(w − w̄_j). The within-site tests should reject about 5%.
//! - **within**: only a within-site interaction: y = α_j + (0.5 + u_j)x +
//!   0.3·x(w − w̄_j) + 0.2(w − w̄_j) + e, and inside each site x goes with w
//!   (x = 1 + w̄_j + 0.6(w − w̄_j) + N(0, 0.8²)), so a site's slope of y on x
//!   alone picks up 0.3·x̄_j·cov(x, w)/var(x), which rises with w̄_j: the
//!   site slopes correlate with w̄_j although no across-site interaction
//!   exists. The across-site tests should reject about 5%.
//!
//! Prints a markdown table of rejection rates with Monte Carlo standard
//! errors √(p̂(1 − p̂)/R); a replication whose fit fails counts as not
//! rejecting and is counted.

use pondus::model::tau2::Tau2Method;
use pondus::model::{FitOptions, Inference};
use pondus::result::SiteMeasure;
use pondus::sites::{self, one_stage, RowInput, SitesSettings};
use pondus::support::rng::Xoshiro256StarStar;

const ALPHA: f64 = 0.05;
const K: usize = 20;

#[derive(Clone, Copy, PartialEq)]
enum Scenario {
    Across,
    Within,
}

fn rows(rng: &mut Xoshiro256StarStar, sc: Scenario) -> String {
    let mut s = String::from("site,x,w,y\n");
    for j in 0..K {
        let n = 20 + (rng.next_open01() * 61.0) as usize;
        let wbar = rng.next_normal();
        let u = 0.15 * rng.next_normal();
        let alpha = rng.next_normal();
        let w: Vec<f64> = (0..n).map(|_| wbar + rng.next_normal()).collect();
        // The model's w̄_j is the site's sample mean.
        let wm = w.iter().sum::<f64>() / n as f64;
        for &wi in &w {
            let dw = wi - wm;
            let (x, y) = match sc {
                Scenario::Across => {
                    let x = rng.next_normal();
                    let y = alpha + (0.5 + 0.3 * wm + u) * x + 0.2 * dw + rng.next_normal();
                    (x, y)
                }
                Scenario::Within => {
                    let x = 1.0 + wbar + 0.6 * dw + 0.8 * rng.next_normal();
                    let y = alpha + (0.5 + u) * x + 0.3 * x * dw + 0.2 * dw + rng.next_normal();
                    (x, y)
                }
            };
            s.push_str(&format!("s{j},{x},{wi},{y}\n"));
        }
    }
    s
}

/// p-values: [one-stage within, two-stage within, one-stage across, two-stage across].
fn replicate(rng: &mut Xoshiro256StarStar, sc: Scenario) -> Option<[f64; 4]> {
    let data = rows(rng, sc);
    let settings = SitesSettings {
        site: "site".into(),
        x: "x".into(),
        y: "y".into(),
        w: Some("w".into()),
        covariates: vec![],
        robust: false,
        center_within: false,
        decimal: None,
        effect: SiteMeasure::Slope,
        treat: None,
        event: None,
    };
    let (mut report, moments) = sites::from_rows_with_moments(
        "sim",
        RowInput::Stream(Box::new(data.as_bytes())),
        &settings,
    )
    .ok()?;
    let options = FitOptions {
        method: Tau2Method::Reml,
        inference: Inference::Kh,
        level: 0.95,
    };
    report.stages = Some(sites::stages::run(&report, options, &[]).ok()?);
    let os = one_stage::fit(&report, &moments, &Default::default(), 0.95).ok()?;
    let st = report.stages.as_ref()?;
    let two_within = st.within.as_ref()?.coefficients.first()?.contrast.test.p;
    let two_across = st
        .across
        .as_ref()?
        .coefficients
        .iter()
        .find(|c| c.term == "mean_w")?
        .contrast
        .test
        .p;
    Some([
        os.within_interaction?.p,
        two_within,
        os.across_interaction?.p,
        two_across,
    ])
}

fn main() {
    let reps: usize = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(2000);
    println!("| scenario | test | rejection rate (MC SE) |");
    println!("| --- | --- | --- |");
    for (name, sc, seed) in [
        ("across only", Scenario::Across, 20261203u64),
        (
            "within only, x and w related in sites",
            Scenario::Within,
            20261204u64,
        ),
    ] {
        let mut rng = Xoshiro256StarStar::seed_from_u64(seed);
        let mut hits = [0usize; 4];
        let mut failed = 0;
        for _ in 0..reps {
            match replicate(&mut rng, sc) {
                Some(p) => {
                    for (h, p) in hits.iter_mut().zip(p) {
                        *h += usize::from(p < ALPHA);
                    }
                }
                None => failed += 1,
            }
        }
        let labels = [
            "one-stage b3 (within)",
            "two-stage pooled product term (within)",
            "one-stage b4 (across)",
            "two-stage slopes on mean w (across)",
        ];
        for (label, h) in labels.iter().zip(hits) {
            let p = h as f64 / reps as f64;
            println!(
                "| {name} | {label} | {:.3} ({:.3}) |",
                p,
                (p * (1.0 - p) / reps as f64).sqrt()
            );
        }
        println!("| {name} | replications whose fit failed | {failed} of {reps} |");
    }
}
