//! The eight Nelson run rules over an individuals chart, evaluated in one pass.
//!
//! Source: L. S. Nelson, "The Shewhart Control Chart—Tests for Special Causes",
//! Journal of Quality Technology 16(4), 1984, pp. 237–239. σ is the chart's σ_within.

use serde::Serialize;

use crate::error::{Error, Result};
use crate::stats::imr::Limits;

/// A set of Nelson rules (1 to 8), stored as a bit mask.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct RuleSet(u8);

impl RuleSet {
    /// All eight Nelson rules.
    pub const ALL: RuleSet = RuleSet(0xFF);
    /// The Western Electric zone rules expressed as Nelson rules 1, 2, 5 and 6.
    ///
    /// The Western Electric Statistical Quality Control Handbook (1956) tests are: one point beyond
    /// 3σ (Nelson 1), two of three beyond 2σ (Nelson 5), four of five beyond 1σ (Nelson 6) and
    /// eight in a row on one side (Nelson 2 uses nine). From memory of the handbook.
    pub const WESTERN_ELECTRIC: RuleSet = RuleSet(0b0011_0011);

    /// An empty set (no rule selected).
    pub const fn empty() -> RuleSet {
        RuleSet(0)
    }

    /// Adds rule `rule` (1..=8); other numbers are ignored.
    pub fn with(self, rule: u8) -> RuleSet {
        if (1..=8).contains(&rule) {
            RuleSet(self.0 | 1 << (rule - 1))
        } else {
            self
        }
    }

    /// Whether rule `rule` (1..=8) is selected.
    pub fn contains(self, rule: u8) -> bool {
        (1..=8).contains(&rule) && self.0 & (1 << (rule - 1)) != 0
    }

    /// The selected rule numbers in increasing order.
    pub fn rules(self) -> impl Iterator<Item = u8> {
        (1..=8).filter(move |&r| self.contains(r))
    }

    /// Parses a rule selection: a comma-separated list of rule numbers ("1,2,3,5"), "we" for
    /// the Western Electric rules (Nelson 1, 2, 5, 6) or "all". Case and spaces are ignored.
    /// `place` names the input in the error (for example "--rules").
    pub fn parse(text: &str, place: &str) -> Result<RuleSet> {
        let fix = "Give rule numbers from 1 to 8 separated by commas (for example 1,2,3,5), \
                   or \"we\" for the Western Electric rules, or \"all\".";
        let t = text.trim().to_ascii_lowercase();
        match t.as_str() {
            "all" => return Ok(RuleSet::ALL),
            "we" => return Ok(RuleSet::WESTERN_ELECTRIC),
            "" => return Err(Error::invalid(place, "no rule was given", fix)),
            _ => {}
        }
        let mut set = RuleSet::empty();
        for part in t.split(',') {
            let p = part.trim();
            match p.parse::<u8>() {
                Ok(r) if (1..=8).contains(&r) => set = set.with(r),
                _ => {
                    return Err(Error::invalid(
                        place,
                        format!("\"{p}\" is not a Nelson rule number"),
                        fix,
                    ))
                }
            }
        }
        Ok(set)
    }
}

impl Default for RuleSet {
    fn default() -> Self {
        RuleSet::ALL
    }
}

/// One run-rule signal: the rule, the point that completes the pattern, and what was seen.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Signal {
    /// Nelson rule number, 1 to 8.
    pub rule: u8,
    /// Index (from 0) of the point that completes the pattern.
    pub index: usize,
    /// One-line plain description of the pattern.
    pub description: &'static str,
}

/// Pattern lengths of the rules (Nelson 1984).
const RUN_SAME_SIDE: usize = 9;
const RUN_TREND: usize = 6;
const RUN_ALTERNATING: usize = 14;
const RUN_WITHIN_1: usize = 15;
const RUN_OUTSIDE_1: usize = 8;

/// Plain descriptions, one per rule and direction.
pub fn describe(rule: u8, upward: bool) -> &'static str {
    match (rule, upward) {
        (1, true) => "one point above the upper control limit (beyond 3 sigma)",
        (1, false) => "one point below the lower control limit (beyond 3 sigma)",
        (2, true) => "nine points in a row above the centre line",
        (2, false) => "nine points in a row below the centre line",
        (3, true) => "six points in a row steadily increasing",
        (3, false) => "six points in a row steadily decreasing",
        (4, _) => "fourteen points in a row alternating up and down",
        (5, true) => "two of three points more than 2 sigma above the centre line",
        (5, false) => "two of three points more than 2 sigma below the centre line",
        (6, true) => "four of five points more than 1 sigma above the centre line",
        (6, false) => "four of five points more than 1 sigma below the centre line",
        (7, _) => "fifteen points in a row within 1 sigma of the centre line",
        (8, _) => "eight points in a row more than 1 sigma from the centre line, on either side",
        _ => "unknown rule",
    }
}

/// Nelson-rule signals of `values` against `limits`; see [`nelson_signals_into`].
pub fn nelson_signals(values: &[f64], limits: &Limits, rules: RuleSet) -> Vec<Signal> {
    let mut out = Vec::new();
    nelson_signals_into(values, limits, rules, &mut out);
    out
}

/// Appends the Nelson-rule signals of `values` to `out`, ordered by index then rule.
///
/// Rules (Nelson 1984), with σ = σ_within and "beyond" meaning strictly beyond:
/// 1 one point beyond 3σ; 2 nine in a row on one side of the centre line (a point on the line
/// breaks the run); 3 six in a row steadily increasing or decreasing (a tie breaks it);
/// 4 fourteen in a row alternating up and down; 5 two of three in a row beyond 2σ on the same
/// side; 6 four of five in a row beyond 1σ on the same side; 7 fifteen in a row within 1σ
/// (either side); 8 eight in a row beyond 1σ (either side).
///
/// A signal is reported at the point that completes the pattern, and again at each later point
/// while the pattern still holds (for rules 5 and 6 only when that point itself lies beyond the
/// zone line, so every reported point is part of its pattern). Near the start of the series the
/// windows of rules 5 and 6 hold the points there are. Non-finite values break every run.
///
/// Limits without spread (MR̄ = 0, [`Limits::has_spread`]) give no signals: the rules count
/// points against σ-wide zones, and with σ = 0 there are none (issue #20).
///
/// One pass, O(n), constant state; the only allocation is growth of `out`.
pub fn nelson_signals_into(values: &[f64], limits: &Limits, rules: RuleSet, out: &mut Vec<Signal>) {
    if !limits.has_spread() {
        return;
    }
    let zones = Zones::of(limits);
    let mut runs = Runs::new();
    for (i, &x) in values.iter().enumerate() {
        if !x.is_finite() {
            runs = Runs::new();
            continue;
        }
        runs.step(x, &zones, &mut |rule, upward| {
            if rules.contains(rule) {
                out.push(Signal {
                    rule,
                    index: i,
                    description: describe(rule, upward),
                });
            }
        });
    }
}

/// The centre line and the 1σ, 2σ and 3σ lines on both sides.
struct Zones {
    centre: f64,
    upper: [f64; 3],
    lower: [f64; 3],
}

impl Zones {
    fn of(limits: &Limits) -> Zones {
        Zones {
            centre: limits.mean,
            upper: [1.0, 2.0, 3.0].map(|k| limits.at_sigma(k)),
            lower: [1.0, 2.0, 3.0].map(|k| limits.at_sigma(-k)),
        }
    }
}

/// The sign of `a - b`: 1, -1 or 0 for a tie.
fn sign(a: f64, b: f64) -> i8 {
    if a > b {
        1
    } else if a < b {
        -1
    } else {
        0
    }
}

/// The constant state of the one-pass rule check: run counters and the shift registers of
/// rules 5 and 6. A non-finite value starts it afresh.
struct Runs {
    side_run: usize,
    side: i8,
    /// Points in the current monotone run.
    trend_run: usize,
    trend_dir: i8,
    /// Points in the current alternating run.
    alt_run: usize,
    last_diff: i8,
    above2: u8,
    below2: u8,
    above1: u8,
    below1: u8,
    within1_run: usize,
    outside1_run: usize,
    prev: f64,
}

impl Runs {
    fn new() -> Runs {
        Runs {
            side_run: 0,
            side: 0,
            trend_run: 1,
            trend_dir: 0,
            alt_run: 1,
            last_diff: 0,
            above2: 0,
            below2: 0,
            above1: 0,
            below1: 0,
            within1_run: 0,
            outside1_run: 0,
            prev: f64::NAN,
        }
    }

    /// Takes the next finite point; `push(rule, upward)` is called for each pattern it completes,
    /// in rule order.
    fn step(&mut self, x: f64, z: &Zones, push: &mut impl FnMut(u8, bool)) {
        // Rule 1.
        if x > z.upper[2] {
            push(1, true);
        } else if x < z.lower[2] {
            push(1, false);
        }
        self.step_side(x, z, push);
        self.step_trend(x, push);
        self.step_zones(x, z, push);
        self.step_band(x, z, push);
        self.prev = x;
    }

    /// Rule 2: nine in a row on one side of the centre line.
    fn step_side(&mut self, x: f64, z: &Zones, push: &mut impl FnMut(u8, bool)) {
        let s = sign(x, z.centre);
        if s != 0 && s == self.side {
            self.side_run += 1;
        } else {
            self.side_run = usize::from(s != 0);
            self.side = s;
        }
        if self.side_run >= RUN_SAME_SIDE {
            push(2, self.side > 0);
        }
    }

    /// Rules 3 and 4 look at the sign of the step from the previous point.
    fn step_trend(&mut self, x: f64, push: &mut impl FnMut(u8, bool)) {
        if self.prev.is_finite() {
            let d = sign(x, self.prev);
            if d != 0 && d == self.trend_dir {
                self.trend_run += 1;
            } else {
                self.trend_run = if d != 0 { 2 } else { 1 };
                self.trend_dir = d;
            }
            if d != 0 && d == -self.last_diff {
                self.alt_run += 1;
            } else {
                self.alt_run = if d != 0 { 2 } else { 1 };
            }
            self.last_diff = d;
        }
        if self.trend_run >= RUN_TREND {
            push(3, self.trend_dir > 0);
        }
        if self.alt_run >= RUN_ALTERNATING {
            push(4, true);
        }
    }

    /// Rules 5 and 6: shift registers of the last three and five points.
    fn step_zones(&mut self, x: f64, z: &Zones, push: &mut impl FnMut(u8, bool)) {
        self.above2 = (self.above2 << 1 | u8::from(x > z.upper[1])) & 0b111;
        self.below2 = (self.below2 << 1 | u8::from(x < z.lower[1])) & 0b111;
        self.above1 = (self.above1 << 1 | u8::from(x > z.upper[0])) & 0b1_1111;
        self.below1 = (self.below1 << 1 | u8::from(x < z.lower[0])) & 0b1_1111;
        if self.above2 & 1 == 1 && self.above2.count_ones() >= 2 {
            push(5, true);
        } else if self.below2 & 1 == 1 && self.below2.count_ones() >= 2 {
            push(5, false);
        }
        if self.above1 & 1 == 1 && self.above1.count_ones() >= 4 {
            push(6, true);
        } else if self.below1 & 1 == 1 && self.below1.count_ones() >= 4 {
            push(6, false);
        }
    }

    /// Rules 7 and 8: runs within and beyond the 1σ band.
    fn step_band(&mut self, x: f64, z: &Zones, push: &mut impl FnMut(u8, bool)) {
        let within = x > z.lower[0] && x < z.upper[0];
        let outside = x > z.upper[0] || x < z.lower[0];
        self.within1_run = if within { self.within1_run + 1 } else { 0 };
        self.outside1_run = if outside { self.outside1_run + 1 } else { 0 };
        if self.within1_run >= RUN_WITHIN_1 {
            push(7, true);
        }
        if self.outside1_run >= RUN_OUTSIDE_1 {
            push(8, true);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeSet;

    /// Limits with centre 0 and σ 1, so values read directly in sigma units (test fixture).
    fn unit() -> Limits {
        Limits {
            n: 100,
            mean: 0.0,
            mr_bar: 1.128,
            sigma_within: 1.0,
            ucl: 3.0,
            lcl: -3.0,
            mr_ucl: 3.267 * 1.128,
            mr_lcl: 0.0,
        }
    }

    #[test]
    fn limits_without_spread_give_no_signal() {
        // Issue #20: a constant column (MR̄ = 0) once flagged every lot. The sum behind x̄
        // rounds, so x̄ differs from the values in the last bit; without the spread check
        // every point would lie "beyond 3σ".
        let values = vec![0.9989; 1000];
        let l = crate::stats::imr_limits(&values).unwrap();
        assert!(nelson_signals(&values, &l, RuleSet::ALL).is_empty());
    }

    fn fired(values: &[f64]) -> BTreeSet<u8> {
        nelson_signals(values, &unit(), RuleSet::ALL)
            .iter()
            .map(|s| s.rule)
            .collect()
    }

    fn first(values: &[f64], rule: u8) -> Option<usize> {
        nelson_signals(values, &unit(), RuleSet::ALL)
            .iter()
            .find(|s| s.rule == rule)
            .map(|s| s.index)
    }

    // Each rule: one series that fires exactly that rule (at the point completing the
    // pattern, definitions per Nelson 1984) and one a single point short of it.

    #[test]
    fn rule_1_one_point_beyond_3_sigma() {
        assert_eq!(fired(&[0.0, 3.1]), BTreeSet::from([1]));
        assert_eq!(first(&[0.0, 3.1], 1), Some(1));
        assert_eq!(fired(&[0.0, -3.1]), BTreeSet::from([1]));
        assert!(
            fired(&[0.0, 3.0]).is_empty(),
            "a point on the limit is not beyond it"
        );
    }

    #[test]
    fn rule_2_nine_on_one_side() {
        assert_eq!(fired(&[0.5; 9]), BTreeSet::from([2]));
        assert_eq!(first(&[0.5; 9], 2), Some(8));
        let mut eight = vec![0.5; 8];
        eight.push(-0.5);
        assert!(fired(&eight).is_empty());
        let mut broken = vec![-0.5; 4];
        broken.push(0.0);
        broken.extend([-0.5; 4]);
        assert!(
            fired(&broken).is_empty(),
            "a point on the centre line breaks the run"
        );
    }

    #[test]
    fn rule_3_six_steadily_changing() {
        let up = [-0.5, -0.3, -0.1, 0.1, 0.3, 0.5];
        assert_eq!(fired(&up), BTreeSet::from([3]));
        assert_eq!(first(&up, 3), Some(5));
        let down: Vec<f64> = up.iter().rev().copied().collect();
        assert_eq!(fired(&down), BTreeSet::from([3]));
        assert!(fired(&[-0.5, -0.3, -0.1, 0.1, 0.3, 0.3]).is_empty());
    }

    #[test]
    fn rule_4_fourteen_alternating() {
        let alt: Vec<f64> = (0..14)
            .map(|i| if i % 2 == 0 { 0.5 } else { -0.5 })
            .collect();
        assert_eq!(fired(&alt), BTreeSet::from([4]));
        assert_eq!(first(&alt, 4), Some(13));
        assert!(fired(&alt[..13]).is_empty());
    }

    #[test]
    fn rule_5_two_of_three_beyond_2_sigma() {
        assert_eq!(fired(&[0.0, 2.5, 0.0, 2.5]), BTreeSet::from([5]));
        assert_eq!(first(&[0.0, 2.5, 0.0, 2.5], 5), Some(3));
        assert_eq!(fired(&[0.0, -2.5, -2.5]), BTreeSet::from([5]));
        assert!(fired(&[2.5, 0.0, 0.0, 2.5]).is_empty());
        assert!(
            fired(&[2.5, 0.0, -2.5]).is_empty(),
            "opposite sides do not count"
        );
    }

    #[test]
    fn rule_6_four_of_five_beyond_1_sigma() {
        let s = [1.5, 1.5, 0.0, 1.5, 1.5];
        assert_eq!(fired(&s), BTreeSet::from([6]));
        assert_eq!(first(&s, 6), Some(4));
        assert!(fired(&[1.5, 1.5, 0.0, 0.0, 1.5, 1.5]).is_empty());
    }

    #[test]
    fn rule_7_fifteen_within_1_sigma() {
        let s: Vec<f64> = (0..15)
            .map(|i| if i % 4 < 2 { 0.5 } else { -0.5 })
            .collect();
        assert_eq!(fired(&s), BTreeSet::from([7]));
        assert_eq!(first(&s, 7), Some(14));
        assert!(fired(&s[..14]).is_empty());
    }

    #[test]
    fn rule_8_eight_beyond_1_sigma_either_side() {
        let s = [1.5, 1.5, -1.5, -1.5, 1.5, 1.5, -1.5, -1.5];
        assert_eq!(fired(&s), BTreeSet::from([8]));
        assert_eq!(first(&s, 8), Some(7));
        assert!(fired(&[1.5, 1.5, -1.5, -1.5, 1.5, 1.5, -1.5, 0.0]).is_empty());
    }

    #[test]
    fn continuing_patterns_signal_at_each_point_and_selection_filters() {
        let s = [0.5; 11];
        let sig = nelson_signals(&s, &unit(), RuleSet::ALL);
        let idx: Vec<usize> = sig.iter().map(|s| s.index).collect();
        assert_eq!(idx, vec![8, 9, 10]);
        assert!(nelson_signals(&s, &unit(), RuleSet::parse("1,3", "--rules").unwrap()).is_empty());
        assert_eq!(
            sig[0].description,
            "nine points in a row above the centre line"
        );
    }

    #[test]
    fn a_non_finite_value_breaks_runs() {
        let mut s = vec![0.5; 5];
        s.push(f64::NAN);
        s.extend([0.5; 5]);
        assert!(fired(&s).is_empty());
    }

    #[test]
    fn rule_selection_parses() {
        let set = RuleSet::parse("1,2,3,5", "--rules").unwrap();
        assert_eq!(set.rules().collect::<Vec<_>>(), vec![1, 2, 3, 5]);
        assert_eq!(
            RuleSet::parse(" WE ", "--rules")
                .unwrap()
                .rules()
                .collect::<Vec<_>>(),
            vec![1, 2, 5, 6]
        );
        assert_eq!(RuleSet::parse("all", "--rules").unwrap(), RuleSet::ALL);
        assert_eq!(
            RuleSet::parse(" 8 , 1", "--rules").unwrap().rules().count(),
            2
        );
        for bad in ["", "0", "9", "1,,2", "x", "1;2"] {
            let e = RuleSet::parse(bad, "--rules").unwrap_err().to_string();
            assert!(e.starts_with("--rules: "), "{e}");
        }
    }
}
