//! The physical ranges of the numbers the chemistry accepts, so that a slip of the keyboard
//! (`1e308`, a mass in grams typed as kilograms) is refused instead of computed (issue #13,
//! item 20).

use crate::error::{non_negative, positive, within, Result};

/// The highest acid or hydroxyl value accepted, mg KOH/g. Any resin lies far below; the pure
/// raw materials of polyesters lie below it too: glycerol OHV = 3·56 106/92.09 = 1828, maleic
/// anhydride AV = 2·56 106/98.06 = 1144 (first principles, from the molar masses).
pub const GROUP_VALUE_MAX: f64 = 2000.0;

/// The smallest batch accepted, kg (a pilot reactor; laboratory flasks are weighed in grams).
pub const BATCH_KG_MIN: f64 = 1.0;
/// The largest batch accepted, kg (1000 t, far above any polyester reactor; common practice).
pub const BATCH_KG_MAX: f64 = 1.0e6;

/// Checks an acid or hydroxyl value in mg KOH/g: not negative, at most [`GROUP_VALUE_MAX`].
pub fn group_value(place: &str, value: f64) -> Result<f64> {
    non_negative(place, value)?;
    within(place, value, 0.0, GROUP_VALUE_MAX, "mg KOH/g")
}

/// Checks a batch mass in kg: positive, from [`BATCH_KG_MIN`] to [`BATCH_KG_MAX`].
pub fn batch_mass(place: &str, kg: f64) -> Result<f64> {
    positive(place, kg)?;
    within(place, kg, BATCH_KG_MIN, BATCH_KG_MAX, "kg")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn raw_materials_fit_and_absurd_values_do_not() {
        // Glycerol, first principles: 3 OH · 56 106 mg KOH/mol / 92.094 g/mol.
        assert!(group_value("ohv", 3.0 * 56_106.0 / 92.094).is_ok());
        assert!(group_value("av", 0.0).is_ok());
        for bad in [1e308, f64::INFINITY, 2000.5] {
            assert!(group_value("av", bad).is_err(), "{bad}");
        }
        assert!(group_value("av", -1.0)
            .unwrap_err()
            .to_string()
            .contains("negative"));
        assert!(batch_mass("kg", 8500.0).is_ok());
        for bad in [1e308, 0.5, 2e6] {
            assert!(batch_mass("kg", bad).is_err(), "{bad}");
        }
    }
}
