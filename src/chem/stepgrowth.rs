//! End-group analysis and step-growth relations: AV/OHV to Mn, extent of reaction, Xn, gel points.
//!
//! Units: acid and hydroxyl values in mg KOH/g, masses in kg, amounts in mol, molar masses in g/mol.

use serde::Serialize;

use crate::chem::hydroxyl_method::AcidityCorrection;
use crate::chem::recipe::Charge;
use crate::error::{Error, Result};

/// mg KOH per mol of titrated group (molar mass of KOH taken as 56.1 g/mol).
///
/// Source: ISO 2114:2000 §8 and ISO 4629-2:2016 §9 use 56.1 in the AV and OHV formulas.
pub const KOH_MG_PER_MOL: f64 = 56_100.0;

/// Molar mass of water in g/mol (IUPAC 2021 standard atomic weights: 2 x 1.008 + 15.999).
pub const WATER_G_PER_MOL: f64 = 18.015;

/// Number-average molar mass by end-group analysis.
///
/// Mn = 56100 · f / (AV + OHV), with OHV corrected for acidity where the method needs it and
/// f the number of end groups per molecule (2 for a linear chain).
/// Source: the definition of acid value (ISO 2114) and hydroxyl value (ISO 4629-2): each
/// end group titrates as one mol KOH; Mn = mass per mole of chains = 56100 f / (mg KOH per g).
pub fn mn_end_group(av: f64, ohv_corrected: f64, functionality: f64) -> Option<f64> {
    let sum = av + ohv_corrected;
    (sum > 0.0).then(|| KOH_MG_PER_MOL * functionality / sum)
}

/// Hydroxyl equivalent weight in g/eq: HEW = 56100 / OHV (definition of the hydroxyl value).
pub fn hydroxyl_equivalent_weight(ohv_corrected: f64) -> Option<f64> {
    (ohv_corrected > 0.0).then(|| KOH_MG_PER_MOL / ohv_corrected)
}

/// Acidity correction of a raw hydroxyl value: OHV = raw + c·AV, c = +1, 0 or −1.
///
/// Acetylation methods (ISO 4629-1/-2, DIN 53240, ASTM D4274) back-titrate the reagent acid
/// and so measure OHV − AV: the sample's own acidity is added back (c = +1). ASTM E1899
/// (isocyanate reagent) titrates the sample's acid with the carbamate, OHV + AV (c = −1). The
/// per-method table with its sources is [`crate::chem::hydroxyl_method::METHODS`]; `true`
/// and `false` mean add and none, as the historical flag did.
pub fn corrected_hydroxyl_value(
    entered: f64,
    av: f64,
    correction: impl Into<AcidityCorrection>,
) -> f64 {
    entered + correction.into().sign() * av
}

/// Expanded uncertainty of the end-group Mn from the expanded uncertainties of AV and OHV.
///
/// Mn = 56100 f / S with S = AV + OHV. For uncorrelated inputs (GUM, JCGM 100:2008 §5.1.2),
/// U(Mn) = Mn · U(S) / S. With OHV = raw + c·AV, S = (1 + c)·AV + OHV_raw, so
/// U(S)² = ((1 + c)·U_AV)² + U_OHV²: (2·U_AV)² for an added correction, U_AV² without one, and
/// no AV term at all for a subtracted one. Expanded uncertainties of the same coverage factor
/// (k = 2) propagate linearly in this first-order form.
pub fn mn_expanded_uncertainty(
    mn: f64,
    av: f64,
    u_av: f64,
    ohv_entered: f64,
    u_ohv: f64,
    correction: impl Into<AcidityCorrection>,
) -> f64 {
    let k = 1.0 + correction.into().sign();
    let sum = k * av + ohv_entered;
    let u_sum = ((k * u_av).powi(2) + u_ohv.powi(2)).sqrt();
    mn * u_sum / sum
}

/// Converts a value measured on a resin solution to the solids basis: value / solids fraction.
///
/// AV and OHV are per gram of sample; only the non-volatile part carries the groups
/// (ISO 3251 defines the non-volatile content). Common practice in resin QC.
pub fn to_solids_basis(value: f64, solids_fraction: f64) -> f64 {
    value / solids_fraction
}

/// Initial acid value of the charge: AV0 = 56.1 · E_acid / m0 (mol, kg → mg KOH/g).
pub fn initial_acid_value(ch: &Charge) -> f64 {
    KOH_MG_PER_MOL * ch.acid_eq / (ch.mass_kg * 1000.0)
}

/// Initial hydroxyl value of the charge: OHV0 = 56.1 · E_OH / m0.
pub fn initial_hydroxyl_value(ch: &Charge) -> f64 {
    KOH_MG_PER_MOL * ch.hydroxyl_eq / (ch.mass_kg * 1000.0)
}

/// State of a batch after esterification, from the measured acid value and the charge.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Progress {
    /// Ester bonds formed (mol).
    pub esters: f64,
    /// Extent of reaction of the acid groups.
    pub p_acid: f64,
    /// Extent of reaction of the hydroxyl groups.
    pub p_hydroxyl: f64,
    /// Condensation water released (kg).
    pub water_kg: f64,
    /// Batch mass after water loss (kg).
    pub batch_mass_kg: f64,
    /// OHV expected with no glycol loss (mg KOH/g).
    pub predicted_hydroxyl_value: f64,
    /// Molecules left (mol): monomers minus ester bonds (no cyclisation).
    pub molecules: f64,
}

impl Progress {
    /// Extent of reaction of the minority groups (acid in a hydroxyl-rich charge).
    pub fn p_minority(&self, ch: &Charge) -> f64 {
        if ch.acid_eq <= ch.hydroxyl_eq {
            self.p_acid
        } else {
            self.p_hydroxyl
        }
    }
}

/// Solves the condensation-water mass balance for the ester bonds formed at a measured AV.
///
/// Let x be ester bonds (mol), R the anhydride rings (mol; they open first, without water) and
/// w = 0.018015 kg/mol. Water W = max(0, x - R); batch mass m = m0 - w·W; remaining acid
/// equivalents E_A - x = AV·m/56.1. For x ≤ R: x = E_A - AV·m0/56.1. Otherwise
/// x = [E_A - AV·(m0 + w·R)/56.1] / (1 - AV·w/56.1).
/// Source: first-principles mass balance of polyesterification (each ester bond from an acid
/// and an alcohol releases one water; Odian, Principles of Polymerization, 4th ed., §2-1).
pub fn progress_at(ch: &Charge, av: f64) -> Result<Progress> {
    let av0 = initial_acid_value(ch);
    if av > av0 * (1.0 + 1e-12) {
        return Err(Error::invalid(
            "acid value",
            format!("{av} mg KOH/g is above the recipe's initial acid value {av0:.2} mg KOH/g"),
            "Check the titration and that the recipe matches this batch.",
        ));
    }
    let k = av / (KOH_MG_PER_MOL / 1000.0); // mol of acid per kg of batch
    let w = WATER_G_PER_MOL / 1000.0;
    let no_water = ch.acid_eq - k * ch.mass_kg;
    let esters = if no_water <= ch.anhydride_rings {
        no_water
    } else {
        (ch.acid_eq - k * (ch.mass_kg + w * ch.anhydride_rings)) / (1.0 - k * w)
    }
    .max(0.0);
    let water_mol = (esters - ch.anhydride_rings).max(0.0);
    let water_kg = water_mol * w;
    let batch_mass_kg = ch.mass_kg - water_kg;
    let remaining_oh = (ch.hydroxyl_eq - esters).max(0.0);
    Ok(Progress {
        esters,
        p_acid: (esters / ch.acid_eq).clamp(0.0, 1.0),
        p_hydroxyl: (esters / ch.hydroxyl_eq).clamp(0.0, 1.0),
        water_kg,
        batch_mass_kg,
        predicted_hydroxyl_value: KOH_MG_PER_MOL * remaining_oh / (batch_mass_kg * 1000.0),
        molecules: ch.molecules - esters,
    })
}

/// Acid value of the batch after `esters` ester bonds: the inverse of [`progress_at`].
///
/// Water W = max(0, x − R) mol, mass m = m0 − 0.018015·W kg, AV = 56.1·(E_A − x)/m (mg KOH/g
/// with groups in mol and m in kg). Source: the same first-principles mass balance as
/// [`progress_at`] (Odian §2-1).
pub fn acid_value_at_esters(ch: &Charge, esters: f64) -> f64 {
    let water_kg = (esters - ch.anhydride_rings).max(0.0) * WATER_G_PER_MOL / 1000.0;
    KOH_MG_PER_MOL * (ch.acid_eq - esters).max(0.0) / ((ch.mass_kg - water_kg) * 1000.0)
}

/// The naive estimate p = 1 - AV/AV0, which ignores the water lost (shown for comparison only).
pub fn naive_extent(av: f64, av0: f64) -> f64 {
    1.0 - av / av0
}

/// Stoichiometric ratio r = minority / majority group equivalents (≤ 1).
pub fn stoichiometric_ratio(ch: &Charge) -> f64 {
    ch.acid_eq.min(ch.hydroxyl_eq) / ch.acid_eq.max(ch.hydroxyl_eq)
}

/// Carothers average functionality f_avg = 2 · (minority group equivalents) / (monomer moles).
///
/// Source: W. H. Carothers, Trans. Faraday Soc. 32, 39 (1936); Odian §2-10a (non-stoichiometric
/// form, where only the groups that can react count).
pub fn average_functionality(ch: &Charge) -> f64 {
    2.0 * ch.acid_eq.min(ch.hydroxyl_eq) / ch.molecules
}

/// Carothers degree of polymerisation Xn = 2 / (2 - p·f_avg), p the minority-group extent.
///
/// Reduces to (1+r)/(1+r-2rp) for a linear A-A/B-B charge and to 1/(1-p) at r = 1.
/// Source: Carothers (1936); Odian, Principles of Polymerization, §2-6 and §2-10a.
pub fn xn_carothers(p_minority: f64, f_avg: f64) -> Option<f64> {
    let d = 2.0 - p_minority * f_avg;
    (d > 0.0).then(|| 2.0 / d)
}

/// Carothers gel point p_c = 2 / f_avg (minority-group extent), only where f_avg > 2.
pub fn gel_point_carothers(f_avg: f64) -> Option<f64> {
    (f_avg > 2.0 + 1e-12).then(|| 2.0 / f_avg)
}

/// Group counts needed for the statistical gel point, split by functionality.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BranchInput {
    /// Acid equivalents (mol).
    pub acid_eq: f64,
    /// Hydroxyl equivalents (mol).
    pub hydroxyl_eq: f64,
    /// Equivalents on branch units (functionality > 2) of the branched group type (mol).
    pub branch_eq: f64,
    /// Functionality of the branch units.
    pub branch_functionality: u32,
    /// True when the branch units carry hydroxyl groups (a triol), false for acids.
    pub branch_is_hydroxyl: bool,
}

/// Flory's closed-form statistical gel point for one branch type (A-A + B-B + A_f, no
/// monofunctional units), as the minority-group extent of reaction. The tool uses the general
/// [`crate::chem::gel::gel_point_stockmayer`]; this form is its check for the one-type case.
///
/// Branching coefficient α = P·ρ / (1 - P·(1-ρ)) with P = p_A·p_B (product of the two groups'
/// extents, equal to x²/(E_A·E_B)) and ρ the fraction of the branched group type on branch
/// units; gelation at α_c = 1/(f-1). So P_c = α_c / (ρ + α_c(1-ρ)) and x_c = √(P_c·E_A·E_B).
/// Returns None when the minority groups run out before gelation (p_c > 1).
/// Source: P. J. Flory, J. Am. Chem. Soc. 63, 3083 and 3091 (1941); Odian §2-10b, eq. 2-174.
pub fn gel_point_statistical(b: &BranchInput) -> Option<f64> {
    if b.branch_functionality < 3 || b.branch_eq <= 0.0 {
        return None;
    }
    let branched_total = if b.branch_is_hydroxyl {
        b.hydroxyl_eq
    } else {
        b.acid_eq
    };
    let rho = (b.branch_eq / branched_total).clamp(0.0, 1.0);
    let alpha_c = 1.0 / (f64::from(b.branch_functionality) - 1.0);
    let p_c = alpha_c / (rho + alpha_c * (1.0 - rho));
    let x_c = (p_c * b.acid_eq * b.hydroxyl_eq).sqrt();
    let p_min = x_c / b.acid_eq.min(b.hydroxyl_eq);
    (p_min <= 1.0).then_some(p_min)
}

/// Mn from the recipe: batch mass / molecules left, in g/mol (no cyclisation, no gel).
pub fn mn_recipe(progress: &Progress) -> Option<f64> {
    (progress.molecules > 0.0).then(|| progress.batch_mass_kg * 1000.0 / progress.molecules)
}

/// Hydroxyl lost beyond the model (mol of OH) = predicted − measured remaining OH groups.
///
/// Positive values mean fewer hydroxyls than the recipe predicts: glycol distilled overhead,
/// or a side reaction (etherification). Negative values mean more than predicted.
pub fn hydroxyl_shortfall_eq(progress: &Progress, ohv_measured: f64) -> f64 {
    (progress.predicted_hydroxyl_value - ohv_measured) * progress.batch_mass_kg * 1000.0
        / KOH_MG_PER_MOL
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::chem::recipe::Recipe;
    use approx::assert_relative_eq;

    fn charge(parts: &[(f64, f64, u32, u32, bool)]) -> Charge {
        let mut text = String::from("name='t'\n");
        for (i, (kg, m, a, h, anh)) in parts.iter().enumerate() {
            text.push_str(&format!(
                "[[component]]\nname='c{i}'\nmass_kg={kg}\nmolar_mass={m}\nacid_groups={a}\nhydroxyl_groups={h}\nanhydride={anh}\n"
            ));
        }
        Recipe::parse("t", &text).unwrap().charge()
    }

    #[test]
    fn hydroxyl_value_56_1_is_mn_2000() {
        // Definition of the hydroxyl value (ISO 4629-2): a diol of OHV 56.1 mg KOH/g has
        // 1 mmol OH per gram... 56100·2/56.1 = 2000 g/mol.
        assert_relative_eq!(
            mn_end_group(0.0, 56.1, 2.0).unwrap(),
            2000.0,
            max_relative = 1e-12
        );
        assert_relative_eq!(
            hydroxyl_equivalent_weight(56.1).unwrap(),
            1000.0,
            max_relative = 1e-12
        );
    }

    #[test]
    fn ethylene_glycol_hydroxyl_value() {
        // OHV of pure ethylene glycol = 56100·2/62.07 = 1807.6 mg KOH/g (definition; M from
        // IUPAC atomic weights). Here through the recipe route with no reaction.
        let ch = charge(&[(62.07, 62.07, 0, 2, false), (0.001, 146.14, 2, 0, false)]);
        assert_relative_eq!(initial_hydroxyl_value(&ch), 1807.6, max_relative = 1e-3);
    }

    #[test]
    fn acidity_correction_adds_av_only_when_asked() {
        assert_relative_eq!(corrected_hydroxyl_value(55.0, 0.6, true), 55.6);
        assert_relative_eq!(corrected_hydroxyl_value(55.0, 0.6, false), 55.0);
    }

    #[test]
    fn water_balance_beats_naive_extent() {
        // Adipic acid (146.14) : diethylene glycol (106.12) = 1 : 1.1 mol at AV 20. Worked by
        // hand from the mass balance (first principles): m0 = 262.872 g per mol acid,
        // x = (2 - 20·0.262872/56.1)/(1 - 20·0.018015/56.1) = 1.91861 mol, p = 0.95930;
        // the naive 1 - AV/AV0 gives 0.95313.
        let ch = charge(&[
            (146.14, 146.14, 2, 0, false),
            (116.732, 106.12, 0, 2, false),
        ]);
        let av0 = initial_acid_value(&ch);
        assert_relative_eq!(naive_extent(20.0, av0), 0.95313, epsilon = 5e-5);
        let pr = progress_at(&ch, 20.0).unwrap();
        assert_relative_eq!(pr.p_acid, 0.95930, epsilon = 5e-5);
        // Mass balance closes: remaining acid groups equal AV · m / 56.1.
        let remaining = ch.acid_eq - pr.esters;
        assert_relative_eq!(
            remaining,
            20.0 * pr.batch_mass_kg / 56.1,
            max_relative = 1e-9
        );
        assert_relative_eq!(pr.water_kg, pr.esters * 0.018015, max_relative = 1e-12);
    }

    #[test]
    fn hand_counted_small_charge() {
        // First principles: 2 mol adipic acid + 3 mol ethylene glycol, 3.6 mol esters formed.
        // Remaining acid 0.4 mol; water 3.6 mol = 64.854 g; mass = 292.28 + 186.21 - 64.854 g.
        let ch = charge(&[
            (0.29228, 146.14, 2, 0, false),
            (0.18621, 62.07, 0, 2, false),
        ]);
        let mass_g = 292.28 + 186.21 - 3.6 * 18.015;
        let av = 0.4 * 56100.0 / mass_g;
        let pr = progress_at(&ch, av).unwrap();
        assert_relative_eq!(pr.esters, 3.6, max_relative = 1e-9);
        assert_relative_eq!(pr.p_acid, 0.9, max_relative = 1e-9);
        assert_relative_eq!(pr.p_hydroxyl, 0.6, max_relative = 1e-9);
        // Remaining OH 2.4 mol.
        assert_relative_eq!(
            pr.predicted_hydroxyl_value,
            2.4 * 56100.0 / mass_g,
            max_relative = 1e-9
        );
        // Molecules 5 - 3.6 = 1.4 mol; Mn = mass / molecules.
        assert_relative_eq!(mn_recipe(&pr).unwrap(), mass_g / 1.4, max_relative = 1e-9);
        // Carothers: f_avg = 2·4/5 = 1.6, Xn = 2/(2 - 0.9·1.6) = 3.5714 = 5/1.4.
        let f = average_functionality(&ch);
        assert_relative_eq!(f, 1.6, max_relative = 1e-12);
        assert_relative_eq!(
            xn_carothers(0.9, f).unwrap(),
            5.0 / 1.4,
            max_relative = 1e-12
        );
    }

    #[test]
    fn anhydride_ring_opens_without_water() {
        // First principles: 1 mol phthalic anhydride (148.12) + 1.2 mol propylene glycol
        // (76.09); 1.5 mol esters = 1 ring opening (no water) + 0.5 condensations (0.5 mol water).
        let ch = charge(&[
            (0.14812, 148.12, 2, 0, true),
            (0.091308, 76.09, 0, 2, false),
        ]);
        let mass_g = 148.12 + 91.308 - 0.5 * 18.015;
        let av = 0.5 * 56100.0 / mass_g;
        let pr = progress_at(&ch, av).unwrap();
        assert_relative_eq!(pr.esters, 1.5, max_relative = 1e-9);
        assert_relative_eq!(pr.water_kg * 1000.0, 0.5 * 18.015, max_relative = 1e-9);
        // Before all rings are open: 0.5 mol esters, no water at all.
        let av_early = 1.5 * 56100.0 / (148.12 + 91.308);
        let early = progress_at(&ch, av_early).unwrap();
        assert_relative_eq!(early.esters, 0.5, max_relative = 1e-9);
        assert_eq!(early.water_kg, 0.0);
    }

    #[test]
    fn acid_value_at_esters_inverts_the_balance() {
        // Round trip through progress_at (first principles), before and after the rings open.
        let ch = charge(&[
            (0.14812, 148.12, 2, 0, true),
            (0.091308, 76.09, 0, 2, false),
        ]);
        for x in [0.3, 1.0, 1.5, 1.99] {
            let av = acid_value_at_esters(&ch, x);
            assert_relative_eq!(progress_at(&ch, av).unwrap().esters, x, max_relative = 1e-9);
        }
    }

    #[test]
    fn carothers_reduces_to_linear_forms() {
        // Odian §2-6: Xn = (1+r)/(1+r-2rp); r = 1 gives 1/(1-p).
        for &(r, p) in &[(1.0, 0.99), (0.99, 0.95), (0.9, 0.8)] {
            let f_avg = 4.0 * r / (1.0 + r);
            let xn = xn_carothers(p, f_avg).unwrap();
            assert_relative_eq!(
                xn,
                (1.0 + r) / (1.0 + r - 2.0 * r * p),
                max_relative = 1e-12
            );
        }
        assert_relative_eq!(
            xn_carothers(0.99, 2.0).unwrap(),
            100.0,
            max_relative = 1e-12
        );
        // Textbook limit (Odian §2-6): r = 0.99 gives Xn = 199 at p = 1.
        assert_relative_eq!(
            xn_carothers(1.0, 4.0 * 0.99 / 1.99).unwrap(),
            199.0,
            max_relative = 1e-9
        );
    }

    #[test]
    fn flory_glycerol_phthalic_gel_points() {
        // Flory, J. Am. Chem. Soc. 63, 3083 (1941): glycerol + phthalic acid 2 : 3 mol.
        // Carothers: f_avg = 12/5 = 2.4, p_c = 0.833; statistical: p_c = 1/√2 = 0.707.
        let b = BranchInput {
            acid_eq: 6.0,
            hydroxyl_eq: 6.0,
            branch_eq: 6.0,
            branch_functionality: 3,
            branch_is_hydroxyl: true,
        };
        assert_relative_eq!(
            gel_point_statistical(&b).unwrap(),
            std::f64::consts::FRAC_1_SQRT_2,
            epsilon = 1e-12
        );
        assert_relative_eq!(
            gel_point_carothers(2.0 * 6.0 / 5.0).unwrap(),
            0.83333,
            epsilon = 1e-5
        );
        assert!(gel_point_carothers(2.0).is_none());
    }

    #[test]
    fn statistical_gel_point_matches_odian_closed_form() {
        // Odian eq. 2-174 (A groups on branch units): p_c = 1/[r + r·ρ·(f-2)]^½ with
        // r = N_A/N_B ≤ 1 the ratio of the branched (A) to the other (B) groups.
        let (a, b_, rho, f) = (9.0, 10.0, 0.3, 3u32);
        let input = BranchInput {
            acid_eq: b_,
            hydroxyl_eq: a,
            branch_eq: rho * a,
            branch_functionality: f,
            branch_is_hydroxyl: true,
        };
        let r = a / b_;
        let expected = 1.0 / (r + r * rho * (f as f64 - 2.0)).sqrt(); // extent of A (= minority)
        assert_relative_eq!(
            gel_point_statistical(&input).unwrap(),
            expected,
            max_relative = 1e-12
        );
    }

    #[test]
    fn mn_uncertainty_counts_av_twice_with_correction() {
        // GUM first-order propagation, worked by hand: S = 2·0.6 + 55.2 = 56.4,
        // U(S) = √(0.1² + 0.8²) = 0.80623; Mn = 56100·2/56.4 = 1989.36; U = 28.44.
        let mn = mn_end_group(0.6, 55.8, 2.0).unwrap();
        let u = mn_expanded_uncertainty(mn, 0.6, 0.05, 55.2, 0.8, true);
        assert_relative_eq!(mn, 1989.362, epsilon = 1e-3);
        assert_relative_eq!(u, 1989.362 * 0.806226 / 56.4, max_relative = 1e-5);
        let u_plain = mn_expanded_uncertainty(mn, 0.6, 0.05, 55.8, 0.8, false);
        assert!(u_plain < u);
    }

    #[test]
    fn subtracted_correction_leaves_av_out_of_the_sum() {
        // ASTM E1899 measures OHV + AV (chem::hydroxyl_method): OHV = 56.4 − 0.6 = 55.8, and
        // S = AV + OHV = raw = 56.4 carries no AV uncertainty (GUM first order, by hand).
        let c = AcidityCorrection::Subtract;
        assert_relative_eq!(
            corrected_hydroxyl_value(56.4, 0.6, c),
            55.8,
            epsilon = 1e-12
        );
        let mn = mn_end_group(0.6, 55.8, 2.0).unwrap();
        let u = mn_expanded_uncertainty(mn, 0.6, 0.05, 56.4, 0.8, c);
        assert_relative_eq!(u, mn * 0.8 / 56.4, max_relative = 1e-12);
    }

    #[test]
    fn solids_basis_divides_by_fraction() {
        assert_relative_eq!(to_solids_basis(21.0, 0.7), 30.0, max_relative = 1e-12);
    }

    #[test]
    fn av_above_av0_is_refused() {
        let ch = charge(&[(146.14, 146.14, 2, 0, false), (106.12, 106.12, 0, 2, false)]);
        let av0 = initial_acid_value(&ch);
        assert!(progress_at(&ch, av0 + 1.0).is_err());
        // p = 0 at AV = AV0 (property of the balance).
        assert!(progress_at(&ch, av0).unwrap().p_acid.abs() < 1e-12);
    }

    proptest::proptest! {
        #[test]
        fn extent_in_unit_interval_and_xn_monotone(excess in 1.0f64..1.5, av in 0.0f64..1.0) {
            let ch = charge(&[(146.14, 146.14, 2, 0, false), (106.12 * excess, 106.12, 0, 2, false)]);
            let av0 = initial_acid_value(&ch);
            let a = progress_at(&ch, av * av0).unwrap();
            let b = progress_at(&ch, (av * 0.9) * av0).unwrap();
            proptest::prop_assert!((0.0..=1.0).contains(&a.p_acid));
            proptest::prop_assert!(b.p_acid >= a.p_acid);
            let f = average_functionality(&ch);
            let xa = xn_carothers(a.p_minority(&ch), f).unwrap();
            let xb = xn_carothers(b.p_minority(&ch), f).unwrap();
            proptest::prop_assert!(xb >= xa);
        }
    }
}
