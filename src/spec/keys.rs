//! Property keys that the code itself knows by name: the titrations the chemistry needs, the
//! viscosity it corrects for temperature, and the properties it derives. Every other property
//! is carried by its key from the spec file and needs no code.

/// Acid value, mg KOH/g (ASTM D974 / ISO 2114 titration).
pub const ACID_VALUE: &str = "acid_value";
/// Hydroxyl value, mg KOH/g (ASTM E1899 / ISO 4629); acidity-corrected when the spec says so.
pub const HYDROXYL_VALUE: &str = "hydroxyl_value";
/// The hydroxyl value as entered, before the acidity correction (kept in the trend file).
pub const HYDROXYL_VALUE_ENTERED: &str = "hydroxyl_value_entered";
/// Viscosity, corrected to the spec temperature where the spec gives one.
pub const VISCOSITY: &str = "viscosity";
/// Number-average molar mass Mn, g/mol, by end-group analysis (derived).
pub const MN: &str = "mn";
/// Number-average degree of polymerisation Xn (derived, needs the recipe).
pub const XN: &str = "xn";
/// Extent of reaction p of the acid groups (derived, needs the recipe).
pub const EXTENT_OF_REACTION: &str = "extent_of_reaction";
/// Hydroxyl equivalent weight, g/eq (derived).
pub const HYDROXYL_EQUIVALENT_WEIGHT: &str = "hydroxyl_equivalent_weight";

/// Keys computed from other properties rather than entered.
pub const DERIVED: [&str; 4] = [MN, HYDROXYL_EQUIVALENT_WEIGHT, XN, EXTENT_OF_REACTION];

/// True for the derived keys.
pub fn is_derived(key: &str) -> bool {
    DERIVED.contains(&key)
}

/// The measured properties a derived property is computed from; empty for a measured key.
pub fn inputs_of(key: &str) -> &'static [&'static str] {
    match key {
        MN => &[ACID_VALUE, HYDROXYL_VALUE],
        HYDROXYL_EQUIVALENT_WEIGHT => &[HYDROXYL_VALUE],
        XN | EXTENT_OF_REACTION => &[ACID_VALUE],
        _ => &[],
    }
}

/// True for derived keys that need the batch recipe (the Carothers relations).
pub fn needs_recipe(key: &str) -> bool {
    matches!(key, XN | EXTENT_OF_REACTION)
}

/// The unit a derived property carries when the spec gives none.
pub fn default_unit(key: &str) -> Option<&'static str> {
    match key {
        MN => Some("g/mol"),
        HYDROXYL_EQUIVALENT_WEIGHT => Some("g/eq"),
        XN | EXTENT_OF_REACTION => Some("1"),
        _ => None,
    }
}

/// The label a derived property carries when the spec gives none.
pub fn default_label(key: &str) -> Option<&'static str> {
    match key {
        MN => Some("Number-average molar mass Mn"),
        XN => Some("Degree of polymerisation Xn"),
        EXTENT_OF_REACTION => Some("Extent of reaction p"),
        HYDROXYL_EQUIVALENT_WEIGHT => Some("Hydroxyl equivalent weight"),
        _ => None,
    }
}

/// True when `key` is usable as a property key: lower-case ASCII letters, digits and '_',
/// starting with a letter, at most 40 characters (it becomes a CSV column name).
pub fn is_valid(key: &str) -> bool {
    key.len() <= 40
        && key.chars().next().is_some_and(|c| c.is_ascii_lowercase())
        && key
            .chars()
            .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_')
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn derived_keys_have_inputs_units_and_labels() {
        for key in DERIVED {
            assert!(is_derived(key));
            assert!(!inputs_of(key).is_empty(), "{key}");
            assert!(default_unit(key).is_some(), "{key}");
            assert!(default_label(key).is_some(), "{key}");
        }
        assert!(!is_derived(ACID_VALUE));
        assert!(inputs_of(VISCOSITY).is_empty());
    }

    #[test]
    fn key_syntax() {
        assert!(is_valid("acid_value"));
        assert!(is_valid("colour2"));
        for bad in ["", "Acid", "2x", "a-b", "a b", &"x".repeat(41)] {
            assert!(!is_valid(bad), "{bad}");
        }
    }
}
