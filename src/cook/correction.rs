//! Correction additions to a batch in progress: how much diol or acid to reach a target OHV.
//!
//! Group balances in mol, masses in kg, acid and hydroxyl values in mg KOH/g (= g KOH/kg, so
//! groups = value · kg / 56.1). Nothing here knows about the command line.

use serde::Serialize;

use crate::chem::recipe::{Charge, Component};
use crate::chem::stepgrowth::{self, KOH_MG_PER_MOL};
use crate::error::{Error, Result};
use crate::stats::solve::bisect;

/// The cautions shown with every correction and end-point result (quoted in the README).
pub const SAFETY_CAUTION: &str = "\
CAUTION: these figures advise work at a hot reactor. Any addition to a hot batch follows the
site's operating procedure: temperature limits, inerting, rate of addition, and the flash point
of the additive. The numbers are estimates from a model; the lab's next titration decides.
Local codes, licensed engineering practice and the site's process-safety rules take precedence
over this tool.";

/// Which way the correction goes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Direction {
    /// A hydroxyl component is added to raise the hydroxyl value.
    RaiseHydroxyl,
    /// An acid component is added and esterified to lower the hydroxyl value.
    LowerHydroxyl,
}

/// The batch now, as measured.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BatchNow {
    /// Batch mass now (kg).
    pub mass_kg: f64,
    /// Acid value (mg KOH/g).
    pub acid_value: f64,
    /// Hydroxyl value, corrected for acidity (mg KOH/g).
    pub hydroxyl_value: f64,
}

/// The answer of a correction calculation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Correction {
    /// Recipe component to add.
    pub component: String,
    /// Which way the correction goes.
    pub direction: Direction,
    /// Mass to add (kg).
    pub add_kg: f64,
    /// Expected acid value after re-equilibration (mg KOH/g).
    pub new_acid_value: f64,
    /// Expected hydroxyl value after re-equilibration (mg KOH/g).
    pub new_hydroxyl_value: f64,
    /// End-group Mn now, f = 2 (g/mol).
    pub mn_now: f64,
    /// Expected end-group Mn after re-equilibration, f = 2 (g/mol).
    pub new_mn: f64,
    /// Expected batch mass afterwards (kg), after any condensation water is removed.
    pub new_batch_kg: f64,
    /// Condensation water released by the correction (kg).
    pub water_released_kg: f64,
    /// Ester bonds formed by the correction (mol).
    pub esters_formed_mol: f64,
    /// Acid groups (mol): before, added, after.
    pub acid_groups_mol: GroupBalance,
    /// Hydroxyl groups (mol): before, added, after.
    pub hydroxyl_groups_mol: GroupBalance,
    /// The assumption the numbers rest on, in plain words.
    pub assumption: String,
}

/// One group balance: before + added - consumed = after.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct GroupBalance {
    /// In the batch before the addition (mol).
    pub before: f64,
    /// Brought in by the addition (mol).
    pub added: f64,
    /// Consumed by esterification (mol).
    pub consumed: f64,
    /// In the batch afterwards (mol).
    pub after: f64,
}

/// Assumption behind a diol addition.
pub const DIOL_ASSUMPTION: &str = "The added hydroxyl component is taken up by transesterification (glycolysis of ester bonds), which \
redistributes chain lengths but neither forms nor breaks net ester bonds, so every end group is \
conserved; nothing distils overhead. The acid value falls by dilution only; further cooking lowers it more.";

/// Assumption behind an acid addition.
pub const ACID_ASSUMPTION: &str = "The added acid is esterified until the acid value is back at its present measured value; each \
ester bond consumes one acid and one hydroxyl group and releases one water (none for an \
anhydride ring opening), which is removed; no glycol distils overhead.";

/// Computes the mass of `component` that brings the batch to `target_ohv`.
///
/// Raising (target above the present OHV, a hydroxyl component): with OHV_c = 56100·h/M_c the
/// hydroxyl value of the pure component, mixing gives OHV' = (OHV·m + OHV_c·x)/(m + x), so
/// x = m·(OHV* - OHV)/(OHV_c - OHV*). Lowering (an acid component): the added acid is cooked
/// back to the present AV; the ester bonds formed and the water released follow the same
/// condensation-water balance as the cook ([`stepgrowth::progress_at`]), applied to the present
/// batch plus the addition, and x is found by bisection on the resulting OHV.
/// Source: first-principles group and mass balance (Odian, Principles of Polymerization, 4th
/// ed., §2-1); the end-group conservation under transesterification is common practice in
/// polyester manufacture.
pub fn correct(batch: &BatchNow, component: &Component, target_ohv: f64) -> Result<Correction> {
    crate::chem::ranges::batch_mass("batch mass", batch.mass_kg)?;
    crate::chem::ranges::group_value("acid value", batch.acid_value)?;
    crate::chem::ranges::group_value("hydroxyl value", batch.hydroxyl_value)?;
    crate::error::positive("target hydroxyl value", target_ohv)?;
    crate::chem::ranges::group_value("target hydroxyl value", target_ohv)?;
    if batch.acid_value + batch.hydroxyl_value <= 0.0 {
        return Err(Error::invalid(
            "acid value and hydroxyl value",
            "both are zero, so there are no end groups to balance",
            "Enter the titrated values of the batch.",
        ));
    }
    let now = Balance::of(batch, component);
    if (target_ohv - batch.hydroxyl_value).abs() < 1e-12 {
        return Err(Error::invalid(
            "target hydroxyl value",
            "the target equals the present hydroxyl value",
            "No correction is needed.",
        ));
    }
    if target_ohv > batch.hydroxyl_value {
        raise_hydroxyl(batch, component, target_ohv, &now)
    } else {
        lower_hydroxyl(batch, component, target_ohv, &now)
    }
}

/// The end groups of the batch now and those the component brings per kg.
struct Balance {
    /// Batch mass now (kg).
    m: f64,
    /// Acid groups now (mol): AV·m/56.1.
    acid_before: f64,
    /// Hydroxyl groups now (mol): OHV·m/56.1.
    oh_before: f64,
    /// Molecules now (mol), two end groups each.
    molecules_now: f64,
    /// End-group Mn now, f = 2 (g/mol).
    mn_now: f64,
    /// Moles of component per kg.
    comp_moles_per_kg: f64,
    /// Acid groups of the component per kg (mol/kg).
    comp_acid: f64,
    /// Hydroxyl groups of the component per kg (mol/kg).
    comp_oh: f64,
}

impl Balance {
    fn of(batch: &BatchNow, component: &Component) -> Balance {
        let m = batch.mass_kg;
        let acid_before = batch.acid_value * m / (KOH_MG_PER_MOL / 1000.0);
        let oh_before = batch.hydroxyl_value * m / (KOH_MG_PER_MOL / 1000.0);
        let molecules_now = (acid_before + oh_before) / 2.0;
        let comp_moles_per_kg = 1000.0 / component.molar_mass;
        Balance {
            m,
            acid_before,
            oh_before,
            molecules_now,
            mn_now: m * 1000.0 / molecules_now,
            comp_moles_per_kg,
            comp_acid: f64::from(component.acid_groups) * comp_moles_per_kg,
            comp_oh: f64::from(component.hydroxyl_groups) * comp_moles_per_kg,
        }
    }
}

/// A hydroxyl component mixed in: x = m·(OHV* - OHV)/(OHV_c - OHV*), end groups conserved.
fn raise_hydroxyl(
    batch: &BatchNow,
    component: &Component,
    target_ohv: f64,
    now: &Balance,
) -> Result<Correction> {
    let ohv_c = KOH_MG_PER_MOL / 1000.0 * now.comp_oh;
    if component.hydroxyl_groups == 0 || component.acid_groups > 0 {
        return Err(Error::invalid(
            format!("component '{}'", component.name),
            "raising the hydroxyl value needs a component with hydroxyl groups and no acid groups",
            "Name a glycol or polyol of the recipe with --diol.",
        ));
    }
    if ohv_c <= target_ohv {
        return Err(Error::invalid(
            "target hydroxyl value",
            format!(
                "{target_ohv} mg KOH/g is not below the hydroxyl value of pure {} ({ohv_c:.1})",
                component.name
            ),
            "Choose a reachable target.",
        ));
    }
    let m = now.m;
    let x = m * (target_ohv - batch.hydroxyl_value) / (ohv_c - target_ohv);
    let added_oh = now.comp_oh * x;
    let new_mass = m + x;
    let new_av = KOH_MG_PER_MOL / 1000.0 * now.acid_before / new_mass;
    let new_ohv = KOH_MG_PER_MOL / 1000.0 * (now.oh_before + added_oh) / new_mass;
    let molecules = now.molecules_now + now.comp_moles_per_kg * x;
    Ok(Correction {
        component: component.name.clone(),
        direction: Direction::RaiseHydroxyl,
        add_kg: x,
        new_acid_value: new_av,
        new_hydroxyl_value: new_ohv,
        mn_now: now.mn_now,
        new_mn: new_mass * 1000.0 / molecules,
        new_batch_kg: new_mass,
        water_released_kg: 0.0,
        esters_formed_mol: 0.0,
        acid_groups_mol: GroupBalance {
            before: now.acid_before,
            added: 0.0,
            consumed: 0.0,
            after: now.acid_before,
        },
        hydroxyl_groups_mol: GroupBalance {
            before: now.oh_before,
            added: added_oh,
            consumed: 0.0,
            after: now.oh_before + added_oh,
        },
        assumption: DIOL_ASSUMPTION.into(),
    })
}

/// An acid component cooked back to the present AV: x by bisection on the OHV after the
/// condensation-water balance of the batch plus the addition.
fn lower_hydroxyl(
    batch: &BatchNow,
    component: &Component,
    target_ohv: f64,
    now: &Balance,
) -> Result<Correction> {
    if component.acid_groups == 0 || component.hydroxyl_groups > 0 {
        return Err(Error::invalid(
            format!("component '{}'", component.name),
            "lowering the hydroxyl value needs a component with acid groups and no hydroxyl groups",
            "Name an acid or anhydride of the recipe with --acid.",
        ));
    }
    let (acid_before, oh_before) = (now.acid_before, now.oh_before);
    // The present batch plus x kg of acid, as a pseudo-charge for the water balance.
    let pseudo = |x: f64| Charge {
        mass_kg: now.m + x,
        acid_eq: acid_before + now.comp_acid * x,
        hydroxyl_eq: oh_before,
        molecules: now.molecules_now + now.comp_moles_per_kg * x,
        anhydride_rings: if component.anhydride {
            now.comp_moles_per_kg * x
        } else {
            0.0
        },
    };
    let ohv_after = |x: f64| -> Result<f64> {
        Ok(stepgrowth::progress_at(&pseudo(x), batch.acid_value)?.predicted_hydroxyl_value)
    };
    // Upper bracket: the acid that would consume every hydroxyl group.
    let hi = oh_before / now.comp_acid;
    if ohv_after(hi)? > target_ohv {
        return Err(Error::invalid(
            "target hydroxyl value",
            format!(
                "{target_ohv} mg KOH/g cannot be reached with {}",
                component.name
            ),
            "Choose a higher target.",
        ));
    }
    let x = bisect(
        0.0,
        hi,
        |x| Ok(ohv_after(x)? > target_ohv),
        |lo, hi| hi - lo <= 1e-13 * hi,
    )?;
    let ch = pseudo(x);
    let pr = stepgrowth::progress_at(&ch, batch.acid_value)?;
    let added_acid = now.comp_acid * x;
    let acid_after = acid_before + added_acid - pr.esters;
    let oh_after = oh_before - pr.esters;
    Ok(Correction {
        component: component.name.clone(),
        direction: Direction::LowerHydroxyl,
        add_kg: x,
        new_acid_value: KOH_MG_PER_MOL / 1000.0 * acid_after / pr.batch_mass_kg,
        new_hydroxyl_value: KOH_MG_PER_MOL / 1000.0 * oh_after / pr.batch_mass_kg,
        mn_now: now.mn_now,
        new_mn: pr.batch_mass_kg * 1000.0 / pr.molecules,
        new_batch_kg: pr.batch_mass_kg,
        water_released_kg: pr.water_kg,
        esters_formed_mol: pr.esters,
        acid_groups_mol: GroupBalance {
            before: acid_before,
            added: added_acid,
            consumed: pr.esters,
            after: acid_after,
        },
        hydroxyl_groups_mol: GroupBalance {
            before: oh_before,
            added: 0.0,
            consumed: pr.esters,
            after: oh_after,
        },
        assumption: ACID_ASSUMPTION.into(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn comp(name: &str, m: f64, a: u32, h: u32, anh: bool) -> Component {
        Component {
            name: name.into(),
            mass_kg: 1.0,
            molar_mass: m,
            acid_groups: a,
            hydroxyl_groups: h,
            anhydride: anh,
        }
    }

    const NOW: BatchNow = BatchNow {
        mass_kg: 9650.0,
        acid_value: 4.1,
        hydroxyl_value: 48.0,
    };

    /// Groups before + added - consumed = after, and after = value · mass / 56.1.
    fn closes(c: &Correction) {
        for g in [c.acid_groups_mol, c.hydroxyl_groups_mol] {
            assert_relative_eq!(
                g.before + g.added - g.consumed,
                g.after,
                max_relative = 1e-9
            );
        }
        assert_relative_eq!(
            c.acid_groups_mol.after,
            c.new_acid_value * c.new_batch_kg / 56.1,
            max_relative = 1e-9
        );
        assert_relative_eq!(
            c.hydroxyl_groups_mol.after,
            c.new_hydroxyl_value * c.new_batch_kg / 56.1,
            max_relative = 1e-9
        );
    }

    #[test]
    fn diol_addition_reaches_the_target_and_balances() {
        // First principles (group balance): neopentyl glycol 104.15 g/mol, 2 OH, so
        // OHV_c = 56100·2/104.15 = 1077.3; x = 9650·(56 - 48)/(1077.3 - 56) = 75.59 kg.
        let npg = comp("neopentyl glycol", 104.15, 0, 2, false);
        let c = correct(&NOW, &npg, 56.0).unwrap();
        let ohv_c = 56100.0 * 2.0 / 104.15;
        assert_relative_eq!(
            c.add_kg,
            9650.0 * 8.0 / (ohv_c - 56.0),
            max_relative = 1e-12
        );
        assert_relative_eq!(c.new_hydroxyl_value, 56.0, max_relative = 1e-9);
        // Mass balance: 9650 kg + x.
        assert_relative_eq!(c.new_batch_kg, 9650.0 + c.add_kg, max_relative = 1e-12);
        closes(&c);
        // End-group Mn now = 56100·2/(4.1 + 48) = 2153.5 g/mol (definition of the OHV).
        assert_relative_eq!(c.mn_now, 112_200.0 / 52.1, max_relative = 1e-12);
        assert_relative_eq!(
            c.new_mn,
            112_200.0 / (c.new_acid_value + c.new_hydroxyl_value),
            max_relative = 1e-9
        );
        assert!(c.new_acid_value < 4.1);
    }

    #[test]
    fn acid_addition_lowers_hydroxyl_value_and_balances() {
        let adipic = comp("adipic acid", 146.14, 2, 0, false);
        let c = correct(&NOW, &adipic, 44.0).unwrap();
        assert_relative_eq!(c.new_hydroxyl_value, 44.0, max_relative = 1e-9);
        assert_relative_eq!(c.new_acid_value, 4.1, max_relative = 1e-9);
        closes(&c);
        // Mass balance: before + added - water = after (first principles).
        assert_relative_eq!(
            9650.0 + c.add_kg - c.water_released_kg,
            c.new_batch_kg,
            max_relative = 1e-12
        );
        assert_relative_eq!(
            c.water_released_kg,
            c.esters_formed_mol * 0.018015,
            max_relative = 1e-12
        );
        // Esters formed equal the acid added (the AV is back where it was, bar the water).
        assert!((c.esters_formed_mol - c.acid_groups_mol.added).abs() < 0.01 * c.esters_formed_mol);
    }

    #[test]
    fn anhydride_opens_without_water_first() {
        let pa = comp("phthalic anhydride", 148.12, 2, 0, true);
        let c = correct(&NOW, &pa, 46.0).unwrap();
        closes(&c);
        let rings = c.add_kg * 1000.0 / 148.12;
        assert_relative_eq!(
            c.water_released_kg,
            (c.esters_formed_mol - rings).max(0.0) * 0.018015,
            max_relative = 1e-9
        );
    }

    #[test]
    fn wrong_component_or_target_is_refused() {
        let npg = comp("neopentyl glycol", 104.15, 0, 2, false);
        let adipic = comp("adipic acid", 146.14, 2, 0, false);
        let e = correct(&NOW, &npg, 40.0).unwrap_err().to_string();
        assert!(e.contains("--acid"), "{e}");
        let e = correct(&NOW, &adipic, 60.0).unwrap_err().to_string();
        assert!(e.contains("--diol"), "{e}");
        let e = correct(&NOW, &npg, 2000.0).unwrap_err().to_string();
        assert!(e.contains("not below"), "{e}");
        let e = correct(&NOW, &npg, 48.0).unwrap_err().to_string();
        assert!(e.contains("No correction"), "{e}");
    }
}
