//! Double-double arithmetic: a value as an unevaluated sum hi + lo of two
//! doubles, about 32 significant digits. Used only where a few sums must be
//! more accurate than double precision (residuals for iterative refinement).
//!
//! Error-free transformations from Dekker (1971), "A floating-point technique
//! for extending the available precision", Numer. Math. 18, 224–242, and
//! Knuth's TwoSum (TAOCP vol. 2, §4.2.2). Products use Dekker's splitting,
//! not a fused multiply-add, so results are the same on every platform.

/// hi + lo with |lo| ≤ ulp(hi)/2.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct DoubleDouble {
    pub(crate) hi: f64,
    pub(crate) lo: f64,
}

/// a + b = s + e exactly.
fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    let e = (a - (s - bb)) + (b - bb);
    (s, e)
}

/// Splits a into two halves of 26 significant bits each.
fn split(a: f64) -> (f64, f64) {
    const SPLITTER: f64 = 134_217_729.0; // 2^27 + 1
    let t = SPLITTER * a;
    let hi = t - (t - a);
    (hi, a - hi)
}

/// a · b = p + e exactly (barring overflow).
fn two_product(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    let (a_hi, a_lo) = split(a);
    let (b_hi, b_lo) = split(b);
    let e = ((a_hi * b_hi - p) + a_hi * b_lo + a_lo * b_hi) + a_lo * b_lo;
    (p, e)
}

impl DoubleDouble {
    pub(crate) const ZERO: DoubleDouble = DoubleDouble { hi: 0.0, lo: 0.0 };

    pub(crate) fn from_f64(value: f64) -> Self {
        DoubleDouble { hi: value, lo: 0.0 }
    }

    fn renormalise(hi: f64, lo: f64) -> Self {
        let (hi, lo) = two_sum(hi, lo);
        DoubleDouble { hi, lo }
    }

    pub(crate) fn add(self, other: DoubleDouble) -> Self {
        let (s, e) = two_sum(self.hi, other.hi);
        Self::renormalise(s, e + self.lo + other.lo)
    }

    pub(crate) fn neg(self) -> Self {
        DoubleDouble {
            hi: -self.hi,
            lo: -self.lo,
        }
    }

    pub(crate) fn mul(self, other: DoubleDouble) -> Self {
        let (p, e) = two_product(self.hi, other.hi);
        Self::renormalise(p, e + self.hi * other.lo + self.lo * other.hi)
    }

    pub(crate) fn mul_f64(self, other: f64) -> Self {
        self.mul(DoubleDouble::from_f64(other))
    }

    pub(crate) fn to_f64(self) -> f64 {
        self.hi + self.lo
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sums_keep_what_doubles_lose() {
        // 1 + 1e-20 − 1 is 0 in double precision but 1e-20 here.
        let one = DoubleDouble::from_f64(1.0);
        let tiny = DoubleDouble::from_f64(1e-20);
        let back = one.add(tiny).add(one.neg());
        assert_eq!(back.to_f64(), 1e-20);
    }

    #[test]
    fn products_are_exact_to_the_low_part() {
        // (1 + 2^-30)^2 = 1 + 2^-29 + 2^-60: the last term needs the low part.
        let a = DoubleDouble::from_f64(1.0 + 2f64.powi(-30));
        let square = a.mul(a);
        assert_eq!(square.hi, 1.0 + 2f64.powi(-29));
        assert_eq!(square.lo, 2f64.powi(-60));
    }
}
