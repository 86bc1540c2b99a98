//! Conformity decisions: ASTM E29 rounding on decimals and ILAC-G8 guard-banded verdicts.

use rust_decimal::{Decimal, RoundingStrategy};
use serde::{Deserialize, Serialize};

/// How an exact trailing 5 is rounded.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Rounding {
    /// ASTM E29-13 §6.4.3: an exact 5 rounds to the even digit (default).
    #[default]
    HalfEven,
    /// Some pharmacopoeias: an exact 5 rounds away from zero.
    HalfUp,
}

/// The product's decision rule.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DecisionRule {
    /// ILAC-G8:09/2019 §4.2.1 simple acceptance, guard band w = 0: pass or fail.
    Simple,
    /// ILAC-G8:09/2019 §4.2.3 non-binary statement with guard band w = U.
    Guarded,
}

impl DecisionRule {
    /// Plain statement of the rule for certificates.
    pub fn statement(self) -> &'static str {
        match self {
            DecisionRule::Simple => {
                "simple acceptance (ILAC-G8:09/2019 §4.2.1): a result within the limits passes"
            }
            DecisionRule::Guarded => {
                "non-binary statement with guard band (ILAC-G8:09/2019 §4.2.3): results within U of a limit are conditional"
            }
        }
    }
}

/// Verdict for one property (ILAC-G8:09/2019 §4.2.3 terms).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    /// Within the acceptance zone.
    Pass,
    /// Inside the limit but within the guard band of it.
    ConditionalPass,
    /// Outside the limit but within the guard band of it.
    ConditionalFail,
    /// Outside the limit by more than the guard band.
    Fail,
}

impl Verdict {
    /// The snake_case name used in files and JSON.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Pass => "pass",
            Verdict::ConditionalPass => "conditional_pass",
            Verdict::ConditionalFail => "conditional_fail",
            Verdict::Fail => "fail",
        }
    }

    /// Parses the snake_case name.
    pub fn parse(text: &str) -> Option<Verdict> {
        [
            Verdict::Pass,
            Verdict::ConditionalPass,
            Verdict::ConditionalFail,
            Verdict::Fail,
        ]
        .into_iter()
        .find(|v| v.as_str() == text)
    }

    /// Plain words for people.
    pub fn words(self) -> &'static str {
        match self {
            Verdict::Pass => "pass",
            Verdict::ConditionalPass => "conditional pass",
            Verdict::ConditionalFail => "conditional fail",
            Verdict::Fail => "fail",
        }
    }
}

/// Rounds `value` to `decimals` places with the given method, on the exact decimal.
///
/// ASTM E29-13 §6.4: keep the digit when the next is < 5, raise it when > 5; for an exact
/// 5 (nothing but zeros after it) §6.4.3 rounds to the even digit. `HalfUp` rounds it away
/// from zero instead.
pub fn round(value: Decimal, decimals: u32, method: Rounding) -> Decimal {
    let strategy = match method {
        Rounding::HalfEven => RoundingStrategy::MidpointNearestEven,
        Rounding::HalfUp => RoundingStrategy::MidpointAwayFromZero,
    };
    let mut r = value.round_dp_with_strategy(decimals, strategy);
    r.rescale(decimals);
    r
}

/// Verdict of a reported value against optional limits with guard band `w` (≥ 0).
///
/// ILAC-G8:09/2019 §4.2.3 zones for an upper tolerance limit TL: x ≤ TL − w pass;
/// TL − w < x ≤ TL conditional pass; TL < x ≤ TL + w conditional fail; x > TL + w fail.
/// Lower limits mirror this; with two limits the worse verdict counts. Values exactly on a
/// zone boundary fall in the more favourable zone (convention stated here; ILAC-G8 leaves it to
/// the decision rule). With w = 0 (§4.2.1) only pass and fail remain.
pub fn verdict(x: Decimal, min: Option<Decimal>, max: Option<Decimal>, w: Decimal) -> Verdict {
    let upper = max.map_or(Verdict::Pass, |tl| {
        if x <= tl - w {
            Verdict::Pass
        } else if x <= tl {
            Verdict::ConditionalPass
        } else if x <= tl + w {
            Verdict::ConditionalFail
        } else {
            Verdict::Fail
        }
    });
    let lower = min.map_or(Verdict::Pass, |tl| {
        if x >= tl + w {
            Verdict::Pass
        } else if x >= tl {
            Verdict::ConditionalPass
        } else if x >= tl - w {
            Verdict::ConditionalFail
        } else {
            Verdict::Fail
        }
    });
    upper.max(lower)
}

/// Verdict of a censored result "< L" (below the stated limit L, e.g. below the limit of
/// quantification) against optional limits with guard band `w`; `None` when L is above the
/// maximum, which the caller refuses as bad input (such a result cannot show conformity).
///
/// The true value lies somewhere below L. Against a maximum TL it passes when L ≤ TL − w
/// (the guarded acceptance limit of ILAC-G8:09/2019 §4.2.3; w = 0 under §4.2.1) and is a
/// conditional pass when TL − w < L ≤ TL, since the value itself is unknown. Against a minimum
/// it fails: nothing below L can be shown to reach the minimum. Treating a censored result as
/// "below L", never as a number, is common practice for results under the LOQ.
pub fn censored_verdict(
    limit: Decimal,
    min: Option<Decimal>,
    max: Option<Decimal>,
    w: Decimal,
) -> Option<Verdict> {
    let upper = match max {
        Some(tl) if limit > tl => return None,
        Some(tl) if limit > tl - w => Verdict::ConditionalPass,
        _ => Verdict::Pass,
    };
    let lower = if min.is_some() {
        Verdict::Fail
    } else {
        Verdict::Pass
    };
    Some(upper.max(lower))
}

/// How a censored result is reported: "< L", with L given at least to `decimals` places (a
/// stated limit is never rounded, so it is never understated).
pub fn censored_text(limit: Decimal, decimals: u32) -> String {
    let mut l = limit;
    if l.scale() < decimals {
        l.rescale(decimals);
    }
    format!("< {l}")
}

/// A result as a trend-file cell records it: a number, a censored result `<L`, or a word of
/// a text property.
#[derive(Debug, Clone, PartialEq)]
pub enum RecordedResult {
    /// A number.
    Number(Decimal),
    /// Below the stated limit L (`<L` in the cell).
    Below(Decimal),
    /// A word of a text property, as written in the spec.
    Word(String),
}

impl RecordedResult {
    /// Reads a recorded cell; `None` for an empty cell.
    pub fn parse(cell: &str) -> Option<RecordedResult> {
        let cell = cell.trim();
        if cell.is_empty() {
            return None;
        }
        if let Some(l) = cell.strip_prefix('<') {
            if let Some(d) = recorded_decimal(l.trim()) {
                return Some(RecordedResult::Below(d));
            }
        }
        Some(match recorded_decimal(cell) {
            Some(d) => RecordedResult::Number(d),
            None => RecordedResult::Word(cell.to_string()),
        })
    }

    /// The cell text that records this result: the number, `<L` or the word.
    pub fn cell(&self) -> String {
        match self {
            RecordedResult::Number(d) => d.to_string(),
            RecordedResult::Below(l) => format!("<{l}"),
            RecordedResult::Word(w) => w.clone(),
        }
    }
}

/// Converts a finite f64 to a Decimal (about 15 significant digits kept): the value written
/// with 15 significant digits (`{:.14e}`, correctly rounded), read back exactly.
///
/// The text goes to a buffer on the stack, not the heap: this runs several times for every
/// lot a release decides (issue #13, item 11).
pub fn decimal_from_f64(x: f64) -> Option<Decimal> {
    use std::fmt::Write;
    if !x.is_finite() {
        return None;
    }
    if let Some(d) = fifteen_digits(x) {
        return Some(d);
    }
    let mut text = StackText::default();
    write!(text, "{:.*e}", 14, x).ok()?;
    Decimal::from_scientific(text.as_str())
        .ok()
        .map(|d| d.normalize())
}

/// [`decimal_from_f64`] without text, for 10^-6 <= |x| < 10^14 (`None` outside): the exact
/// binary value m·2^e (IEEE 754) times 10^k, k = 14 − ⌊log10 |x|⌋, is an integer part of 15
/// digits and a remainder, computed exactly in 128 bits and rounded half to even, as Rust's
/// exact float formatting rounds (checked against it in the tests below).
fn fifteen_digits(x: f64) -> Option<Decimal> {
    let a = x.abs();
    if !(1e-6..1e14).contains(&a) {
        return None;
    }
    let bits = a.to_bits();
    let m = u128::from((bits & ((1u64 << 52) - 1)) | (1u64 << 52));
    // a = m · 2^-shift; 6 <= shift <= 73 in the range above.
    let shift = 1075 - ((bits >> 52) & 0x7ff) as u32;
    let mut e10 = a.log10().floor() as i32;
    // log10 may be one off next to a power of ten: the integer part's length corrects it.
    for _ in 0..3 {
        let k = u32::try_from(14 - e10).ok().filter(|&k| k <= 21)?;
        let scaled = m * 10u128.pow(k);
        let floor = scaled >> shift;
        if floor >= 1_000_000_000_000_000 {
            e10 += 1;
            continue;
        }
        if floor < 100_000_000_000_000 {
            e10 -= 1;
            continue;
        }
        let rem = scaled & ((1u128 << shift) - 1);
        let half = 1u128 << (shift - 1);
        let q = if rem > half || (rem == half && floor & 1 == 1) {
            floor + 1
        } else {
            floor
        };
        let q = if x < 0.0 { -(q as i128) } else { q as i128 };
        return Decimal::try_from_i128_with_scale(q, k)
            .ok()
            .map(|d| d.normalize());
    }
    None
}

/// A short text written on the stack; writing more than it holds is an error.
#[derive(Default)]
struct StackText {
    bytes: [u8; 32],
    len: usize,
}

impl StackText {
    fn as_str(&self) -> &str {
        // Only whole `&str`s are ever copied in, so the bytes are valid UTF-8.
        std::str::from_utf8(&self.bytes[..self.len]).unwrap_or_default()
    }
}

impl std::fmt::Write for StackText {
    fn write_str(&mut self, s: &str) -> std::fmt::Result {
        let end = self.len + s.len();
        let slot = self.bytes.get_mut(self.len..end).ok_or(std::fmt::Error)?;
        slot.copy_from_slice(s.as_bytes());
        self.len = end;
        Ok(())
    }
}

/// A recorded value held as `f64` (queries keep a million lots as floats) rounded to
/// `decimals` places exactly as [`round`] rounds its decimal: the value as
/// [`decimal_from_f64`] gives it, then ASTM E29-13 §6.4. `None` for a non-finite value.
///
/// Fast path: when `value · 10^decimals` is below 10^9 in size and at least 10^-6 from a
/// half-unit, the f64 product (error below 2·10^-7 there) rounds to the same integer as the
/// exact decimal, so no decimal is built; only near a tie, where the rounding rule decides,
/// is the decimal formed and [`round`] applied.
pub fn round_recorded(value: f64, decimals: u32, method: Rounding) -> Option<Decimal> {
    if !value.is_finite() {
        return None;
    }
    if decimals <= 9 {
        let scaled = value * 10f64.powi(decimals as i32);
        let frac = (scaled.abs() - scaled.abs().trunc() - 0.5).abs();
        if scaled.abs() < 1e9 && frac > 1e-6 {
            let mut d = Decimal::new(scaled.round() as i64, decimals);
            d.rescale(decimals);
            return Some(d);
        }
    }
    Some(round(decimal_from_f64(value)?, decimals, method))
}

/// [`round_recorded`] as text (what `find` prints): in the fast path the rounded integer is
/// written with its decimal point directly, the same characters as the decimal's own display
/// (`decimals` places, a minus sign only below zero), without building the decimal (issue #20).
pub fn round_recorded_text(value: f64, decimals: u32, method: Rounding) -> Option<String> {
    if value.is_finite() && decimals <= 9 {
        let scaled = value * 10f64.powi(decimals as i32);
        let frac = (scaled.abs() - scaled.abs().trunc() - 0.5).abs();
        if scaled.abs() < 1e9 && frac > 1e-6 {
            return Some(fixed_point(scaled.round() as i64, decimals as usize));
        }
    }
    round_recorded(value, decimals, method).map(|d| d.to_string())
}

/// `units / 10^decimals` written with exactly `decimals` places (at most 9; `units` below
/// 10^9 in size, as [`round_recorded_text`]'s fast path gives them), in one allocation.
fn fixed_point(units: i64, decimals: usize) -> String {
    let mut buf = [0u8; FIXED_BUF];
    write_fixed(&mut buf, units.unsigned_abs(), decimals, units < 0).to_string()
}

/// `d` as text, the same characters as rust_decimal's `Display` gives (every digit of its
/// scale, a minus sign when its sign is negative, zero included), written from the mantissa
/// without the general formatter and without a heap allocation (issue #13, item 11: a lot's
/// values are written this way several times per lot).
pub fn decimal_text(d: Decimal) -> crate::support::text::Text {
    let Ok(n) = u64::try_from(d.mantissa().unsigned_abs()) else {
        return compact_str::ToCompactString::to_compact_string(&d);
    };
    let mut buf = [0u8; FIXED_BUF];
    let text = write_fixed(&mut buf, n, d.scale() as usize, d.is_sign_negative());
    crate::support::text::Text::from(text)
}

/// Room for a u64's 20 digits, 28 places at most (rust_decimal's largest scale), a point and
/// a sign.
const FIXED_BUF: usize = 52;

/// `magnitude / 10^places` written at the end of `buf` with exactly `places` places (a `0`
/// before the point when the magnitude is below one), after a minus sign when `negative`.
fn write_fixed(buf: &mut [u8; FIXED_BUF], magnitude: u64, places: usize, negative: bool) -> &str {
    let mut at = buf.len();
    let mut n = magnitude;
    let mut written = 0;
    loop {
        if written == places && places > 0 {
            at -= 1;
            buf[at] = b'.';
        }
        at -= 1;
        buf[at] = b'0' + (n % 10) as u8;
        n /= 10;
        written += 1;
        if n == 0 && written > places {
            break;
        }
    }
    if negative {
        at -= 1;
        buf[at] = b'-';
    }
    // Only ASCII digits, '.' and '-' were written.
    std::str::from_utf8(&buf[at..]).unwrap_or_default()
}

/// `d` as the nearest-enough `f64`, bit for bit what rust_decimal's `to_f64` gives (its
/// `as_f64`: integral part plus fraction over 10^scale, then rounded at the scale), done in
/// 64-bit arithmetic when the mantissa and 10^scale fit in 64 bits, which avoids 128-bit
/// division (issue #13, item 11); otherwise rust_decimal's own conversion.
pub fn decimal_to_f64(d: Decimal) -> f64 {
    let scale = d.scale();
    let mantissa = d.mantissa().unsigned_abs();
    let (Ok(m), true) = (u64::try_from(mantissa), scale <= 19) else {
        return rust_decimal::prelude::ToPrimitive::to_f64(&d).unwrap_or(f64::NAN);
    };
    let neg = d.is_sign_negative();
    if scale == 0 {
        // rust_decimal converts the signed integer; the magnitude and sign give the same bits
        // except for a negative zero, which the integer path makes +0.
        let v = m as f64;
        return if neg && m != 0 { -v } else { v };
    }
    let precision = 10u64.pow(scale);
    let integral = (m / precision) as f64;
    let frac = (m % precision) as f64 / precision as f64;
    if frac == 0.0 {
        return if neg { -integral } else { integral };
    }
    let value = integral + frac;
    let round_to = 10f64.powi(scale as i32);
    let rounded = (value * round_to).round() / round_to;
    if neg {
        -rounded
    } else {
        rounded
    }
}

/// A decimal as recorded in a trend-file cell: its exact text, or, for a cell written in
/// floating-point form (an exponent), the nearest decimal. `None` for anything else.
pub fn recorded_decimal(cell: &str) -> Option<Decimal> {
    cell.parse::<Decimal>()
        .ok()
        .or_else(|| cell.parse::<f64>().ok().and_then(decimal_from_f64))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Issue #13 item 11: [`decimal_text`] writes what rust_decimal's `Display` writes (the
    /// reference), and [`decimal_to_f64`] gives the bits rust_decimal's `to_f64` gives (the
    /// reference), over random mantissas, scales and signs, zeros and the widest mantissa.
    #[test]
    fn decimal_text_and_float_match_rust_decimal_issue_13() {
        use rust_decimal::prelude::ToPrimitive;
        let mut next = crate::support::test_rng::xorshift(0x2545_f491_4f6c_dd1d);
        let mut values = vec![
            Decimal::ZERO,
            Decimal::new(0, 3),
            -Decimal::new(0, 2),
            Decimal::new(-0, 0),
            Decimal::MAX,
            Decimal::MIN,
            Decimal::new(5, 28),
            Decimal::new(i64::MAX, 19),
            Decimal::new(i64::MIN + 1, 4),
            Decimal::new(20005, 4),
        ];
        for _ in 0..200_000 {
            let r = next();
            let digits = 1 + (r % 19) as u32;
            let m = (next() % 10u64.pow(digits)) as i64;
            let m = if r & (1 << 40) != 0 { -m } else { m };
            let scale = ((r >> 8) % 29) as u32;
            values.push(Decimal::new(m, scale));
        }
        for d in values {
            assert_eq!(decimal_text(d).as_str(), d.to_string(), "text of {d:?}");
            let want = d.to_f64().unwrap();
            let got = decimal_to_f64(d);
            assert_eq!(got.to_bits(), want.to_bits(), "{d:?}: {got:e} vs {want:e}");
        }
    }

    /// Issue #20: the text of a rounded recorded value is the decimal's own display (the
    /// reference: rust_decimal's `Display` of [`round_recorded`]'s result), in the fast path
    /// and near ties, for both rounding methods.
    #[test]
    fn rounded_text_is_the_decimals_display() {
        let mut next = crate::support::test_rng::xorshift(0x9e37_79b9_7f4a_7c15);
        let mut values = vec![
            0.0, -0.0, 0.0205, 0.0215, -0.0049, 0.5, 2.5, 1999.5, -1999.5, 1e-12,
        ];
        for _ in 0..50_000 {
            let r = next();
            let magnitude = 10f64.powi((r % 9) as i32 - 4);
            let v = ((r >> 8) % 2_000_000) as f64 / 1000.0 * magnitude;
            values.push(if r >> 40 & 1 == 1 { -v } else { v });
        }
        for v in values {
            for d in 0..=6 {
                for m in [Rounding::HalfEven, Rounding::HalfUp] {
                    assert_eq!(
                        round_recorded_text(v, d, m),
                        round_recorded(v, d, m).map(|x| x.to_string()),
                        "{v} to {d} places, {m:?}"
                    );
                }
            }
        }
    }

    /// Issue #16: the float fast path rounds as the decimal rule does, ties included (ASTM
    /// E29-13 §6.4.3: 0.0205 to three places is 0.020, 0.0215 is 0.022; half up gives 0.021).
    #[test]
    fn recorded_floats_round_as_their_decimals_issue_16() {
        assert_eq!(
            round_recorded(0.0205, 3, Rounding::HalfEven)
                .unwrap()
                .to_string(),
            "0.020"
        );
        assert_eq!(
            round_recorded(0.0215, 3, Rounding::HalfEven)
                .unwrap()
                .to_string(),
            "0.022"
        );
        assert_eq!(
            round_recorded(0.0205, 3, Rounding::HalfUp)
                .unwrap()
                .to_string(),
            "0.021"
        );
        assert_eq!(
            round_recorded(2.675, 2, Rounding::HalfEven)
                .unwrap()
                .to_string(),
            "2.68"
        );
        assert_eq!(
            round_recorded(-1.5, 0, Rounding::HalfEven)
                .unwrap()
                .to_string(),
            "-2"
        );
        assert_eq!(
            round_recorded(1989.3617021276596, 0, Rounding::HalfEven)
                .unwrap()
                .to_string(),
            "1989"
        );
        assert_eq!(round_recorded(f64::NAN, 1, Rounding::HalfEven), None);
        // Every value on a grid of ties and near-ties: fast path and decimal rule agree.
        for i in 0..20_000 {
            let v = i as f64 * 0.000_25 - 2.0;
            for d in 0..5 {
                for m in [Rounding::HalfEven, Rounding::HalfUp] {
                    assert_eq!(
                        round_recorded(v, d, m),
                        Some(round(decimal_from_f64(v).unwrap(), d, m)),
                        "{v} to {d}"
                    );
                }
            }
        }
    }

    #[test]
    fn recorded_cells_read_back_exactly() {
        assert_eq!(recorded_decimal("0.50").unwrap().to_string(), "0.50");
        assert_eq!(recorded_decimal("1e-2").unwrap().to_string(), "0.01");
        assert_eq!(recorded_decimal(""), None);
        assert_eq!(recorded_decimal("n/a"), None);
    }
    use std::str::FromStr;

    fn d(s: &str) -> Decimal {
        Decimal::from_str(s).unwrap()
    }

    #[test]
    fn astm_e29_rounding_examples() {
        // ASTM E29-13 §6.4 examples (rounding to the nearest unit of the last kept place):
        // 3.14159 → 3.142 (4 places to 3 by the 4th digit), 2.7182818 → 2.718.
        assert_eq!(round(d("3.14159"), 3, Rounding::HalfEven), d("3.142"));
        assert_eq!(round(d("2.7182818"), 3, Rounding::HalfEven), d("2.718"));
        // §6.4.3: exact 5 rounds to even: 0.125 → 0.12, 0.135 → 0.14, 2.5 → 2, 3.5 → 4.
        assert_eq!(round(d("0.125"), 2, Rounding::HalfEven), d("0.12"));
        assert_eq!(round(d("0.135"), 2, Rounding::HalfEven), d("0.14"));
        assert_eq!(round(d("2.5"), 0, Rounding::HalfEven), d("2"));
        assert_eq!(round(d("3.5"), 0, Rounding::HalfEven), d("4"));
        // A 5 followed by non-zero digits is above half: 0.1251 → 0.13.
        assert_eq!(round(d("0.1251"), 2, Rounding::HalfEven), d("0.13"));
        // Half up (pharmacopoeial practice): 0.125 → 0.13.
        assert_eq!(round(d("0.125"), 2, Rounding::HalfUp), d("0.13"));
        // Reporting precision is kept: 56 to one decimal is 56.0.
        assert_eq!(round(d("56"), 1, Rounding::HalfEven).to_string(), "56.0");
    }

    #[test]
    fn binary_float_would_get_the_tie_wrong() {
        // 0.125 is exact in binary, but 2.675 is not (it is 2.67499999... as f64), so f64
        // rounding gives 2.67 where ASTM E29 on the decimal as entered gives 2.68.
        assert_eq!(format!("{:.2}", 2.675_f64), "2.67");
        assert_eq!(round(d("2.675"), 2, Rounding::HalfEven), d("2.68"));
    }

    #[test]
    fn ilac_g8_zones_upper_limit() {
        // ILAC-G8:09/2019 §4.2.3, upper limit 1.0, w = U = 0.05.
        let (max, w) = (Some(d("1.0")), d("0.05"));
        assert_eq!(verdict(d("0.90"), None, max, w), Verdict::Pass);
        assert_eq!(verdict(d("0.95"), None, max, w), Verdict::Pass); // on the acceptance limit
        assert_eq!(verdict(d("0.96"), None, max, w), Verdict::ConditionalPass);
        assert_eq!(verdict(d("1.00"), None, max, w), Verdict::ConditionalPass); // exactly at TL
        assert_eq!(verdict(d("1.01"), None, max, w), Verdict::ConditionalFail);
        assert_eq!(verdict(d("1.05"), None, max, w), Verdict::ConditionalFail);
        assert_eq!(verdict(d("1.06"), None, max, w), Verdict::Fail);
    }

    #[test]
    fn ilac_g8_zones_lower_limit_and_window() {
        let (min, max, w) = (Some(d("53.0")), Some(d("59.0")), d("0.8"));
        assert_eq!(verdict(d("56.0"), min, max, w), Verdict::Pass);
        assert_eq!(verdict(d("53.5"), min, max, w), Verdict::ConditionalPass);
        assert_eq!(verdict(d("52.5"), min, max, w), Verdict::ConditionalFail);
        assert_eq!(verdict(d("52.1"), min, max, w), Verdict::Fail);
        assert_eq!(verdict(d("59.5"), min, max, w), Verdict::ConditionalFail);
    }

    #[test]
    fn simple_rule_is_binary() {
        // ILAC-G8:09/2019 §4.2.1: w = 0.
        let z = Decimal::ZERO;
        assert_eq!(verdict(d("1.00"), None, Some(d("1.0")), z), Verdict::Pass);
        assert_eq!(verdict(d("1.01"), None, Some(d("1.0")), z), Verdict::Fail);
    }

    #[test]
    fn censored_results_issue_15() {
        // Rule stated at censored_verdict (ILAC-G8:09/2019 §4.2.3 acceptance limit TL − w).
        let (max, w) = (Some(d("0.05")), d("0.01"));
        assert_eq!(
            censored_verdict(d("0.01"), None, max, w),
            Some(Verdict::Pass)
        );
        assert_eq!(
            censored_verdict(d("0.04"), None, max, w),
            Some(Verdict::Pass)
        ); // = TL − w
        assert_eq!(
            censored_verdict(d("0.045"), None, max, w),
            Some(Verdict::ConditionalPass)
        );
        assert_eq!(
            censored_verdict(d("0.05"), None, max, w),
            Some(Verdict::ConditionalPass)
        );
        assert_eq!(censored_verdict(d("0.06"), None, max, w), None);
        // Simple rule: w = 0, anything at or under the maximum passes.
        assert_eq!(
            censored_verdict(d("0.05"), None, max, Decimal::ZERO),
            Some(Verdict::Pass)
        );
        // Against a minimum a censored result fails.
        assert_eq!(
            censored_verdict(d("0.01"), Some(d("0.5")), None, w),
            Some(Verdict::Fail)
        );
        assert_eq!(censored_text(d("0.01"), 2), "< 0.01");
        assert_eq!(censored_text(d("0.1"), 2), "< 0.10");
        assert_eq!(censored_text(d("0.005"), 2), "< 0.005");
    }

    #[test]
    fn recorded_results_read_back_issue_15() {
        assert_eq!(
            RecordedResult::parse("0.50"),
            Some(RecordedResult::Number(d("0.50")))
        );
        assert_eq!(
            RecordedResult::parse("<0.01"),
            Some(RecordedResult::Below(d("0.01")))
        );
        assert_eq!(
            RecordedResult::parse("clear"),
            Some(RecordedResult::Word("clear".into()))
        );
        assert_eq!(RecordedResult::parse(""), None);
        assert_eq!(RecordedResult::Below(d("0.01")).cell(), "<0.01");
    }

    #[test]
    fn f64_conversion_keeps_fifteen_digits() {
        assert_eq!(
            decimal_from_f64(1989.3617021276596).unwrap(),
            d("1989.36170212766")
        );
        assert!(decimal_from_f64(f64::NAN).is_none());
    }

    /// Issue #13 item 11: the stack-buffer conversion gives exactly what the heap text did
    /// (`format!` then `from_scientific`), over magnitudes from 1e-30 to 1e30, both signs,
    /// the extremes of f64 and values whose 16th digit is a tie.
    #[test]
    fn f64_conversion_matches_the_heap_text_issue_13() {
        let heap = |x: f64| {
            Decimal::from_scientific(&format!("{:.*e}", 14, x))
                .ok()
                .map(|d| d.normalize())
        };
        let mut xs = vec![
            0.0,
            -0.0,
            f64::MAX,
            f64::MIN_POSITIVE,
            -f64::MAX,
            5e-324,
            0.1,
            0.125,
            1.000000000000005,
            2.0000000000000045,
            1e28,
            7.9e28,
            // Exact ties in the 16th digit (ASTM E29 half-even, as Rust formats them).
            1234567890123.125,
            1234567890123.375,
            123456789012.0625,
            123456789012.1875,
            0.5,
            1e-6,
            1e14,
            1982.3321554770318,
        ];
        // Powers of ten and their neighbours, where log10 may be one off.
        for e in -8..=15 {
            let p = 10f64.powi(e);
            xs.extend([p, p.next_up(), p.next_down(), -p.next_down()]);
        }
        let mut next = crate::support::test_rng::xorshift(0x2545_f491_4f6c_dd1d);
        for e in -30..=30 {
            for _ in 0..2000 {
                let m = 1.0 + (next() >> 11) as f64 / (1u64 << 53) as f64;
                xs.push(m * 10f64.powi(e));
                xs.push(-m * 10f64.powi(e));
            }
        }
        for x in xs {
            assert_eq!(decimal_from_f64(x), heap(x), "{x:e}");
            if let Some(d) = decimal_from_f64(x) {
                assert_eq!(d.to_string(), heap(x).unwrap().to_string(), "{x:e}");
            }
        }
    }
}
