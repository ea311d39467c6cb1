//! Renderers of a [`FitReport`](crate::result::FitReport): terminal text,
//! JSON and a per-study CSV. Pure functions of the result, no computation.

pub mod diagnostics;
pub mod figure;
pub mod html;
pub mod interpret;
pub mod json;
pub mod multilevel;
pub mod sites;
pub mod table;
pub mod text;

/// A number for people: 4 decimals, or 3 significant digits in scientific
/// notation when very small or very large.
pub fn format_num(x: f64) -> String {
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

/// A p-value for people: "= 0.0123", or "< 0.0001".
pub fn format_p(p: f64) -> String {
    if p < 1e-4 {
        "< 0.0001".into()
    } else {
        format!("= {p:.4}")
    }
}

/// A fraction as a percentage with one decimal.
pub fn format_percent(x: f64) -> String {
    format!("{:.1}%", 100.0 * x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers() {
        assert_eq!(format_num(0.12345), "0.1235");
        assert_eq!(format_num(-2.0), "-2.0000");
        assert_eq!(format_num(0.0), "0.0000");
        assert_eq!(format_num(0.00001234), "1.234e-5");
        assert_eq!(format_p(0.00001), "< 0.0001");
        assert_eq!(format_p(0.04567), "= 0.0457");
        assert_eq!(format_percent(0.9222), "92.2%");
    }
}
