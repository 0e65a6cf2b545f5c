//! Gauss–Legendre rule on one interval, with an end-clustering map.
//!
//! On [a, b] the nodes are ω = a + (b − a) φ(t) with φ(t) = 3t² − 2t³ and
//! t the Gauss–Legendre nodes of [0, 1]; the weights carry
//! φ'(t) = 6t(1 − t). The map is a polynomial, so a smooth integrand stays
//! smooth; a square-root edge √(ω − a), which Ξ has where a lead subband
//! opens or closes, becomes t·√(3 − 2t) and is smooth too, so the rule
//! converges fast on every piece between two subband edges. The nodes never
//! touch a or b (ω = 0 and the band tops, where D^r is singular).

/// Gauss–Legendre nodes and weights on [0, 1], by Newton's method on the
/// Legendre polynomial P_n from the Chebyshev guess (converges to rounding
/// in a few steps for every n used here).
pub(super) fn gauss_legendre_unit(n: usize) -> Vec<(f64, f64)> {
    let mut out = Vec::with_capacity(n);
    for i in 0..n {
        let mut x = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut dp = 1.0;
        for _ in 0..100 {
            let (p, d) = legendre(n, x);
            dp = d;
            let dx = p / d;
            x -= dx;
            if dx.abs() < 1e-16 {
                break;
            }
        }
        let (_, d) = legendre(n, x);
        if d.is_finite() {
            dp = d;
        }
        let w = 2.0 / ((1.0 - x * x) * dp * dp);
        out.push((0.5 * (1.0 - x), 0.5 * w));
    }
    out.sort_by(|a, b| a.0.total_cmp(&b.0));
    out
}

/// P_n(x) and P_n'(x) by the three-term recurrence.
fn legendre(n: usize, x: f64) -> (f64, f64) {
    let (mut p0, mut p1) = (1.0, x);
    for k in 2..=n {
        let kf = k as f64;
        let p2 = ((2.0 * kf - 1.0) * x * p1 - (kf - 1.0) * p0) / kf;
        p0 = p1;
        p1 = p2;
    }
    let p = if n == 0 { 1.0 } else { p1 };
    let d = n as f64 * (x * p - p0) / (x * x - 1.0);
    (p, d)
}

/// Nodes and weights on [a, b] through the end-clustering map.
pub(super) fn mapped_rule(unit: &[(f64, f64)], a: f64, b: f64) -> Vec<(f64, f64)> {
    let h = b - a;
    unit.iter()
        .map(|&(t, w)| {
            let phi = t * t * (3.0 - 2.0 * t);
            (a + h * phi, h * w * 6.0 * t * (1.0 - t))
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rule_integrates_polynomials_and_root_edges() {
        let unit = gauss_legendre_unit(10);
        let wsum: f64 = unit.iter().map(|p| p.1).sum();
        assert!((wsum - 1.0).abs() < 1e-14, "{wsum}");
        // Degree 19 is exact for 10 nodes on [0, 1].
        let m: f64 = unit.iter().map(|&(t, w)| w * t.powi(19)).sum();
        assert!((m - 0.05).abs() < 1e-14, "{m}");
        // ∫_0^1 √ω dω = 2/3: the map makes the edge smooth (an unmapped
        // 10-point rule is off by about 1e-4 here).
        let r = mapped_rule(&unit, 0.0, 1.0);
        let s: f64 = r.iter().map(|&(x, w)| w * x.sqrt()).sum();
        assert!((s - 2.0 / 3.0).abs() < 1e-9, "{}", s - 2.0 / 3.0);
    }
}
