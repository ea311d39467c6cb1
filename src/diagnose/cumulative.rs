//! Cumulative meta-analysis: the average effect as the studies accumulate
//! in the order of a column.

use super::OrderColumn;
use crate::dist;
use crate::error::{Error, Result};
use crate::input::number::{is_missing, parse_cell, Cell};
use crate::model::{inference, FitOptions};
use crate::result::{AtValue, CumulativeStep, Interval, SortOrder};
use crate::support::flag::Flag;

/// The steps of a cumulative meta-analysis.
///
/// # Formula
/// Studies are taken in `order`; step j pools the first j with the model
/// without moderators (the user's τ² estimator, inference and level,
/// [`crate::model::fit_parts`]): its average effect, SE, confidence interval,
/// the p of the average effect, τ² and I². Step 1 is the first study alone:
/// its effect with the normal interval y ± z·√v and z test, no τ².
/// A step whose fit has no answer (for example two identical effects under
/// Knapp–Hartung) has null values.
pub fn steps(
    y: &[f64],
    v: &[f64],
    order: &[usize],
    values: &[AtValue],
    labels: &[String],
    options: FitOptions,
) -> Vec<CumulativeStep> {
    use rayon::prelude::*;
    let z = dist::normal_quantile(1.0 - (1.0 - options.level) / 2.0);
    (1..=order.len())
        .into_par_iter()
        .map(|j| {
            let last = order[j - 1];
            let mut s = CumulativeStep {
                study: labels[last].clone(),
                value: values[last].clone(),
                k: j,
                estimate: None,
                se: None,
                ci: Interval::new(None, None),
                p: None,
                tau2: None,
                i2: None,
            };
            if j == 1 {
                let se = v[last].sqrt();
                s.estimate = Some(y[last]);
                s.se = Some(se);
                s.ci = Interval::new(Some(y[last] - z * se), Some(y[last] + z * se));
                s.p = Some(dist::normal_two_sided_p(y[last] / se));
                return s;
            }
            let ys: Vec<f64> = order[..j].iter().map(|&i| y[i]).collect();
            let vs: Vec<f64> = order[..j].iter().map(|&i| v[i]).collect();
            let ones = vec![1.0; j];
            if let Ok(f) = super::refit(&ys, &vs, std::borrow::Cow::Borrowed(&ones), 1, options) {
                let pr = inference::predict(&f, &[1.0]);
                let c = inference::coefficients(&f);
                if pr.se.is_finite() && c[0].p.is_finite() {
                    s.estimate = Some(pr.estimate);
                    s.se = Some(pr.se);
                    s.ci = Interval::new(Some(pr.ci_low), Some(pr.ci_high));
                    s.p = Some(c[0].p);
                    s.tau2 = Some(f.tau2.estimate);
                    s.i2 = Some(super::i2(&f));
                }
            }
            s
        })
        .collect()
}

/// The study order of `--cumulative-by`: ascending numbers when every cell
/// is a number, otherwise ascending text by Unicode code points; ties keep
/// file order. Returns the order, each study's value and "numeric" or "text".
///
/// # Errors
/// [`Error::Usage`] naming the file, line and column of a missing cell, or
/// of the cells that are not numbers in a column mostly of numbers.
pub fn order(col: &OrderColumn, source: &str) -> Result<(Vec<usize>, Vec<AtValue>, SortOrder)> {
    if let Some(i) = col.cells.iter().position(|c| is_missing(c)) {
        return Err(Error::usage(
            Flag::CumulativeBy,
            format!(
                "{source}: {}: the ordering value is missing for a study in the \
                 model; fill it in, or order by another column",
                col.places.cell(col.lines[i], &col.header)
            ),
        ));
    }
    let numbers: Option<Vec<f64>> = col
        .cells
        .iter()
        .map(|c| match parse_cell(c) {
            Cell::Value(x) => Some(x),
            _ => None,
        })
        .collect();
    // A column of numbers with a few that are not is a typo, as for a
    // moderator: refused with the rows rather than sorted as text.
    let bad: Vec<usize> = (0..col.cells.len())
        .filter(|&i| !matches!(parse_cell(&col.cells[i]), Cell::Value(_)))
        .collect();
    if numbers.is_none() && bad.len() * 2 < col.cells.len() {
        let shown: Vec<String> = bad
            .iter()
            .take(5)
            .map(|&i| {
                format!(
                    "{} ('{}')",
                    col.places.at(col.lines[i], &col.header),
                    col.cells[i]
                )
            })
            .collect();
        return Err(Error::usage(
            Flag::CumulativeBy,
            format!(
                "{source}: column '{}' is mostly numbers but not at {}; fix those cells so the \
                 studies are ordered by number (a column of labels is ordered as text)",
                col.header,
                shown.join(", ")
            ),
        ));
    }
    let mut idx: Vec<usize> = (0..col.cells.len()).collect();
    match numbers {
        Some(x) => {
            idx.sort_by(|&a, &b| x[a].total_cmp(&x[b]));
            Ok((
                idx,
                x.into_iter().map(AtValue::Number).collect(),
                SortOrder::Numeric,
            ))
        }
        None => {
            let t: Vec<String> = col.cells.iter().map(|c| c.trim().to_string()).collect();
            idx.sort_by(|&a, &b| t[a].cmp(&t[b]));
            Ok((
                idx,
                t.into_iter().map(AtValue::Level).collect(),
                SortOrder::Text,
            ))
        }
    }
}
