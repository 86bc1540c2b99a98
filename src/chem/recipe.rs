//! Batch recipes (TOML): the charged components and the group totals the chemistry needs.

use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// A batch recipe: what was charged to the reactor.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Recipe {
    /// Free-text name of the charge.
    pub name: String,
    /// The charged components, in any order.
    #[serde(default, rename = "component")]
    pub components: Vec<Component>,
}

/// One charged raw material.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct Component {
    /// Raw material name, used by `adjust --diol/--acid`.
    pub name: String,
    /// Charged mass in kg.
    pub mass_kg: f64,
    /// Molar mass in g/mol.
    pub molar_mass: f64,
    /// Carboxyl equivalents per molecule (an anhydride counts 2).
    #[serde(default)]
    pub acid_groups: u32,
    /// Hydroxyl groups per molecule.
    #[serde(default)]
    pub hydroxyl_groups: u32,
    /// True for a cyclic anhydride: opening the ring forms an ester without releasing water.
    #[serde(default)]
    pub anhydride: bool,
}

impl Component {
    /// Moles charged (mol) = mass (kg) x 1000 / molar mass (g/mol).
    pub fn moles(&self) -> f64 {
        self.mass_kg * 1000.0 / self.molar_mass
    }
    /// Carboxyl equivalents charged (mol).
    pub fn acid_equivalents(&self) -> f64 {
        self.moles() * f64::from(self.acid_groups)
    }
    /// Hydroxyl equivalents charged (mol).
    pub fn hydroxyl_equivalents(&self) -> f64 {
        self.moles() * f64::from(self.hydroxyl_groups)
    }
}

impl Recipe {
    /// Loads and validates a recipe file.
    pub fn load(path: &Path) -> Result<Recipe> {
        let recipe: Recipe = crate::support::tomlfile::load(path)?;
        recipe.validate(&path.display().to_string())?;
        Ok(recipe)
    }

    /// Parses and validates recipe TOML text; `name` is used in messages.
    pub fn parse(name: &str, text: &str) -> Result<Recipe> {
        let recipe: Recipe = crate::support::tomlfile::parse(name, text)?;
        recipe.validate(name)?;
        Ok(recipe)
    }

    /// Checks masses, molar masses and group counts; `file` names the recipe in messages.
    pub fn validate(&self, file: &str) -> Result<()> {
        if self.components.is_empty() {
            return Err(Error::invalid(
                file,
                "the recipe has no [[component]] entries",
                "Add one [[component]] table per charged raw material.",
            ));
        }
        crate::support::text::check_line(&format!("{file}: name"), "recipe name", &self.name, 120)?;
        for (i, c) in self.components.iter().enumerate() {
            let place = format!("{file}: component {} ('{}')", i + 1, c.name.escape_debug());
            if c.name.trim().is_empty() {
                return Err(Error::invalid(
                    &place,
                    "the name is empty",
                    "Give every component a name.",
                ));
            }
            crate::support::text::check_line(&place, "component name", &c.name, 120)?;
            crate::error::positive(&format!("{place}, mass_kg"), c.mass_kg)?;
            crate::error::positive(&format!("{place}, molar_mass"), c.molar_mass)?;
            if c.anhydride && c.acid_groups < 2 {
                return Err(Error::invalid(
                    &place,
                    "an anhydride must count at least 2 acid groups",
                    "Set acid_groups = 2 for a cyclic anhydride such as phthalic anhydride.",
                ));
            }
        }
        let charge = self.charge();
        if charge.acid_eq <= 0.0 {
            return Err(Error::invalid(
                file,
                "no component carries acid groups",
                "A polyester charge needs an acid: set acid_groups on the acid or anhydride.",
            ));
        }
        if charge.hydroxyl_eq <= 0.0 {
            return Err(Error::invalid(
                file,
                "no component carries hydroxyl groups",
                "A polyester charge needs a polyol: set hydroxyl_groups on the glycol or triol.",
            ));
        }
        Ok(())
    }

    /// Group and mass totals of the whole charge.
    pub fn charge(&self) -> Charge {
        let mut ch = Charge::default();
        for c in &self.components {
            ch.mass_kg += c.mass_kg;
            ch.acid_eq += c.acid_equivalents();
            ch.hydroxyl_eq += c.hydroxyl_equivalents();
            ch.molecules += c.moles();
            if c.anhydride {
                ch.anhydride_rings += c.moles();
            }
        }
        ch
    }

    /// The component with the most hydroxyl equivalents (the recipe's main polyol).
    pub fn main_hydroxyl_component(&self) -> Option<&Component> {
        self.components
            .iter()
            .filter(|c| c.hydroxyl_groups > 0)
            .max_by(|a, b| {
                a.hydroxyl_equivalents()
                    .total_cmp(&b.hydroxyl_equivalents())
            })
    }

    /// The component with the most acid equivalents (the recipe's main acid).
    pub fn main_acid_component(&self) -> Option<&Component> {
        self.components
            .iter()
            .filter(|c| c.acid_groups > 0)
            .max_by(|a, b| a.acid_equivalents().total_cmp(&b.acid_equivalents()))
    }

    /// Finds a component by name, ignoring case.
    pub fn component(&self, name: &str) -> Option<&Component> {
        self.components
            .iter()
            .find(|c| c.name.eq_ignore_ascii_case(name.trim()))
    }
}

/// Totals of a charge, in kg and mol.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize)]
pub struct Charge {
    /// Total charged mass (kg).
    pub mass_kg: f64,
    /// Carboxyl equivalents (mol), anhydrides counted twice.
    pub acid_eq: f64,
    /// Hydroxyl equivalents (mol).
    pub hydroxyl_eq: f64,
    /// Monomer molecules (mol).
    pub molecules: f64,
    /// Anhydride rings (mol), each opening without water.
    pub anhydride_rings: f64,
}

#[cfg(test)]
mod tests {
    use super::*;

    const PD: &str = r#"
name = "test charge"
[[component]]
name = "adipic acid"
mass_kg = 146.14
molar_mass = 146.14
acid_groups = 2
[[component]]
name = "diethylene glycol"
mass_kg = 106.12
molar_mass = 106.12
hydroxyl_groups = 2
"#;

    #[test]
    fn charge_totals_count_groups() {
        // First principles: 1 mol adipic acid (2 COOH) + 1 mol DEG (2 OH).
        let r = Recipe::parse("t", PD).unwrap();
        let ch = r.charge();
        approx::assert_relative_eq!(ch.acid_eq, 2000.0 / 1000.0 * 1000.0, max_relative = 1e-12);
        approx::assert_relative_eq!(ch.hydroxyl_eq, 2000.0, max_relative = 1e-12);
        approx::assert_relative_eq!(ch.molecules, 2000.0, max_relative = 1e-12);
        approx::assert_relative_eq!(ch.mass_kg, 252.26, max_relative = 1e-12);
    }

    #[test]
    fn empty_recipe_is_refused() {
        let err = Recipe::parse("t.toml", "name = \"x\"\n").unwrap_err();
        assert!(err.to_string().contains("no [[component]]"));
    }

    #[test]
    fn unknown_key_is_refused_with_line() {
        let text = format!("{PD}colour = 1\n");
        let err = Recipe::parse("t.toml", &text).unwrap_err().to_string();
        assert!(err.contains("t.toml:") && err.contains("colour"), "{err}");
    }

    #[test]
    fn recipe_without_acid_is_refused() {
        let text =
            "name='x'\n[[component]]\nname='g'\nmass_kg=1\nmolar_mass=62.07\nhydroxyl_groups=2\n";
        let err = Recipe::parse("t.toml", text).unwrap_err().to_string();
        assert!(err.contains("no component carries acid groups"), "{err}");
    }

    #[test]
    fn zero_mass_is_refused() {
        let text = PD.replacen("mass_kg = 146.14", "mass_kg = 0", 1);
        let err = Recipe::parse("t.toml", &text).unwrap_err().to_string();
        assert!(err.contains("mass_kg") && err.contains("zero"), "{err}");
    }
}
