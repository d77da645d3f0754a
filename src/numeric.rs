//! Small numerical helpers shared by every stage: logarithms of ratios that may leave the
//! double range, log-spaced grids, and double-double arithmetic for the few sums that must be
//! exact beyond double precision. Pure functions, no I/O.

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
/// with exact end points. When `lo` and `hi` have the same decimal digits (1 and 1e6, 2e-3 and
/// 2e3: the ratio is an exact power of ten), point `i` is computed from integers: the digits
/// times `10^q` (parsed, so correctly rounded) times `10^(r / steps)` for the remainder `r`,
/// so a grid meant to pass through 1000 is exactly 1000 and the half-decade points are the
/// nearest doubles to `10^(n + 1/2)` within one rounding of `powf`. Other ranges are computed
/// in logs (any range of doubles works) and rounded to 12 significant digits, which removes the
/// round-off of the power function where the true point is a round number.
pub fn log_spaced(lo: f64, hi: f64, points: usize) -> Vec<f64> {
    let steps = points.saturating_sub(1).max(1) as i64;
    let decade = match (decimal(lo), decimal(hi)) {
        (Some((m1, e1)), Some((m2, e2))) if m1 == m2 => Some((m1, e1, e2 - e1)),
        _ => None,
    };
    let (a, b) = (lo.log10(), hi.log10());
    (0..points)
        .map(|i| match i {
            0 => lo,
            i if i + 1 == points => hi,
            i => match decade {
                Some((digits, exponent, span)) => {
                    let n = span * i as i64;
                    let (q, r) = (n.div_euclid(steps), n.rem_euclid(steps));
                    let base = exact_decimal(digits, exponent + q);
                    if r == 0 {
                        base
                    } else {
                        base * 10f64.powf(r as f64 / steps as f64)
                    }
                }
                None => round_to_12_digits(10f64.powf(a + (b - a) * i as f64 / steps as f64)),
            },
        })
        .collect()
}

/// `points` values from `lo` to `hi`, evenly spaced, with exact end points: each point is the
/// rational `(L (steps - i) + H i) / steps` times a power of ten, from the decimal digits `L`,
/// `H` of the ends, written out to 30 significant digits and parsed (so 0.1..0.5 gives 0.3, not
/// 0.30000000000000004, and 1..10 gives every integer). Ends whose digits do not fit fall back
/// to `lo + (hi - lo) i / steps`.
pub fn linear_spaced(lo: f64, hi: f64, points: usize) -> Vec<f64> {
    let steps = points.saturating_sub(1).max(1) as i128;
    let exact = |i: i128| -> Option<f64> {
        let ((m1, e1), (m2, e2)) = (decimal(lo)?, decimal(hi)?);
        let e = e1.min(e2);
        let scale = |m: u64, by: i64| -> Option<i128> {
            10i128
                .checked_pow(u32::try_from(by).ok()?)?
                .checked_mul(i128::from(m))
        };
        let (l, h) = (scale(m1, e1 - e)?, scale(m2, e2 - e)?);
        let n = l.checked_mul(steps - i)?.checked_add(h.checked_mul(i)?)?;
        // n / steps * 10^e, as decimal digits: n 10^p / steps with p filling 30 digits.
        let p = 30i64
            .saturating_sub(n.checked_ilog10().unwrap_or(0) as i64)
            .max(0);
        let q = n.checked_mul(10i128.checked_pow(u32::try_from(p).ok()?)?)? / steps;
        format!("{q}e{}", e - p).parse().ok()
    };
    (0..points)
        .map(|i| match i {
            0 => lo,
            i if i + 1 == points => hi,
            i => exact(i as i128).unwrap_or_else(|| lo + (hi - lo) * i as f64 / steps as f64),
        })
        .collect()
}

/// The shortest decimal form of a positive finite `x` as `(digits, exponent)`, `x = digits
/// 10^exponent` (read back, this is `x` exactly).
fn decimal(x: f64) -> Option<(u64, i64)> {
    if !(x.is_finite() && x > 0.0) {
        return None;
    }
    let text = format!("{x:e}");
    let (mantissa, exponent) = text.split_once('e')?;
    let exponent: i64 = exponent.parse().ok()?;
    let (int, frac) = mantissa.split_once('.').unwrap_or((mantissa, ""));
    let digits: u64 = format!("{int}{frac}").parse().ok()?;
    Some((digits, exponent - frac.len() as i64))
}

/// The double nearest to `digits 10^exponent` (the parser rounds correctly).
fn exact_decimal(digits: u64, exponent: i64) -> f64 {
    format!("{digits}e{exponent}")
        .parse()
        .unwrap_or(digits as f64 * 10f64.powi(exponent as i32))
}

/// `x` rounded to 12 significant decimal digits: far finer than any grid step, and coarse
/// enough to remove the round-off of the power function.
fn round_to_12_digits(x: f64) -> f64 {
    format!("{x:.11e}").parse().unwrap_or(x)
}

/// Unit round-off of [`DoubleDouble`] arithmetic, taken as 2^-104 per operation (the
/// algorithms below are accurate to a few units of 2^-106; Joldes, Muller and Popescu,
/// ACM Trans. Math. Softw. 44 (2017), from memory). Below about 1e-290 the low word underflows and the
/// accuracy falls towards plain double precision, so callers keep values well above that.
pub const DOUBLE_DOUBLE_EPSILON: f64 = 4.930380657631324e-32;

/// An unevaluated sum `hi + lo` with `|lo| <= ulp(hi) / 2`: about 32 significant digits.
/// Error-free transformations after Dekker (Numer. Math. 18, 224 (1971)) and Knuth (TAOCP
/// vol. 2, 4.2.2); the product uses the fused multiply-add.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct DoubleDouble {
    pub hi: f64,
    pub lo: f64,
}

/// `a + b = s + e` exactly (Knuth's two-sum).
fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let v = s - a;
    (s, (a - (s - v)) + (b - v))
}

/// `a + b = s + e` exactly when `|a| >= |b|` (Dekker's fast two-sum).
fn fast_two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    (s, b - (s - a))
}

impl DoubleDouble {
    pub fn from_f64(x: f64) -> Self {
        Self { hi: x, lo: 0.0 }
    }

    /// The exact product of two doubles.
    pub fn product(a: f64, b: f64) -> Self {
        let p = a * b;
        let (hi, lo) = fast_two_sum(p, a.mul_add(b, -p));
        Self { hi, lo }
    }

    pub fn mul_f64(self, b: f64) -> Self {
        self * Self::from_f64(b)
    }
}

impl std::ops::Add for DoubleDouble {
    type Output = Self;
    fn add(self, other: Self) -> Self {
        let (s, e) = two_sum(self.hi, other.hi);
        let (t, f) = two_sum(self.lo, other.lo);
        let (s, e) = fast_two_sum(s, e + t);
        let (hi, lo) = fast_two_sum(s, e + f);
        Self { hi, lo }
    }
}

impl std::ops::Neg for DoubleDouble {
    type Output = Self;
    fn neg(self) -> Self {
        Self {
            hi: -self.hi,
            lo: -self.lo,
        }
    }
}

impl std::ops::Sub for DoubleDouble {
    type Output = Self;
    fn sub(self, other: Self) -> Self {
        self + -other
    }
}

impl std::ops::Mul for DoubleDouble {
    type Output = Self;
    fn mul(self, other: Self) -> Self {
        let p = self.hi * other.hi;
        let e = self.hi.mul_add(other.hi, -p) + (self.hi * other.lo + self.lo * other.hi);
        let (hi, lo) = fast_two_sum(p, e);
        Self { hi, lo }
    }
}

impl std::ops::Div for DoubleDouble {
    type Output = Self;
    /// Long division with two correction steps.
    fn div(self, other: Self) -> Self {
        let q1 = self.hi / other.hi;
        let r = self - other.mul_f64(q1);
        let q2 = r.hi / other.hi;
        let r = r - other.mul_f64(q2);
        let q3 = r.hi / other.hi;
        let (hi, lo) = fast_two_sum(q1, q2);
        Self { hi, lo } + Self::from_f64(q3)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use num_rational::BigRational;
    use num_traits::Signed;

    fn exact(x: DoubleDouble) -> BigRational {
        BigRational::from_float(x.hi).unwrap_or_default()
            + BigRational::from_float(x.lo).unwrap_or_default()
    }

    /// Reference: exact rational arithmetic (num-rational) on the same inputs; each operation
    /// must be within a few units of 2^-106 of the exact result.
    #[test]
    fn double_double_operations_match_exact_rationals() {
        let values = [
            1.0,
            3.0,
            0.1,
            1e-120,
            7.5e100,
            -2.0 / 3.0,
            6.02214076e23,
            1.380649e-23,
        ];
        for &a in &values {
            for &b in &values {
                let (x, y) = (
                    DoubleDouble::from_f64(a) / DoubleDouble::from_f64(7.0),
                    DoubleDouble::from_f64(b),
                );
                let (ex, ey) = (exact(x), exact(y));
                let cases = [
                    (x + y, &ex + &ey),
                    (x - y, &ex - &ey),
                    (x * y, &ex * &ey),
                    (x / y, &ex / &ey),
                ];
                for (got, want) in cases {
                    let error = (exact(got) - &want).abs();
                    let allowed =
                        BigRational::from_float(4.0 * DOUBLE_DOUBLE_EPSILON).unwrap() * want.abs();
                    assert!(error <= allowed, "{a:e} {b:e}: {got:?}");
                }
            }
        }
        assert_eq!(DoubleDouble::product(3.0, 1.0 / 3.0).hi, 1.0);
    }

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
        // Half decades: every decade exact, the points between it the nearest doubles to
        // 10^(n + 1/2) (sqrt(10) = 3.1622776601683795, the correctly rounded double).
        let half = log_spaced(1.0, 1e6, 13);
        for (i, x) in half.iter().enumerate() {
            if i % 2 == 0 {
                assert_eq!(*x, 10f64.powi(i as i32 / 2));
                assert_eq!(
                    crate::report::csv::number(*x),
                    format!("{}", 10f64.powi(i as i32 / 2))
                );
            } else {
                let want: f64 = format!("{}e{}", 10f64.sqrt(), i / 2).parse().unwrap();
                assert!((x - want).abs() <= 2.0 * f64::EPSILON * want, "{x} {want}");
            }
        }
        assert_eq!(log_spaced(0.01, 1000.0, 11)[4], 1.0);
        assert_eq!(log_spaced(0.01, 1000.0, 11)[10], 1000.0);
        assert_eq!(log_spaced(2e-3, 2e3, 7)[3], 2.0);
        assert_eq!(log_spaced(2.0, 50.0, 3)[1], 10.0);
        assert_eq!(log_spaced(0.01, 1000.0, 11)[2], 0.1);
    }

    #[test]
    fn linear_grids_are_the_nearest_doubles_to_their_decimal_points() {
        assert_eq!(linear_spaced(0.1, 0.5, 5), vec![0.1, 0.2, 0.3, 0.4, 0.5]);
        assert_eq!(
            linear_spaced(1.0, 10.0, 10),
            (1..=10).map(f64::from).collect::<Vec<_>>()
        );
        assert_eq!(linear_spaced(1.0, 2.0, 4)[1], 4.0 / 3.0);
        assert_eq!(
            linear_spaced(0.5, 3.0, 6),
            vec![0.5, 1.0, 1.5, 2.0, 2.5, 3.0]
        );
    }
}
