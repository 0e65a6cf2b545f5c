//! Small numerical tools shared by the observables and the
//! electrostatics.

/// The root of N(x) = `target` for a count N that grows monotonically
/// with x, inside `bracket` = (lo, hi) with N(lo) < target ≤ N(hi) (the
/// caller checks the ends). `count` returns N(x) and its slope dN/dx ≥ 0.
///
/// The bracket keeps N(lo) < target ≤ N(hi) and shrinks at every
/// evaluation; the next point is the Newton step from the last one when
/// that step lands inside the bracket and at least halves the step before
/// it, the bracket's midpoint otherwise (a safeguarded Newton iteration,
/// W. H. Press et al., Numerical Recipes, 3rd ed. 2007, §9.4). It stops
/// when a step moves x by no more than a few units in the last place of
/// max(|x|, `scale`) or the bracket cannot be split further: the root
/// bisection reaches, in about ten evaluations of N instead of sixty.
pub fn bracketed_newton(
    count: impl FnMut(f64) -> (f64, f64),
    target: f64,
    bracket: (f64, f64),
    scale: f64,
) -> f64 {
    let mid = 0.5 * (bracket.0 + bracket.1);
    bracketed_newton_from(count, target, bracket, mid, 4.0 * f64::EPSILON * scale)
}

/// [`bracketed_newton`] with its first point at `start` (inside the
/// bracket) instead of the bracket's midpoint, and stopping once a step
/// moves x by no more than `tolerance` (or by a few units in the last
/// place of x): from a good guess, a few Newton steps instead of the
/// bisections that first bring the midpoint of a wide bracket near the
/// root. With `tolerance` = 4ε·scale it is [`bracketed_newton`]'s test.
/// A count with rounding noise cannot be solved closer than that noise
/// allows: there the Newton steps stop halving and the iteration bisects
/// the noise band down to the last place, so a caller that needs the root
/// only to some accuracy saves those evaluations by asking for it.
pub fn bracketed_newton_from(
    mut count: impl FnMut(f64) -> (f64, f64),
    target: f64,
    bracket: (f64, f64),
    start: f64,
    tolerance: f64,
) -> f64 {
    let (mut lo, mut hi) = bracket;
    let mut x = start.clamp(lo, hi);
    let mut last_step = hi - lo;
    for _ in 0..200 {
        let (n, slope) = count(x);
        if n < target {
            lo = x;
        } else {
            hi = x;
        }
        let newton = x - (n - target) / slope;
        let next =
            if slope > 0.0 && newton > lo && newton < hi && (newton - x).abs() <= 0.5 * last_step {
                newton
            } else {
                0.5 * (lo + hi)
            };
        let step = (next - x).abs();
        if next <= lo || next >= hi || step <= tolerance.max(4.0 * f64::EPSILON * x.abs()) {
            return next.clamp(lo, hi);
        }
        last_step = step;
        x = next;
    }
    x
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A count with a known root: N(x) = x³ + x, target 10 at x = 2, and
    /// a count flat on most of the bracket (a step smoothed over 1e-6),
    /// whose root the midpoint steps must find.
    #[test]
    fn finds_known_roots() {
        let x = bracketed_newton(
            |x| (x * x * x + x, 3.0 * x * x + 1.0),
            10.0,
            (-5.0, 7.0),
            1.0,
        );
        assert!((x - 2.0).abs() < 1e-14, "{x}");
        let w = 1e-6;
        let step = |x: f64| {
            let s = 1.0 / (1.0 + (-(x - 0.3) / w).exp());
            (s, s * (1.0 - s) / w)
        };
        let x = bracketed_newton(step, 0.5, (-10.0, 10.0), 1.0);
        assert!((x - 0.3).abs() < 1e-14, "{x}");
    }

    /// Started next to the root, the same root (to the same 1e-14 as
    /// from the midpoint; identity check against the known root) in fewer
    /// evaluations; started at an end of the bracket, still the root.
    #[test]
    fn started_near_the_root_takes_fewer_evaluations() {
        let mut calls = 0;
        let mut cubic = |x: f64| {
            calls += 1;
            (x * x * x + x, 3.0 * x * x + 1.0)
        };
        let mid = bracketed_newton(&mut cubic, 10.0, (-5.0, 7.0), 1.0);
        let from_mid = calls;
        calls = 0;
        let mut cubic = |x: f64| {
            calls += 1;
            (x * x * x + x, 3.0 * x * x + 1.0)
        };
        let tight = 4.0 * f64::EPSILON;
        let near = bracketed_newton_from(&mut cubic, 10.0, (-5.0, 7.0), 2.01, tight);
        assert!((near - 2.0).abs() < 1e-14 && (mid - 2.0).abs() < 1e-14);
        assert!(calls < from_mid, "{calls} against {from_mid}");
        let end = bracketed_newton_from(
            |x| (x * x * x + x, 3.0 * x * x + 1.0),
            10.0,
            (-5.0, 7.0),
            -5.0,
            tight,
        );
        assert!((end - 2.0).abs() < 1e-14, "{end}");
    }
}
