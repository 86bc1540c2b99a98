//! Gel points of a polyester charge with any mix of functionalities (Stockmayer's statistical
//! condition and Carothers), and the gel guard: how close a state or a target is to gelation.
//!
//! Units: amounts in mol, acid values in mg KOH/g. Pure functions; no I/O.

use serde::Serialize;

use crate::chem::recipe::{Charge, Component, Recipe};
use crate::chem::stepgrowth;

/// Default gel-guard margin in extent of reaction of the minority groups (issue #18).
pub const DEFAULT_MARGIN_EXTENT: f64 = 0.005;

/// The number and second moment of the groups of one type: Σ f_i N_i and Σ f_i² N_i over the
/// units carrying that type (N_i mol of a unit with f_i groups).
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize)]
pub struct GroupMoments {
    /// Σ f_i N_i: the group equivalents (mol).
    pub equivalents: f64,
    /// Σ f_i² N_i (mol).
    pub second_moment: f64,
}

impl GroupMoments {
    /// Adds `moles` of a unit carrying `f` groups of this type.
    pub fn add(&mut self, f: u32, moles: f64) {
        let f = f64::from(f);
        self.equivalents += f * moles;
        self.second_moment += f * f * moles;
    }

    /// Weight-average functionality f_w = Σ f_i² N_i / Σ f_i N_i: the functionality of the
    /// unit a randomly chosen group sits on, averaged over groups. Monofunctional units count
    /// with f = 1 (they consume groups and carry no branch). None when there are no groups.
    ///
    /// Source: W. H. Stockmayer, J. Polym. Sci. 9, 69 (1952) and 11, 424 (1953) (from memory);
    /// first principles (a group is on a unit of functionality f_i with probability
    /// f_i N_i / Σ f_j N_j).
    pub fn weight_average(&self) -> Option<f64> {
        (self.equivalents > 0.0).then(|| self.second_moment / self.equivalents)
    }
}

/// The functionality distribution of a charge on both sides.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize)]
pub struct GelInput {
    /// Acid groups (an anhydride counts as a unit with 2 acid groups).
    pub acid: GroupMoments,
    /// Hydroxyl groups.
    pub hydroxyl: GroupMoments,
}

/// Why no statistical gel point could be computed for a charge.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum NoGel {
    /// The minority groups are used up before the weight-average size diverges.
    NotBeforeFullConversion,
    /// A component carries both acid and hydroxyl groups (a hydroxy acid such as
    /// dimethylolpropionic acid): outside the two-type theory used here.
    MixedUnit,
}

impl NoGel {
    /// Plain words for reports.
    pub fn describe(self) -> &'static str {
        match self {
            NoGel::NotBeforeFullConversion => "none: no gel before the minority groups run out",
            NoGel::MixedUnit => {
                "not computed: a component carries both acid and hydroxyl groups, which the \
                 two-type statistical theory does not cover"
            }
        }
    }
}

/// The functionality moments of a recipe; refused when a component carries both group types.
pub fn gel_input(components: &[Component]) -> Result<GelInput, NoGel> {
    let mut input = GelInput::default();
    for c in components {
        if c.acid_groups > 0 && c.hydroxyl_groups > 0 {
            return Err(NoGel::MixedUnit);
        }
        if c.acid_groups > 0 {
            input.acid.add(c.acid_groups, c.moles());
        }
        if c.hydroxyl_groups > 0 {
            input.hydroxyl.add(c.hydroxyl_groups, c.moles());
        }
    }
    Ok(input)
}

/// The statistical gel point of a charge.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StatisticalGel {
    /// Extent of reaction of the minority groups at the gel point.
    pub p_minority: f64,
    /// Extent of reaction of the acid groups at the gel point.
    pub p_acid: f64,
    /// Extent of reaction of the hydroxyl groups at the gel point.
    pub p_hydroxyl: f64,
    /// Ester bonds formed at the gel point (mol).
    pub esters: f64,
    /// Weight-average functionality of the acid side.
    pub f_w_acid: f64,
    /// Weight-average functionality of the hydroxyl side.
    pub f_w_hydroxyl: f64,
}

/// Stockmayer's gel condition for a charge of A-type and B-type units of any functionalities:
/// the weight-average degree of polymerisation diverges when
///
/// p_A · p_B · (f_w,A − 1) · (f_w,B − 1) = 1,
///
/// f_w the weight-average functionalities of [`GroupMoments::weight_average`] (monofunctional
/// units count with f = 1: they consume groups and carry no branch). Every ester bond uses one
/// group of each type, so p_A = x/E_A and p_B = x/E_B with x the ester bonds; the gel point is
/// x_c = √(E_A·E_B / ((f_w,A − 1)(f_w,B − 1))), reported as the minority-group extent
/// x_c / min(E_A, E_B). Returns [`NoGel::NotBeforeFullConversion`] when that exceeds 1.
///
/// For A-A + B-B + A_f (ρ the fraction of A groups on the f-functional unit) f_w,A − 1 =
/// 1 + ρ(f − 2) and f_w,B − 1 = 1, which is Flory's α = p_A p_B ρ/(1 − p_A p_B (1 − ρ)) at
/// α_c = 1/(f − 1) (see [`stepgrowth::gel_point_statistical`], tested equal).
/// Source: W. H. Stockmayer, J. Chem. Phys. 11, 45 (1943) and 12, 125 (1944); J. Polym. Sci. 9,
/// 69 (1952) (from memory); Odian, Principles of Polymerization, 4th ed., §2-10b (the
/// one-branch-type form); derived again from first principles by the recursive branching
/// argument (a group's partner sits on a unit of functionality f with probability
/// f N_f / Σ f N, and that unit offers f − 1 further groups).
pub fn gel_point_stockmayer(input: &GelInput) -> Result<StatisticalGel, NoGel> {
    let (Some(fa), Some(fb)) = (input.acid.weight_average(), input.hydroxyl.weight_average())
    else {
        return Err(NoGel::NotBeforeFullConversion);
    };
    let branching = (fa - 1.0) * (fb - 1.0);
    if branching <= 0.0 {
        return Err(NoGel::NotBeforeFullConversion);
    }
    let (ea, eb) = (input.acid.equivalents, input.hydroxyl.equivalents);
    let esters = (ea * eb / branching).sqrt();
    let p_minority = esters / ea.min(eb);
    if p_minority > 1.0 {
        return Err(NoGel::NotBeforeFullConversion);
    }
    Ok(StatisticalGel {
        p_minority,
        p_acid: esters / ea,
        p_hydroxyl: esters / eb,
        esters,
        f_w_acid: fa,
        f_w_hydroxyl: fb,
    })
}

/// Both gel points of a charge and the acid value at the statistical one.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GelPoints {
    /// Statistical (Stockmayer) gel point, when there is one.
    pub statistical: Option<StatisticalGel>,
    /// Why there is no statistical gel point.
    pub statistical_none: Option<NoGel>,
    /// Acid value of the batch at the statistical gel point (mg KOH/g), from the
    /// condensation-water balance.
    pub acid_value_at_gel: Option<f64>,
    /// Carothers gel point (minority extent), when f_avg > 2.
    pub carothers: Option<f64>,
    /// Carothers f_avg of the charge.
    pub average_functionality: f64,
}

/// The gel points of a recipe: Stockmayer's with the acid value it corresponds to, and
/// Carothers' p_c = 2/f_avg with f_avg counted as in [`stepgrowth::average_functionality`]
/// (monofunctional units count as molecules, only minority groups as reactive).
pub fn gel_points(recipe: &Recipe) -> GelPoints {
    gel_points_of(&recipe.components, &recipe.charge())
}

/// [`gel_points`] for components and their charge totals (the charge of the same components).
pub fn gel_points_of(components: &[Component], ch: &Charge) -> GelPoints {
    let statistical = gel_input(components).and_then(|i| gel_point_stockmayer(&i));
    let f_avg = stepgrowth::average_functionality(ch);
    GelPoints {
        statistical: statistical.ok(),
        statistical_none: statistical.err(),
        acid_value_at_gel: statistical
            .ok()
            .map(|g| stepgrowth::acid_value_at_esters(ch, g.esters)),
        carothers: stepgrowth::gel_point_carothers(f_avg),
        average_functionality: f_avg,
    }
}

/// The gel guard's margin: in extent of reaction of the minority groups, or in acid value.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum GelMargin {
    /// Δp, minority-group extent.
    Extent(f64),
    /// ΔAV, mg KOH/g above the acid value at the gel point.
    AcidValue(f64),
}

impl Default for GelMargin {
    fn default() -> Self {
        GelMargin::Extent(DEFAULT_MARGIN_EXTENT)
    }
}

impl std::fmt::Display for GelMargin {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            GelMargin::Extent(dp) => write!(f, "Δp = {dp}"),
            GelMargin::AcidValue(dav) => write!(f, "ΔAV = {dav} mg KOH/g"),
        }
    }
}

/// Where a state stands against the statistical gel point.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum GelState {
    /// Farther from the gel point than the margin (or no gel point).
    Clear,
    /// Within the margin, short of the gel point.
    Near,
    /// At or past the statistical gel point.
    Beyond,
}

/// Classifies a state (minority extent `p`, acid value `av`) against the statistical gel point:
/// Beyond when p ≥ p_c; Near when p ≥ p_c − Δp (extent margin) or AV ≤ AV_gel + ΔAV (acid-value
/// margin); Clear otherwise or when the charge has no statistical gel point.
/// Source: the statistical gel point is the earliest predicted gelation (cyclisation delays the
/// real one; Odian §2-10c), so guarding on it errs on the safe side (common practice).
pub fn gel_state(p: f64, av: f64, gel: &GelPoints, margin: GelMargin) -> GelState {
    let Some(g) = gel.statistical else {
        return GelState::Clear;
    };
    if p >= g.p_minority {
        return GelState::Beyond;
    }
    let near = match (margin, gel.acid_value_at_gel) {
        (GelMargin::Extent(dp), _) => p >= g.p_minority - dp,
        (GelMargin::AcidValue(dav), Some(av_gel)) => av <= av_gel + dav,
        (GelMargin::AcidValue(_), None) => false,
    };
    if near {
        GelState::Near
    } else {
        GelState::Clear
    }
}

/// The GEL WARNING line for a state that is Near or Beyond, naming the state's p, both gel
/// points and the acid value at the statistical one; None when Clear. `what` names the state
/// ("the target", "the batch now").
pub fn gel_warning(
    what: &str,
    p: f64,
    state: GelState,
    gel: &GelPoints,
    margin: GelMargin,
) -> Option<String> {
    let g = gel.statistical?;
    let carothers = gel
        .carothers
        .map_or("none".to_string(), |c| format!("{c:.4}"));
    let av_gel = gel.acid_value_at_gel.map_or(String::new(), |a| {
        format!(", reached at AV {a:.2} mg KOH/g")
    });
    let head = match state {
        GelState::Clear => return None,
        GelState::Near => format!(
            "GEL WARNING: {what} (p = {p:.5}) is within {margin} of the statistical gel point"
        ),
        GelState::Beyond => {
            format!("GEL WARNING: {what} (p = {p:.5}) is at or past the statistical gel point")
        }
    };
    Some(format!(
        "{head} p_c = {:.5} (Stockmayer{av_gel}; Carothers p_c = {carothers}). Gelation in the \
         reactor cannot be undone: follow the site's cook procedure.",
        g.p_minority
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::chem::stepgrowth::{gel_point_statistical, BranchInput};
    use approx::assert_relative_eq;

    /// A unit list (functionality, moles) per side as moments.
    fn moments(units: &[(u32, f64)]) -> GroupMoments {
        let mut m = GroupMoments::default();
        for &(f, n) in units {
            m.add(f, n);
        }
        m
    }

    fn input(acid: &[(u32, f64)], oh: &[(u32, f64)]) -> GelInput {
        GelInput {
            acid: moments(acid),
            hydroxyl: moments(oh),
        }
    }

    #[test]
    fn alkyd_with_benzoic_acid_gels_at_0_866() {
        // Issue #18: glycerol 2, phthalic anhydride 2, benzoic acid 1 mol. First principles:
        // E_A = 4 + 1 = 5, f_w,A = (4·2 + 1·1)/5 = 1.8; E_B = 6, f_w,B = 3. Gel at
        // p_A p_B = 1/(0.8·2) = 0.625, x_c = √(0.625·30) = 4.3301, p_A = 0.86603 (= √3/2).
        // Flory's α = p_A·ρ·p_B with ρ = 4/5 of the acid groups on difunctional units and
        // α_c = 1/2 gives the same; the old formula ignoring the benzoic acid gave 0.7746.
        let g = gel_point_stockmayer(&input(&[(2, 2.0), (1, 1.0)], &[(3, 2.0)])).unwrap();
        assert_relative_eq!(g.p_minority, 0.866, epsilon = 0.001);
        assert_relative_eq!(g.p_minority, 3f64.sqrt() / 2.0, max_relative = 1e-12);
        assert_relative_eq!(
            g.p_acid * g.p_hydroxyl * 0.8 * 2.0,
            1.0,
            max_relative = 1e-12
        );
    }

    #[test]
    fn one_branch_type_matches_flory_closed_form() {
        // Flory (1941) / Odian eq. 2-174 via stepgrowth::gel_point_statistical, for triols and
        // tetrols on either side, balanced and unbalanced.
        for &(f, rho, a, b, branch_oh) in &[
            (3u32, 1.0, 6.0, 6.0, true),
            (3, 0.3, 10.0, 9.0, true),
            (4, 0.2, 10.0, 11.0, true),
            (3, 0.5, 8.0, 9.5, false),
        ] {
            // a = acid equivalents, b = hydroxyl equivalents.
            let (branched, other) = if branch_oh { (b, a) } else { (a, b) };
            let units_branched = [
                (f, rho * branched / f64::from(f)),
                (2, (1.0 - rho) * branched / 2.0),
            ];
            let units_other = [(2, other / 2.0)];
            let i = if branch_oh {
                input(&units_other, &units_branched)
            } else {
                input(&units_branched, &units_other)
            };
            let flory = gel_point_statistical(&BranchInput {
                acid_eq: a,
                hydroxyl_eq: b,
                branch_eq: rho * branched,
                branch_functionality: f,
                branch_is_hydroxyl: branch_oh,
            });
            match (gel_point_stockmayer(&i), flory) {
                (Ok(g), Some(p)) => assert_relative_eq!(g.p_minority, p, max_relative = 1e-12),
                (Err(NoGel::NotBeforeFullConversion), None) => {}
                (got, want) => panic!("f {f} rho {rho}: {got:?} vs {want:?}"),
            }
        }
    }

    #[test]
    fn glycerol_phthalic_2_3_is_flory_0_707() {
        // Flory, J. Am. Chem. Soc. 63, 3083 (1941): glycerol 2 + phthalic acid 3 mol, p_c = 1/√2.
        let g = gel_point_stockmayer(&input(&[(2, 3.0)], &[(3, 2.0)])).unwrap();
        assert_relative_eq!(
            g.p_minority,
            std::f64::consts::FRAC_1_SQRT_2,
            epsilon = 1e-12
        );
    }

    #[test]
    fn mixed_tmp_glycerol_pentaerythritol_charge_against_derived_closed_form() {
        // A mixed charge (test fixture, invented amounts): TMP 1.0 mol (f 3), glycerol 0.5 mol
        // (f 3), pentaerythritol 0.25 mol (f 4), neopentyl glycol 3.0 mol (f 2) against
        // phthalic anhydride 4.0 mol (f 2), trimellitic anhydride 0.2 mol (f 3) and benzoic
        // acid 0.6 mol (f 1). Closed form derived by hand (first principles, Stockmayer 1944):
        // E_B = 3 + 1.5 + 1 + 6 = 11.5, Σf²N_B = 9 + 4.5 + 4 + 12 = 29.5, f_w,B = 2.565217;
        // E_A = 8 + 0.6 + 0.6 = 9.2, Σf²N_A = 16 + 1.8 + 0.6 = 18.4, f_w,A = 2.0;
        // p_A p_B = 1/(1.0 · 1.565217) = 0.638889; p_A = √(0.638889 · 11.5/9.2) = √0.798611 = 0.893650.
        let i = input(
            &[(2, 4.0), (3, 0.2), (1, 0.6)],
            &[(3, 1.0), (3, 0.5), (4, 0.25), (2, 3.0)],
        );
        assert_relative_eq!(
            i.hydroxyl.weight_average().unwrap(),
            29.5 / 11.5,
            max_relative = 1e-12
        );
        assert_relative_eq!(i.acid.weight_average().unwrap(), 2.0, max_relative = 1e-12);
        let g = gel_point_stockmayer(&i).unwrap();
        let expected = (11.5f64 / 9.2 / ((2.0 - 1.0) * (29.5 / 11.5 - 1.0))).sqrt();
        assert_relative_eq!(g.p_minority, expected, max_relative = 1e-12);
        assert_relative_eq!(g.p_minority, 0.893650, epsilon = 1e-6);
        // Branch units on both sides (the old code returned nothing here): the condition holds.
        let (fa, fb) = (g.f_w_acid, g.f_w_hydroxyl);
        assert_relative_eq!(
            g.p_acid * g.p_hydroxyl * (fa - 1.0) * (fb - 1.0),
            1.0,
            max_relative = 1e-12
        );
    }

    #[test]
    fn tmp_and_glycerol_together_equal_one_triol_type() {
        // TMP and glycerol are both triols: the mixture must gel where one triol of the same
        // total amount does (Flory's one-branch-type closed form, Odian eq. 2-174).
        let mixed = input(&[(2, 5.0)], &[(3, 1.2), (3, 0.8), (2, 2.3)]);
        let flory = gel_point_statistical(&BranchInput {
            acid_eq: 10.0,
            hydroxyl_eq: 6.0 + 4.6,
            branch_eq: 6.0,
            branch_functionality: 3,
            branch_is_hydroxyl: true,
        })
        .unwrap();
        assert_relative_eq!(
            gel_point_stockmayer(&mixed).unwrap().p_minority,
            flory,
            max_relative = 1e-12
        );
    }

    #[test]
    fn linear_and_end_capped_charges_never_gel() {
        // f_w = 2 on both sides: (f_w,A − 1)(f_w,B − 1) = 1, so p_A p_B = 1 only at full
        // conversion of a balanced charge; an unbalanced one runs out first.
        let r = gel_point_stockmayer(&input(&[(2, 5.0)], &[(2, 5.5)]));
        assert_eq!(r, Err(NoGel::NotBeforeFullConversion));
        let r = gel_point_stockmayer(&input(&[(1, 5.0)], &[(3, 5.0)]));
        assert_eq!(r, Err(NoGel::NotBeforeFullConversion));
    }

    #[test]
    fn hydroxy_acid_unit_is_not_computed() {
        let c = Component {
            name: "dmpa".into(),
            mass_kg: 1.0,
            molar_mass: 134.13,
            acid_groups: 1,
            hydroxyl_groups: 2,
            anhydride: false,
        };
        assert_eq!(gel_input(&[c]), Err(NoGel::MixedUnit));
    }

    fn alkyd_recipe() -> Recipe {
        // Issue #18's alkyd (test fixture): glycerol 2, phthalic anhydride 2, benzoic acid 1 mol.
        Recipe::parse(
            "alkyd",
            "name='alkyd'\n\
             [[component]]\nname='glycerol'\nmass_kg=0.184188\nmolar_mass=92.094\nhydroxyl_groups=3\n\
             [[component]]\nname='phthalic anhydride'\nmass_kg=0.29624\nmolar_mass=148.12\nacid_groups=2\nanhydride=true\n\
             [[component]]\nname='benzoic acid'\nmass_kg=0.12212\nmolar_mass=122.12\nacid_groups=1\n",
        )
        .unwrap()
    }

    #[test]
    fn recipe_gel_points_and_acid_value_at_gel() {
        let r = alkyd_recipe();
        let g = gel_points(&r);
        let s = g.statistical.unwrap();
        assert_relative_eq!(s.p_minority, 0.866, epsilon = 0.001);
        // Carothers with monofunctional units counted as molecules: f_avg = 2·5/5 = 2, no gel.
        assert_relative_eq!(g.average_functionality, 2.0, max_relative = 1e-9);
        assert!(g.carothers.is_none());
        // The acid value at the gel point maps back to the gel extent through the water balance.
        let av = g.acid_value_at_gel.unwrap();
        let back = stepgrowth::progress_at(&r.charge(), av).unwrap();
        assert_relative_eq!(back.p_acid, s.p_acid, max_relative = 1e-9);
    }

    #[test]
    fn guard_classifies_states_with_both_margins() {
        let g = gel_points(&alkyd_recipe());
        let s = g.statistical.unwrap();
        let av_gel = g.acid_value_at_gel.unwrap();
        let m = GelMargin::default();
        assert_eq!(gel_state(s.p_minority - 0.01, 0.0, &g, m), GelState::Clear);
        assert_eq!(gel_state(s.p_minority - 0.004, 0.0, &g, m), GelState::Near);
        assert_eq!(gel_state(s.p_minority, 0.0, &g, m), GelState::Beyond);
        let by_av = GelMargin::AcidValue(5.0);
        assert_eq!(gel_state(0.5, av_gel + 6.0, &g, by_av), GelState::Clear);
        assert_eq!(gel_state(0.5, av_gel + 4.0, &g, by_av), GelState::Near);
        let w = gel_warning("the target", s.p_minority + 0.001, GelState::Beyond, &g, m).unwrap();
        assert!(w.starts_with("GEL WARNING: the target"), "{w}");
        assert!(
            w.contains("p_c = 0.86603") && w.contains("Carothers p_c = none"),
            "{w}"
        );
        assert!(w.contains(&format!("AV {av_gel:.2}")), "{w}");
        assert!(gel_warning("x", 0.1, GelState::Clear, &g, m).is_none());
    }
}
