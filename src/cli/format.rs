//! Numbers for people: SI prefixes and sensible precision.

/// Format `value` with an SI prefix and `digits` significant figures,
/// e.g. `-819.8 nA`.
pub fn si(value: f64, unit: &str, digits: usize) -> String {
    if value == 0.0 {
        return format!("0 {unit}");
    }
    if !value.is_finite() {
        return format!("{value} {unit}");
    }
    const PREFIXES: [(&str, f64); 11] = [
        ("T", 1e12),
        ("G", 1e9),
        ("M", 1e6),
        ("k", 1e3),
        ("", 1.0),
        ("m", 1e-3),
        ("µ", 1e-6),
        ("n", 1e-9),
        ("p", 1e-12),
        ("f", 1e-15),
        ("a", 1e-18),
    ];
    let mag = value.abs();
    let (p, scale) = PREFIXES
        .iter()
        .copied()
        .find(|(_, s)| mag >= *s * 0.9995)
        .unwrap_or(("a", 1e-18));
    let scaled = value / scale;
    let int_digits = (scaled.abs().log10().floor() as i64 + 1).max(1) as usize;
    let decimals = digits.saturating_sub(int_digits);
    format!("{scaled:.decimals$} {p}{unit}")
}

/// Relative residual as a short scientific number.
pub fn residual(v: f64) -> String {
    format!("{v:.1e}")
}

#[cfg(test)]
mod tests {
    use super::si;

    #[test]
    fn prefixes() {
        assert_eq!(si(-8.198e-7, "A", 4), "-819.8 nA");
        assert_eq!(si(1.0, "W", 3), "1.00 W");
        assert_eq!(si(0.0, "W", 3), "0 W");
        assert_eq!(si(2.5e-12, "W/K", 3), "2.50 pW/K");
    }
}
