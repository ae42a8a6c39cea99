//! A correctly rounded natural logarithm for the NumPy-compatible generator.
//!
//! NumPy's legacy Gaussian calls the C library's `log`, which on glibc returns the correctly
//! rounded result (to within 0.52 ulp by its own documentation, so in all but rare hard cases).
//! The `libm` crate's `log` is accurate to 1 ulp only, which changed about one value in twenty of
//! `RandomState.standard_normal` in the last bit. This function computes `ln x` in double-double
//! arithmetic (about 100 bits: Dekker's exact products, Knuth's exact sums, the series
//! `ln m = 2 atanh((m - 1) / (m + 1))`) and rounds once, using only IEEE 754 basic operations, so
//! it gives the same bits on every target.

#[derive(Debug, Clone, Copy)]
struct Dd {
    hi: f64,
    lo: f64,
}

#[inline]
fn two_sum(a: f64, b: f64) -> Dd {
    let s = a + b;
    let bb = s - a;
    Dd { hi: s, lo: (a - (s - bb)) + (b - bb) }
}

#[inline]
fn quick_two_sum(a: f64, b: f64) -> Dd {
    let s = a + b;
    Dd { hi: s, lo: b - (s - a) }
}

#[inline]
fn split(a: f64) -> (f64, f64) {
    let c = 134_217_729.0 * a; // 2^27 + 1 (Veltkamp)
    let hi = c - (c - a);
    (hi, a - hi)
}

#[inline]
fn two_prod(a: f64, b: f64) -> Dd {
    let p = a * b;
    let (ah, al) = split(a);
    let (bh, bl) = split(b);
    Dd { hi: p, lo: ((ah * bh - p) + ah * bl + al * bh) + al * bl }
}

#[inline]
fn add(x: Dd, y: Dd) -> Dd {
    let s = two_sum(x.hi, y.hi);
    let t = two_sum(x.lo, y.lo);
    let u = quick_two_sum(s.hi, s.lo + t.hi);
    quick_two_sum(u.hi, u.lo + t.lo)
}

#[inline]
fn mul(x: Dd, y: Dd) -> Dd {
    let p = two_prod(x.hi, y.hi);
    quick_two_sum(p.hi, p.lo + (x.hi * y.lo + x.lo * y.hi))
}

#[inline]
fn mul_f(x: Dd, b: f64) -> Dd {
    let p = two_prod(x.hi, b);
    quick_two_sum(p.hi, p.lo + x.lo * b)
}

fn div(x: Dd, y: Dd) -> Dd {
    let q1 = x.hi / y.hi;
    let r = add(x, mul_f(y, -q1));
    let q2 = r.hi / y.hi;
    let r = add(r, mul_f(y, -q2));
    let q3 = r.hi / y.hi;
    let q = quick_two_sum(q1, q2);
    add(q, Dd { hi: q3, lo: 0.0 })
}

/// ln 2 as a double-double (0x3FE62E42FEFA39EF + 0x3C7ABC9E3B39803F).
const LN2: Dd = Dd { hi: f64::from_bits(0x3FE6_2E42_FEFA_39EF), lo: f64::from_bits(0x3C7A_BC9E_3B39_803F) };

/// The natural logarithm of a positive, finite `x`, correctly rounded (barring cases within
/// about 2^-100 relative of a rounding boundary). Other inputs follow `libm::log`.
pub(crate) fn ln(x: f64) -> f64 {
    if x.is_nan() || x <= 0.0 || x.is_infinite() {
        return libm::log(x);
    }
    let (mut x, mut k) = (x, 0i64);
    if x < f64::MIN_POSITIVE {
        x *= 18_014_398_509_481_984.0; // 2^54
        k -= 54;
    }
    let bits = x.to_bits();
    k += ((bits >> 52) & 0x7ff) as i64 - 1023;
    let mut m = f64::from_bits((bits & 0x000f_ffff_ffff_ffff) | 0x3ff0_0000_0000_0000);
    if m > core::f64::consts::SQRT_2 {
        m *= 0.5;
        k += 1;
    }
    if k == 0 && m == 1.0 {
        return 0.0;
    }
    // m - 1 is exact for m in [1/sqrt 2, sqrt 2] (Sterbenz); m + 1 is kept exact as a sum.
    let s = div(Dd { hi: m - 1.0, lo: 0.0 }, two_sum(m, 1.0));
    let s2 = mul(s, s);
    // 2 atanh(s) = 2 s sum_{j >= 0} s^(2j) / (2j + 1); |s| <= 0.1716, so 24 terms reach 2^-120.
    let mut p = div(Dd { hi: 1.0, lo: 0.0 }, Dd { hi: 49.0, lo: 0.0 });
    for j in (0..24).rev() {
        let c = div(Dd { hi: 1.0, lo: 0.0 }, Dd { hi: (2 * j + 1) as f64, lo: 0.0 });
        p = add(mul(p, s2), c);
    }
    let lnm = mul_f(mul(s, p), 2.0);
    let r = add(mul_f(LN2, k as f64), lnm);
    r.hi + r.lo
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn agrees_with_libm_to_one_ulp_and_exact_points() {
        assert_eq!(ln(1.0), 0.0);
        assert_eq!(ln(core::f64::consts::E), 1.0);
        assert_eq!(ln(2.0), core::f64::consts::LN_2);
        assert_eq!(ln(10.0), core::f64::consts::LN_10);
        let mut x = 1e-300f64;
        while x < 1e300 {
            let a = ln(x);
            let b = libm::log(x);
            assert!((a.to_bits() as i64 - b.to_bits() as i64).abs() <= 1, "{x}: {a} vs {b}");
            x *= 1.37;
        }
    }
}
