//! Small root finders used by the physics models.

/// Finds `x` in `[lo, hi]` with `f(x) = 0` by bisection, assuming `f(lo)` and
/// `f(hi)` differ in sign (when they do not, the end nearer zero is returned).
pub fn bisect(mut lo: f64, mut hi: f64, mut f: impl FnMut(f64) -> f64) -> f64 {
    let mut f_lo = f(lo);
    let f_hi = f(hi);
    if f_lo == 0.0 {
        return lo;
    }
    if f_hi == 0.0 {
        return hi;
    }
    if f_lo.signum() == f_hi.signum() {
        return if f_lo.abs() < f_hi.abs() { lo } else { hi };
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        let f_mid = f(mid);
        if f_mid == 0.0 || (hi - lo).abs() <= 1e-15 * (1.0 + mid.abs()) {
            return mid;
        }
        if f_mid.signum() == f_lo.signum() {
            lo = mid;
            f_lo = f_mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Maximises a unimodal `f` on `[lo, hi]` by golden-section search; returns `(x, f(x))`.
pub fn golden_max(mut lo: f64, mut hi: f64, f: impl Fn(f64) -> f64) -> (f64, f64) {
    let ratio = (5f64.sqrt() - 1.0) / 2.0;
    let mut a = hi - ratio * (hi - lo);
    let mut b = lo + ratio * (hi - lo);
    let (mut fa, mut fb) = (f(a), f(b));
    for _ in 0..200 {
        if (hi - lo).abs() <= 1e-13 * (1.0 + hi.abs()) {
            break;
        }
        if fa < fb {
            lo = a;
            a = b;
            fa = fb;
            b = lo + ratio * (hi - lo);
            fb = f(b);
        } else {
            hi = b;
            b = a;
            fb = fa;
            a = hi - ratio * (hi - lo);
            fa = f(a);
        }
    }
    let x = 0.5 * (lo + hi);
    (x, f(x))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bisect_finds_the_square_root_of_two() {
        let x = bisect(0.0, 2.0, |x| x * x - 2.0);
        assert!((x - std::f64::consts::SQRT_2).abs() < 1e-12);
    }

    #[test]
    fn golden_finds_the_top_of_a_parabola() {
        let (x, y) = golden_max(-3.0, 5.0, |x| 4.0 - (x - 1.5) * (x - 1.5));
        assert!((x - 1.5).abs() < 1e-6 && (y - 4.0).abs() < 1e-12);
    }
}
