//! One-dimensional root finding for the quantile functions and the noncentrality interval.
//!
//! Every inverse in this module (t, χ², F, beta and studentized-range quantiles, the
//! Steiger λ interval) is "find t where a monotone function crosses a target". Doing
//! that in one place — bracket by doubling steps, then Brent's method — keeps each
//! caller to a few lines and gives every inverse the same guaranteed convergence:
//! Brent's method never leaves the bracket and falls back to bisection when
//! interpolation misbehaves, so no input makes it diverge or loop forever.

/// How the unknown is parameterised, which fixes its search range and tolerance.
#[derive(Clone, Copy, Debug)]
pub(crate) enum SolveScale {
    /// t is a logarithm (t = ln x, or a logit): search t ∈ [−745, 745] to an absolute
    /// accuracy of about 2e−16 plus 4ε|t|, i.e. x to about 1e−15 relative.
    Log,
}

impl SolveScale {
    /// The search range of t.
    pub(crate) fn bounds(self) -> (f64, f64) {
        match self {
            SolveScale::Log => (-745.0, 745.0),
        }
    }

    fn tolerance(self) -> (f64, f64) {
        match self {
            SolveScale::Log => (2e-16, 4.0 * f64::EPSILON),
        }
    }
}

/// Replaces infinities by large finite values so Brent's interpolation stays finite.
fn finite(v: f64) -> f64 {
    if v.is_infinite() {
        v.signum() * 1e300
    } else {
        v
    }
}

/// Root of an increasing function g, searched from `t0` with first step `step`.
///
/// Steps double until g changes sign (or the range of `scale` ends, which is then
/// returned), and Brent's method finishes. Returns NaN if g(t0) is NaN.
pub(crate) fn solve_increasing<G: Fn(f64) -> f64>(g: G, t0: f64, step: f64, scale: SolveScale) -> f64 {
    let (tmin, tmax) = scale.bounds();
    let (tol_abs, tol_rel) = scale.tolerance();
    let f = |t: f64| finite(g(t));
    let t0 = t0.clamp(tmin, tmax);
    let g0 = f(t0);
    if g0.is_nan() {
        return f64::NAN;
    }
    if g0 == 0.0 {
        return t0;
    }
    let mut step = step.abs().max(1e-3);
    let (mut near, mut g_near) = (t0, g0);
    let dir = if g0 < 0.0 { 1.0 } else { -1.0 };
    for _ in 0..200 {
        let t = (near + dir * step).clamp(tmin, tmax);
        let gt = f(t);
        if gt.is_nan() {
            return f64::NAN;
        }
        if (gt >= 0.0) == (dir > 0.0) {
            let (lo, hi, glo, ghi) = if dir > 0.0 { (near, t, g_near, gt) } else { (t, near, gt, g_near) };
            return zeroin(&f, lo, hi, glo, ghi, tol_abs, tol_rel);
        }
        if t == tmin || t == tmax {
            return t;
        }
        near = t;
        g_near = gt;
        step *= 2.0;
    }
    near
}

/// Brent's method (Brent 1973, *Algorithms for Minimization without Derivatives*,
/// ch. 4; the `zeroin` of Forsythe, Malcolm & Moler 1977) on a bracket [a, b] with
/// f(a)·f(b) ≤ 0. Stops when the bracket is below tol_abs + tol_rel·|t|.
pub(crate) fn zeroin<F: Fn(f64) -> f64>(f: &F, a: f64, b: f64, fa: f64, fb: f64, tol_abs: f64, tol_rel: f64) -> f64 {
    let (mut a, mut b, mut fa, mut fb) = (a, b, fa, fb);
    if fa == 0.0 {
        return a;
    }
    if fb == 0.0 {
        return b;
    }
    let mut c = a;
    let mut fc = fa;
    let mut d = b - a;
    let mut e = d;
    for _ in 0..300 {
        if (fb > 0.0) == (fc > 0.0) {
            c = a;
            fc = fa;
            d = b - a;
            e = d;
        }
        if fc.abs() < fb.abs() {
            a = b;
            b = c;
            c = a;
            fa = fb;
            fb = fc;
            fc = fa;
        }
        let tol = tol_rel.max(2.0 * f64::EPSILON) * b.abs() + 0.5 * tol_abs;
        let xm = 0.5 * (c - b);
        if xm.abs() <= tol || fb == 0.0 {
            return b;
        }
        if e.abs() >= tol && fa.abs() > fb.abs() {
            let s = fb / fa;
            let (mut p, mut q);
            if a == c {
                p = 2.0 * xm * s;
                q = 1.0 - s;
            } else {
                let q0 = fa / fc;
                let r = fb / fc;
                p = s * (2.0 * xm * q0 * (q0 - r) - (b - a) * (r - 1.0));
                q = (q0 - 1.0) * (r - 1.0) * (s - 1.0);
            }
            if p > 0.0 {
                q = -q;
            } else {
                p = -p;
            }
            if 2.0 * p < (3.0 * xm * q - (tol * q).abs()).min((e * q).abs()) {
                e = d;
                d = p / q;
            } else {
                d = xm;
                e = d;
            }
        } else {
            d = xm;
            e = d;
        }
        a = b;
        fa = fb;
        b += if d.abs() > tol { d } else { tol.copysign(xm) };
        fb = f(b);
        if fb.is_nan() {
            return f64::NAN;
        }
    }
    b
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_cube_root() {
        let t = solve_increasing(|t: f64| (3.0 * t).exp() - 2.0, 0.0, 1.0, SolveScale::Log);
        assert!((t.exp() - 2f64.cbrt()).abs() < 1e-15);
    }

    #[test]
    fn returns_range_end_when_no_sign_change() {
        let t = solve_increasing(|_| -1.0, 0.0, 1.0, SolveScale::Log);
        assert_eq!(t, 745.0);
        assert!(solve_increasing(|_| f64::NAN, 0.0, 1.0, SolveScale::Log).is_nan());
    }
}
