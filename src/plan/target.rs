//! The smallest number of sites, or per-site n, whose quick (closed-form)
//! power reaches a target.

use super::{Plan, PlanMeasure};

/// The smallest k in [3, max_k] whose quick power reaches `target`, or None.
/// A scan, not a bisection: with a two-level moderator the rounding of
/// share·k makes power not quite monotone in k.
pub fn solve_k(plan: &Plan, target: f64, max_k: usize) -> Option<usize> {
    (3..=max_k).find(|&k| plan.with_k(k).quick_power().is_some_and(|p| p >= target))
}

/// The smallest whole per-site n in [4, max_n] whose quick power reaches
/// `target`, or None. Bisection: power rises with n (v_i falls, so every
/// weight and the information rise).
pub fn solve_n(plan: &Plan, target: f64, max_n: f64) -> Option<f64> {
    let ok = |n: f64| plan.with_n(n).quick_power().is_some_and(|p| p >= target);
    let (mut lo, mut hi) = (plan.measure.min_n(), max_n.floor());
    if !ok(hi) {
        return None;
    }
    if ok(lo) {
        return Some(lo);
    }
    while hi - lo > 1.0 {
        let mid = ((lo + hi) / 2.0).floor();
        if ok(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(hi)
}

/// The largest power any number of participants per site can give at this
/// k: v_i → 0, so w_i → 1/τ² (infinite when τ² = 0).
pub fn power_ceiling_in_n(plan: &Plan) -> Option<f64> {
    if plan.tau2 == 0.0 {
        return Some(1.0);
    }
    let p = Plan {
        measure: PlanMeasure::Effect { variance: 0.0 },
        ..plan.clone()
    };
    p.quick_power()
}

#[cfg(test)]
mod tests {
    use super::super::tests::plan;
    use super::*;
    use crate::plan::ModeratorDesign;

    #[test]
    fn solving_for_k_and_n() {
        let p = plan(
            PlanMeasure::R,
            20,
            50.0,
            0.02,
            ModeratorDesign::TwoLevel { share: 0.5 },
            0.2,
            0.05,
        );
        let k = solve_k(&p, 0.8, 1000).unwrap();
        assert!(p.with_k(k).z_power().unwrap() >= 0.8);
        assert!((3..k).all(|j| p.with_k(j).z_power().is_none_or(|q| q < 0.8)));
        let n = solve_n(&p, 0.8, 1e6);
        // τ² = 0.02 caps the information at k/(4τ²) = 250, λ ≤ 10: reachable.
        let n = n.unwrap();
        assert!(p.with_n(n).z_power().unwrap() >= 0.8);
        assert!(p.with_n(n - 1.0).z_power().unwrap() < 0.8);
        // A large τ² makes 80% unreachable with k = 20 at any n.
        let hard = Plan {
            tau2: 0.5,
            ..p.clone()
        };
        assert!(solve_n(&hard, 0.8, 1e6).is_none());
        assert!(power_ceiling_in_n(&hard).unwrap() < 0.8);
        assert!(solve_k(&Plan { beta: 0.001, ..p }, 0.8, 1000).is_none());
    }
}
