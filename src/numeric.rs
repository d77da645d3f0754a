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
    }
}
