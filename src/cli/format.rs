//! Numbers for people: SI prefixes and sensible precision.

/// Format `value` with an SI prefix and `digits` significant figures,
/// e.g. `-819.8 nA`.
pub fn si(value: f64, unit: &str, digits: usize) -> String {
    qheat::output::format_si(value, unit, digits)
}

/// A plain number for people: shortest decimals, whole numbers without a
/// point, no negative zero (the text CSV cells use).
pub fn number(value: f64) -> String {
    qheat::output::format_number(value)
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
