//! Numbers as text: the one place where pondus decides how a number looks
//! to a person (terminal, report page, plots and the library's own prose).
//! JSON and CSV keep full precision and do not use these.

/// A number for people: 4 decimals, or 3 significant digits in scientific
/// notation when very small or very large; "—" for NaN.
pub fn num(x: f64) -> String {
    if x.is_nan() {
        return "—".into();
    }
    if x == 0.0 {
        return "0.0000".into();
    }
    let a = x.abs();
    if !(1e-4..1e6).contains(&a) {
        format!("{x:.3e}")
    } else {
        format!("{x:.4}")
    }
}

/// An optional number as [`num`], "—" when absent.
pub fn opt_num(x: Option<f64>) -> String {
    x.map(num).unwrap_or_else(|| "—".into())
}

/// A p-value for people: "= 0.0123", or "< 0.0001".
pub fn p(p: f64) -> String {
    if p < 1e-4 {
        "< 0.0001".into()
    } else {
        format!("= {p:.4}")
    }
}

/// A p-value for a table cell: "0.0123", or "< 0.0001".
pub fn p_cell(value: f64) -> String {
    p(value).trim_start_matches("= ").to_string()
}

/// An optional p-value as [`p_cell`], "—" when absent.
pub fn opt_p_cell(x: Option<f64>) -> String {
    x.map(p_cell).unwrap_or_else(|| "—".into())
}

/// A fraction as a percentage with one decimal.
pub fn percent(x: f64) -> String {
    format!("{:.1}%", 100.0 * x)
}

/// An interval as "[low, high]", both ends as [`num`].
pub fn interval(lo: f64, hi: f64) -> String {
    format!("[{}, {}]", num(lo), num(hi))
}

/// A prediction interval as [`interval`], or "none" when there is none
/// (both ends NaN: too few studies for the predictive t distribution).
pub fn pi_interval(lo: f64, hi: f64) -> String {
    if lo.is_nan() && hi.is_nan() {
        "none".into()
    } else {
        interval(lo, hi)
    }
}

/// A confidence level as a percentage: "95%", "97.5%".
pub fn level_pct(level: f64) -> String {
    let pct = 100.0 * level;
    if (pct - pct.round()).abs() < 1e-9 {
        format!("{pct:.0}%")
    } else {
        format!("{pct}%")
    }
}

/// A number in words: at most 3 decimals, trailing zeros dropped.
pub fn short(x: f64) -> String {
    let s = format!("{x:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.into()
    }
}

/// 4 decimals, or 2 in scientific notation when below 0.001 in size.
pub fn short4(x: f64) -> String {
    if x != 0.0 && x.abs() < 0.001 {
        format!("{x:.2e}")
    } else {
        format!("{x:.4}")
    }
}

/// Whole numbers without decimals (degrees of freedom, moderator values),
/// others through `other`.
pub fn whole_or(x: f64, other: impl Fn(f64) -> String) -> String {
    if x.fract() == 0.0 && x.abs() < 1e15 {
        format!("{x:.0}")
    } else {
        other(x)
    }
}

/// Degrees of freedom: whole numbers without decimals, others with 2.
pub fn df(x: f64) -> String {
    whole_or(x, |v| format!("{v:.2}"))
}

/// A moderator value as the user would write it: whole numbers without
/// decimals, others as [`num`].
pub fn value(x: f64) -> String {
    whole_or(x, num)
}

/// A coordinate in a figure's SVG: at most two decimals (a hundredth of a
/// pixel, finer than any screen or a 600-dpi print shows), trailing zeros
/// and a negative zero dropped.
pub fn svg_coord(x: f64) -> String {
    if !x.is_finite() {
        return "0".into();
    }
    let t = format!("{x:.2}");
    let t = t.trim_end_matches('0').trim_end_matches('.');
    if t == "-0" {
        "0".into()
    } else {
        t.to_string()
    }
}

/// A value the user typed, such as a p-value cut point, in the shortest
/// form that reads back as the same number (0.025, 0.0005, 0.5).
pub fn typed(x: f64) -> String {
    format!("{x}")
}

/// A number for a plot: `decimals` places, with a true minus sign (U+2212)
/// and no sign on a value that rounds to zero.
pub fn plot_num(x: f64, decimals: usize) -> String {
    let s = format!("{x:.decimals$}");
    let zero = s
        .trim_start_matches('-')
        .chars()
        .all(|c| c == '0' || c == '.');
    if zero {
        s.trim_start_matches('-').to_string()
    } else if let Some(rest) = s.strip_prefix('-') {
        format!("\u{2212}{rest}")
    } else {
        s
    }
}

/// A number with a fixed number of decimals for a table column ("—" for
/// NaN), never in scientific notation.
pub fn fixed(x: f64, decimals: usize) -> String {
    if x.is_nan() {
        return "—".into();
    }
    format!("{x:.decimals$}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_look_as_documented() {
        assert_eq!(num(0.12345), "0.1235");
        assert_eq!(num(-2.0), "-2.0000");
        assert_eq!(num(0.00001234), "1.234e-5");
        assert_eq!(p(0.04567), "= 0.0457");
        assert_eq!(percent(0.9222), "92.2%");
        assert_eq!(num(0.0), "0.0000");
        assert_eq!(num(1.5e-5), "1.500e-5");
        assert_eq!(num(f64::NAN), "—");
        assert_eq!(pi_interval(f64::NAN, f64::NAN), "none");
        assert_eq!(pi_interval(-1.0, 2.0), "[-1.0000, 2.0000]");
        assert_eq!(p(0.00001), "< 0.0001");
        assert_eq!(p(0.0123), "= 0.0123");
        assert_eq!(p_cell(0.5), "0.5000");
        assert_eq!(percent(0.256), "25.6%");
        assert_eq!(level_pct(0.95), "95%");
        assert_eq!(level_pct(0.975), "97.5%");
        assert_eq!(short(-0.0001), "0");
        assert_eq!(short(1.250), "1.25");
        assert_eq!(short4(0.0005), "5.00e-4");
        assert_eq!(whole_or(3.0, num), "3");
        assert_eq!(whole_or(2.5, |x| format!("{x:.2}")), "2.50");
        assert_eq!(plot_num(-0.001, 2), "0.00");
        assert_eq!(plot_num(-1.5, 1), "\u{2212}1.5");
    }
}
