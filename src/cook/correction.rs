//! Correction additions to a batch in progress: how much diol or acid to reach a target OHV.
//!
//! Group balances in mol, masses in kg, acid and hydroxyl values in mg KOH/g (= g KOH/kg, so
//! groups = value · kg / 56.1). Nothing here knows about the command line.

use serde::Serialize;

use crate::chem::gel::{self, GelMargin, GelPoints, GelState};
use crate::chem::recipe::{Charge, Component, Recipe};
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

/// Default largest addition, in percent of the batch mass now (issue #18; common practice: a
/// correction is a trim, and anything larger is a reformulation for the process engineer).
pub const DEFAULT_MAX_ADDITION_PCT: f64 = 5.0;

/// The plausibility limits of a correction.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Limits {
    /// Largest addition in percent of the batch mass now.
    pub max_addition_pct: f64,
    /// Largest change of the hydroxyl value asked for (mg KOH/g): the recipe's initial OHV.
    pub max_ohv_shift: f64,
}

/// Refuses a target that moves the hydroxyl value by more than the recipe's initial OHV
/// ([`Error::Shortfall`], exit 1), before any mass is computed.
pub fn check_target_shift(batch: &BatchNow, target_ohv: f64, limits: &Limits) -> Result<()> {
    let shift = (target_ohv - batch.hydroxyl_value).abs();
    if shift > limits.max_ohv_shift {
        return Err(Error::Shortfall(format!(
            "--target-ohv: moving the hydroxyl value from {} to {target_ohv} mg KOH/g is a change of {shift:.1} mg KOH/g, more than the recipe's initial hydroxyl value {:.1} mg KOH/g; no correction addition does that. Check the values entered; a batch this far off is a matter for the process engineer and the site's procedure",
            batch.hydroxyl_value, limits.max_ohv_shift
        )));
    }
    Ok(())
}

/// Refuses a correction whose addition exceeds `limits.max_addition_pct` of the batch mass
/// ([`Error::Shortfall`], exit 1), naming the figure and the limit.
pub fn check_addition(batch: &BatchNow, c: &Correction, limits: &Limits) -> Result<()> {
    let pct = c.add_kg / batch.mass_kg * 100.0;
    if pct > limits.max_addition_pct {
        return Err(Error::Shortfall(format!(
            "the correction would add {:.1} kg {}, {pct:.1} % of the {} kg batch, above the limit of {} % (--max-addition-pct); nothing is advised. Check the values entered; an addition this large is a reformulation for the process engineer and the site's procedure",
            c.add_kg, c.component, batch.mass_kg, limits.max_addition_pct
        )));
    }
    Ok(())
}

/// The batch against the statistical gel point, now and after the correction.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GelOutlook {
    /// Minority-group extent now (recipe charge at the measured AV).
    pub p_now: f64,
    /// State now.
    pub state_now: GelState,
    /// Gel points of the recipe as charged.
    pub gel_now: GelPoints,
    /// Minority-group extent after the addition, at the expected acid value.
    pub p_after: f64,
    /// State after the addition.
    pub state_after: GelState,
    /// Gel points of the recipe with the addition.
    pub gel_after: GelPoints,
    /// GEL WARNING lines for either state near or past the gel point.
    pub warnings: Vec<String>,
}

impl GelOutlook {
    /// True when the batch is at or past the statistical gel point now or after the addition.
    pub fn beyond(&self) -> bool {
        self.state_now == GelState::Beyond || self.state_after == GelState::Beyond
    }
}

/// Printed when the batch is at or past the statistical gel point now.
pub const GELLED_NOTE: &str = "The batch is at or past the statistical gel point now: the \
figures above assume soluble chains and are not meaningful for a gelled batch.";

/// Refuses a correction that would take the batch to or past the statistical gel point
/// ([`Error::Shortfall`], exit 1): advice that gels a batch is no advice. A batch already
/// past it is reported (with [`GELLED_NOTE`]), not refused.
pub fn check_gel_after(o: &GelOutlook) -> Result<()> {
    if o.state_after == GelState::Beyond && o.state_now != GelState::Beyond {
        let g = o
            .gel_after
            .statistical
            .expect("a state is past the gel point only when there is one");
        return Err(Error::Shortfall(format!(
            "the addition would take the batch to p = {:.5}, at or past the statistical gel point of the corrected charge, p_c = {:.5}{}; nothing is advised. Choose a smaller change of the hydroxyl value, or ask the process engineer; the site's procedure decides",
            o.p_after,
            g.p_minority,
            o.gel_after
                .acid_value_at_gel
                .map_or(String::new(), |av| format!(" (reached at AV {av:.2} mg KOH/g)")),
        )));
    }
    Ok(())
}

/// Where the batch stands against the statistical gel point now and after `c`.
///
/// The batch is taken as the recipe's charge at the measured acid value (the condensation-water
/// balance of [`stepgrowth::progress_at`]); the addition is scaled onto that charge by the
/// ratio of the recipe's batch mass at this AV to the batch mass entered, added to the
/// components, and the gel points of the new charge ([`gel::gel_points_of`]) are compared with
/// its state at the expected acid value. Source: first principles on Stockmayer's condition;
/// the recipe stands in for the batch, so glycol lost overhead is not counted.
pub fn gel_outlook(
    recipe: &Recipe,
    batch: &BatchNow,
    component: &Component,
    c: &Correction,
    margin: GelMargin,
) -> Result<GelOutlook> {
    let ch = recipe.charge();
    let at_recipe = |e: Error| e.at(|place| format!("{place} (recipe '{}')", recipe.name));
    let now = stepgrowth::progress_at(&ch, batch.acid_value).map_err(at_recipe)?;
    let gel_now = gel::gel_points_of(&recipe.components, &ch);
    let p_now = now.p_minority(&ch);
    let state_now = gel::gel_state(p_now, batch.acid_value, &gel_now, margin);
    let scale = now.batch_mass_kg / batch.mass_kg;
    let mut components = recipe.components.clone();
    components.push(Component {
        mass_kg: c.add_kg * scale,
        ..component.clone()
    });
    let ch_after = Recipe {
        name: recipe.name.clone(),
        components: components.clone(),
    }
    .charge();
    let gel_after = gel::gel_points_of(&components, &ch_after);
    let after = stepgrowth::progress_at(&ch_after, c.new_acid_value).map_err(at_recipe)?;
    let p_after = after.p_minority(&ch_after);
    let state_after = gel::gel_state(p_after, c.new_acid_value, &gel_after, margin);
    let warnings = [
        gel::gel_warning("the batch now", p_now, state_now, &gel_now, margin),
        gel::gel_warning(
            "the batch after the addition",
            p_after,
            state_after,
            &gel_after,
            margin,
        ),
    ]
    .into_iter()
    .flatten()
    .collect();
    Ok(GelOutlook {
        p_now,
        state_now,
        gel_now,
        p_after,
        state_after,
        gel_after,
        warnings,
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

    #[test]
    fn issue_18_addition_of_half_the_batch_is_refused() {
        // Issue #18: 8500 kg at AV 3, OHV 40, target OHV 400 with neopentyl glycol asked for
        // x = 8500·(400 − 40)/(1077.3 − 400) = 4518 kg (first principles, as above), 53 %.
        let npg = comp("neopentyl glycol", 104.15, 0, 2, false);
        let batch = BatchNow {
            mass_kg: 8500.0,
            acid_value: 3.0,
            hydroxyl_value: 40.0,
        };
        let c = correct(&batch, &npg, 400.0).unwrap();
        assert_relative_eq!(c.add_kg, 4518.0, epsilon = 1.0);
        let limits = Limits {
            max_addition_pct: DEFAULT_MAX_ADDITION_PCT,
            max_ohv_shift: 404.0,
        };
        let e = check_addition(&batch, &c, &limits).unwrap_err();
        assert_eq!(e.exit_code(), 1);
        let text = e.to_string();
        assert!(
            text.contains("4518") && text.contains("53.2 %") && text.contains("5 %"),
            "{text}"
        );
        // Within the limit: the same batch to OHV 56 needs 1.6 % (passes).
        let ok = correct(&batch, &npg, 56.0).unwrap();
        assert!(check_addition(&batch, &ok, &limits).is_ok());
        // A target shift beyond the recipe's initial OHV is refused before any mass is computed.
        let tight = Limits {
            max_ohv_shift: 300.0,
            ..limits
        };
        let e = check_target_shift(&batch, 400.0, &tight).unwrap_err();
        assert_eq!(e.exit_code(), 1);
        assert!(e.to_string().contains("360.0 mg KOH/g"), "{e}");
        assert!(check_target_shift(&batch, 56.0, &tight).is_ok());
    }

    #[test]
    fn gel_outlook_follows_an_acid_addition_towards_gel() {
        // PB-4800 (invented demo recipe) gels at p_c 0.99926 (chem::gel, Stockmayer). Adding
        // adipic acid to lower the hydroxyl value brings the groups nearer balance, so the
        // batch cooked back to the same AV ends nearer the gel point; adding hexanediol to
        // raise it moves the gel point away (more hydroxyl excess).
        let recipe = Recipe::parse("pb", include_str!("../../specs/recipes/pb-4800.toml")).unwrap();
        let batch = BatchNow {
            mass_kg: 7830.0,
            acid_value: 1.8,
            hydroxyl_value: 36.0,
        };
        let gap = |o: &GelOutlook| {
            (
                o.gel_now.statistical.unwrap().p_minority - o.p_now,
                o.gel_after.statistical.map_or(1.0, |g| g.p_minority) - o.p_after,
            )
        };
        let adipic = recipe.component("adipic acid").unwrap().clone();
        let c = correct(&batch, &adipic, 28.0).unwrap();
        let o = gel_outlook(&recipe, &batch, &adipic, &c, GelMargin::default()).unwrap();
        let (before, after) = gap(&o);
        assert!(after < before, "{after} vs {before}");
        assert_eq!(o.state_now, GelState::Near);
        assert!(check_gel_after(&o).is_ok() == (o.state_after != GelState::Beyond));
        // Lowering the OHV to 30 takes this batch past the corrected charge's gel point.
        let c = correct(&batch, &adipic, 28.0 - 2.0).unwrap();
        let deep = gel_outlook(&recipe, &batch, &adipic, &c, GelMargin::default()).unwrap();
        assert_eq!(deep.state_after, GelState::Beyond);
        let e = check_gel_after(&deep).unwrap_err();
        assert_eq!(e.exit_code(), 1);
        assert!(e.to_string().contains("nothing is advised"), "{e}");
        assert!(
            o.warnings[0].starts_with("GEL WARNING: the batch now"),
            "{:?}",
            o.warnings
        );
        let hdo = recipe.component("1,6-hexanediol").unwrap().clone();
        let c = correct(&batch, &hdo, 44.0).unwrap();
        let o = gel_outlook(&recipe, &batch, &hdo, &c, GelMargin::default()).unwrap();
        let (before, after) = gap(&o);
        assert!(after > before, "{after} vs {before}");
    }
}
