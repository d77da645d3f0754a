//! Small numerical helpers shared by every stage: logarithms of ratios that may leave the
//! double range, and log-spaced grids. Pure functions, no I/O.

/// `ln(a / b)` for positive finite `a`, `b`, also where the ratio itself leaves the double
/// range (1e300 / 1e-300 is 1381 in logs, but inf as a ratio).
pub fn log_ratio(a: f64, b: f64) -> f64 {
    let ratio = a / b;
    if ratio.is_normal() {
        ratio.ln()
    } else {
        a.ln() - b.ln()
    }
}

/// `points` values from `lo` to `hi` (both positive normal), evenly spaced in the logarithm,
/// with exact end points and each inner value rounded to 12 significant digits, so that a grid
/// meant to pass through 1000 writes 1000, not 999.9999999999995. Computed in logs, so any
/// range of doubles works.
pub fn log_spaced(lo: f64, hi: f64, points: usize) -> Vec<f64> {
    let (a, b) = (lo.log10(), hi.log10());
    (0..points)
        .map(|i| match i {
            0 => lo,
            i if i + 1 == points => hi,
            i => round_to_12_digits(10f64.powf(a + (b - a) * i as f64 / (points - 1) as f64)),
        })
        .collect()
}

/// `x` rounded to 12 significant decimal digits: far finer than any grid step, and coarse
/// enough to remove the round-off of the power function.
fn round_to_12_digits(x: f64) -> f64 {
    format!("{x:.11e}").parse().unwrap_or(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_ratio_survives_overflowing_ratios() {
        // 1e300 / 1e-300 = 1e600: ln = 600 ln 10 = 1381.55... (ln 10 = 2.302585092994046).
        assert!((log_ratio(1e300, 1e-300) - 600.0 * std::f64::consts::LN_10).abs() < 1e-12);
        assert_eq!(log_ratio(3.0, 3.0), 0.0);
    }

    #[test]
    fn grids_hit_round_values_and_extreme_ranges() {
        assert_eq!(
            log_spaced(1.0, 1e6, 7),
            vec![1.0, 10.0, 100.0, 1000.0, 1e4, 1e5, 1e6]
        );
        let wide = log_spaced(1e-300, 1e300, 3);
        assert_eq!(wide, vec![1e-300, 1.0, 1e300]);
    }
}
