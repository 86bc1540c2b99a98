//! One end-group analysis: titration results (and optionally the recipe) to every derived figure.

use serde::Serialize;

use crate::chem::gel::{self, GelMargin, GelPoints, GelState};
use crate::chem::hydroxyl_method::AcidityCorrection;
use crate::chem::recipe::Recipe;
use crate::chem::stepgrowth as chem;
use crate::error::{non_negative, positive, Error, Result};

/// Titration results of one sample, as entered.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Titration {
    /// Acid value (mg KOH/g).
    pub av: f64,
    /// Hydroxyl value as entered (mg KOH/g): a raw result when `acidity_correction` applies.
    pub ohv: f64,
    /// How AV enters the raw result: added (acetylation, OHV − AV measured), none, or
    /// subtracted (ASTM E1899, OHV + AV measured); see [`crate::chem::hydroxyl_method`].
    pub acidity_correction: AcidityCorrection,
    /// End groups per molecule (2 for linear chains).
    pub functionality: f64,
    /// Expanded uncertainty of AV (k = 2), mg KOH/g.
    pub u_av: Option<f64>,
    /// Expanded uncertainty of the entered OHV (k = 2), mg KOH/g.
    pub u_ohv: Option<f64>,
    /// Solids (non-volatile) mass fraction of the measured sample, when measured on a solution.
    pub solids_fraction: Option<f64>,
}

impl Titration {
    /// Checks every number before any work is done.
    pub fn validate(&self) -> Result<()> {
        crate::chem::ranges::group_value("acid value", self.av)?;
        crate::chem::ranges::group_value("hydroxyl value", self.ohv)?;
        positive("functionality", self.functionality)?;
        if let Some(u) = self.u_av {
            non_negative("acid value uncertainty", u)?;
        }
        if let Some(u) = self.u_ohv {
            non_negative("hydroxyl value uncertainty", u)?;
        }
        if self.u_av.is_some() != self.u_ohv.is_some() {
            return Err(Error::invalid(
                "acid and hydroxyl value uncertainties",
                "only one of the two uncertainties is given",
                "Give both expanded uncertainties (k = 2) for the uncertainty of Mn, or neither.",
            ));
        }
        if let Some(s) = self.solids_fraction {
            positive("solids fraction", s)?;
            if s > 1.0 {
                return Err(Error::invalid(
                    "solids fraction",
                    format!("{s} is above 1"),
                    "Give the non-volatile content as a fraction, e.g. 0.65 for 65 %.",
                ));
            }
        }
        if self.av + chem::corrected_hydroxyl_value(self.ohv, self.av, self.acidity_correction)
            <= 0.0
        {
            return Err(Error::invalid(
                "acid value and hydroxyl value",
                "both are zero, so there are no end groups to count",
                "Enter the titrated values of the sample.",
            ));
        }
        Ok(())
    }
}

/// Everything derived from one titration; `None` (JSON null) where it cannot be computed.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Analysis {
    /// Acid value on the basis used for the calculation (solids basis when converted).
    pub acid_value: f64,
    /// Hydroxyl value after the acidity correction, same basis.
    pub hydroxyl_value_corrected: f64,
    /// The acidity correction applied to the entered hydroxyl value: add, none or subtract.
    pub acidity_correction: AcidityCorrection,
    /// End-group Mn (g/mol).
    pub mn: Option<f64>,
    /// Expanded uncertainty of Mn (k = 2), g/mol, when both input uncertainties are known.
    pub mn_uncertainty: Option<f64>,
    /// Hydroxyl equivalent weight (g/eq).
    pub hydroxyl_equivalent_weight: Option<f64>,
    /// End groups per molecule used for Mn.
    pub functionality: f64,
    /// Recipe-based figures, when a recipe was given.
    #[serde(flatten)]
    pub recipe: Option<RecipeFigures>,
}

/// Figures that need the batch recipe.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RecipeFigures {
    /// Recipe name.
    pub recipe_name: String,
    /// AV of the charge before reaction (mg KOH/g).
    pub initial_acid_value: f64,
    /// OHV of the charge before reaction (mg KOH/g).
    pub initial_hydroxyl_value: f64,
    /// Extent of reaction of the acid groups, with the water balance.
    pub extent_of_reaction: f64,
    /// Extent of reaction of the hydroxyl groups.
    pub extent_of_reaction_hydroxyl: f64,
    /// Naive 1 - AV/AV0 for comparison.
    pub extent_of_reaction_naive: f64,
    /// Water of condensation released (kg, for the recipe's charge).
    pub water_released_kg: f64,
    /// Batch mass after water loss (kg).
    pub batch_mass_kg: f64,
    /// OHV expected with no glycol loss (mg KOH/g).
    pub predicted_hydroxyl_value: f64,
    /// Hydroxyl equivalents missing against the prediction (mol; negative = surplus).
    pub hydroxyl_shortfall_mol: f64,
    /// The same as mass of the main polyol (kg).
    pub polyol_lost_kg: Option<f64>,
    /// Name of the main polyol.
    pub main_polyol: Option<String>,
    /// Minority / majority group ratio.
    pub stoichiometric_ratio: f64,
    /// Which group is in the minority: "acid" or "hydroxyl".
    pub minority_group: &'static str,
    /// Carothers average functionality.
    pub average_functionality: f64,
    /// Carothers Xn.
    pub xn_carothers: Option<f64>,
    /// Carothers gel point (minority extent), when f_avg > 2.
    pub gel_point_carothers: Option<f64>,
    /// Statistical gel point (minority extent), Stockmayer's condition for any mix of
    /// functionalities, monofunctional units included.
    pub gel_point_statistical: Option<f64>,
    /// Both gel points in full: extents of both groups, f_w of both sides, the acid value at
    /// the statistical gel point, or why there is none.
    pub gel: GelPoints,
    /// Extent of the minority groups now.
    pub extent_of_reaction_minority: f64,
    /// Mn from batch mass / molecules (g/mol).
    pub mn_recipe: Option<f64>,
    /// (end-group Mn - recipe Mn) / recipe Mn, in percent.
    pub mn_disagreement_percent: Option<f64>,
}

impl RecipeFigures {
    /// Where this titration stands against the statistical gel point, with the GEL WARNING
    /// text when it is near or past it ([`gel::gel_state`], [`gel::gel_warning`]).
    pub fn gel_guard(&self, acid_value: f64, margin: GelMargin) -> (GelState, Option<String>) {
        let p = self.extent_of_reaction_minority;
        let state = gel::gel_state(p, acid_value, &self.gel, margin);
        (
            state,
            gel::gel_warning("the batch", p, state, &self.gel, margin),
        )
    }
}

/// Runs the whole analysis; validates first.
pub fn analyse(t: &Titration, recipe: Option<&Recipe>) -> Result<Analysis> {
    t.validate()?;
    let basis = t.solids_fraction.unwrap_or(1.0);
    let av = chem::to_solids_basis(t.av, basis);
    let ohv_entered = chem::to_solids_basis(t.ohv, basis);
    let ohv = chem::corrected_hydroxyl_value(ohv_entered, av, t.acidity_correction);
    let mn = chem::mn_end_group(av, ohv, t.functionality);
    let mn_uncertainty = match (mn, t.u_av, t.u_ohv) {
        (Some(mn), Some(ua), Some(uo)) => Some(chem::mn_expanded_uncertainty(
            mn,
            av,
            ua / basis,
            ohv_entered,
            uo / basis,
            t.acidity_correction,
        )),
        _ => None,
    };
    let recipe = match recipe {
        Some(r) => Some(recipe_figures(r, av, ohv, mn)?),
        None => None,
    };
    Ok(Analysis {
        acid_value: av,
        hydroxyl_value_corrected: ohv,
        acidity_correction: t.acidity_correction,
        mn,
        mn_uncertainty,
        hydroxyl_equivalent_weight: chem::hydroxyl_equivalent_weight(ohv),
        functionality: t.functionality,
        recipe,
    })
}

fn recipe_figures(r: &Recipe, av: f64, ohv: f64, mn: Option<f64>) -> Result<RecipeFigures> {
    let ch = r.charge();
    let av0 = chem::initial_acid_value(&ch);
    let pr = chem::progress_at(&ch, av)
        .map_err(|e| e.at(|place| format!("{place} (recipe '{}')", r.name)))?;
    let f_avg = chem::average_functionality(&ch);
    let p_min = pr.p_minority(&ch);
    let shortfall = chem::hydroxyl_shortfall_eq(&pr, ohv);
    let main = r.main_hydroxyl_component();
    let mn_recipe = chem::mn_recipe(&pr);
    let gel = crate::chem::gel::gel_points(r);
    Ok(RecipeFigures {
        recipe_name: r.name.clone(),
        initial_acid_value: av0,
        initial_hydroxyl_value: chem::initial_hydroxyl_value(&ch),
        extent_of_reaction: pr.p_acid,
        extent_of_reaction_hydroxyl: pr.p_hydroxyl,
        extent_of_reaction_naive: chem::naive_extent(av, av0),
        water_released_kg: pr.water_kg,
        batch_mass_kg: pr.batch_mass_kg,
        predicted_hydroxyl_value: pr.predicted_hydroxyl_value,
        hydroxyl_shortfall_mol: shortfall,
        polyol_lost_kg: main
            .map(|c| shortfall / f64::from(c.hydroxyl_groups) * c.molar_mass / 1000.0),
        main_polyol: main.map(|c| c.name.clone()),
        stoichiometric_ratio: chem::stoichiometric_ratio(&ch),
        minority_group: if ch.acid_eq <= ch.hydroxyl_eq {
            "acid"
        } else {
            "hydroxyl"
        },
        average_functionality: f_avg,
        xn_carothers: chem::xn_carothers(p_min, f_avg),
        gel_point_carothers: chem::gel_point_carothers(f_avg),
        gel_point_statistical: gel.statistical.map(|g| g.p_minority),
        gel,
        extent_of_reaction_minority: p_min,
        mn_recipe,
        mn_disagreement_percent: match (mn, mn_recipe) {
            (Some(a), Some(b)) => Some((a - b) / b * 100.0),
            _ => None,
        },
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn t(av: f64, ohv: f64) -> Titration {
        Titration {
            av,
            ohv,
            acidity_correction: false.into(),
            functionality: 2.0,
            u_av: Some(0.05),
            u_ohv: Some(0.8),
            solids_fraction: None,
        }
    }

    #[test]
    fn end_group_only() {
        // OHV 56.1, AV 0 → Mn 2000 (definition of the hydroxyl value).
        let a = analyse(&t(0.0, 56.1), None).unwrap();
        assert_relative_eq!(a.mn.unwrap(), 2000.0, max_relative = 1e-12);
        assert!(a.recipe.is_none());
    }

    #[test]
    fn negative_input_is_refused() {
        assert!(analyse(&t(-1.0, 56.1), None).is_err());
        assert!(analyse(&t(f64::NAN, 56.1), None).is_err());
        assert!(analyse(&t(0.0, 0.0), None).is_err());
    }

    #[test]
    fn recipe_mn_agrees_with_end_group_mn_without_loss() {
        // First principles: when the measured OHV equals the predicted one, the end groups
        // count exactly the molecules of a linear charge, so both Mn agree.
        let r = Recipe::parse(
            "t",
            "name='t'\n[[component]]\nname='aa'\nmass_kg=146.14\nmolar_mass=146.14\nacid_groups=2\n\
             [[component]]\nname='deg'\nmass_kg=116.732\nmolar_mass=106.12\nhydroxyl_groups=2\n",
        )
        .unwrap();
        let first = analyse(&t(5.0, 50.0), Some(&r)).unwrap();
        let predicted = first.recipe.as_ref().unwrap().predicted_hydroxyl_value;
        let a = analyse(&t(5.0, predicted), Some(&r)).unwrap();
        let f = a.recipe.unwrap();
        assert!(f.mn_disagreement_percent.unwrap().abs() < 1e-9);
        assert!(f.hydroxyl_shortfall_mol.abs() < 1e-9);
        assert_eq!(f.minority_group, "acid");
    }
}
