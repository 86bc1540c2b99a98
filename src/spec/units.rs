//! Units of measured properties: the conversions resinlot knows between the units a lab
//! enters and the units a spec or a customer asks for.

use rust_decimal::Decimal;

/// Factor converting a value in unit `from` to unit `to`; None when not a known conversion.
pub fn unit_factor(from: &str, to: &str) -> Option<Decimal> {
    let norm = |u: &str| {
        u.trim()
            .to_ascii_lowercase()
            .replace(['·', '.', ' ', '*'], "")
    };
    let (f, t) = (norm(from), norm(to));
    if f == t {
        return Some(Decimal::ONE);
    }
    // Viscosity: 1 cP = 1 mPa·s; 1 Pa·s = 1000 mPa·s (SI; ISO 80000-4).
    let mpas = |u: &str| match u {
        "mpas" | "cp" | "cps" => Some(Decimal::ONE),
        "pas" => Some(Decimal::from(1000)),
        _ => None,
    };
    match (mpas(&f), mpas(&t)) {
        (Some(a), Some(b)) => Some(a / b),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::unit_factor;
    use rust_decimal::Decimal;

    /// SI (ISO 80000-4): 1 cP = 1 mPa·s, 1 Pa·s = 1000 mPa·s.
    #[test]
    fn viscosity_units_convert() {
        assert_eq!(unit_factor("cP", "mPa·s"), Some(Decimal::ONE));
        assert_eq!(unit_factor("Pa·s", "mPa s"), Some(Decimal::from(1000)));
        assert_eq!(unit_factor("mPa.s", "Pa*s"), Some(Decimal::new(1, 3)));
        assert_eq!(unit_factor("mg KOH/g", "mg KOH/g"), Some(Decimal::ONE));
        assert_eq!(unit_factor("mg KOH/g", "mPa·s"), None);
    }
}
