//! Concentrations, their units and qualifiers.
//!
//! Internally every concentration is in mol/L (f64); units are applied at the
//! edges. Accepted spellings: `pM nM uM µM μM mM M`, and `pmol/L nmol/L
//! umol/L µmol/L mmol/L mol/L` (with `l` or `L`).

use serde::Serialize;
use std::fmt;

/// A unit of amount concentration.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
pub enum ConcUnit {
    /// 1e-12 mol/L.
    #[serde(rename = "pM")]
    Picomolar,
    /// 1e-9 mol/L.
    #[serde(rename = "nM")]
    Nanomolar,
    /// 1e-6 mol/L.
    #[serde(rename = "uM")]
    Micromolar,
    /// 1e-3 mol/L.
    #[serde(rename = "mM")]
    Millimolar,
    /// 1 mol/L.
    #[serde(rename = "M")]
    Molar,
}

/// What the error messages list as accepted.
pub const ACCEPTED_UNITS: &str = "pM, nM, uM (or µM), mM, M, or pmol/L, nmol/L, umol/L, mmol/L, mol/L";

impl ConcUnit {
    /// Every unit, smallest first.
    pub const ALL: [ConcUnit; 5] =
        [ConcUnit::Picomolar, ConcUnit::Nanomolar, ConcUnit::Micromolar, ConcUnit::Millimolar, ConcUnit::Molar];

    /// Parses a unit symbol; `None` for anything not a concentration unit.
    pub fn parse(text: &str) -> Option<ConcUnit> {
        let t = text.trim();
        let prefix = if let Some(p) = t.strip_suffix("mol/L").or_else(|| t.strip_suffix("mol/l")) {
            p
        } else {
            t.strip_suffix('M')?
        };
        match prefix {
            "p" => Some(ConcUnit::Picomolar),
            "n" => Some(ConcUnit::Nanomolar),
            "u" | "µ" | "μ" => Some(ConcUnit::Micromolar),
            "m" => Some(ConcUnit::Millimolar),
            "" => Some(ConcUnit::Molar),
            _ => None,
        }
    }

    /// mol/L per one of this unit.
    pub fn molar_factor(self) -> f64 {
        match self {
            ConcUnit::Picomolar => 1e-12,
            ConcUnit::Nanomolar => 1e-9,
            ConcUnit::Micromolar => 1e-6,
            ConcUnit::Millimolar => 1e-3,
            ConcUnit::Molar => 1.0,
        }
    }

    /// A value in this unit, in mol/L.
    pub fn to_molar(self, value: f64) -> f64 {
        value * self.molar_factor()
    }

    /// A value in mol/L, in this unit.
    pub fn from_molar(self, molar: f64) -> f64 {
        molar / self.molar_factor()
    }

    /// The ASCII symbol used in output (`uM`, not `µM`, so exports stay ASCII).
    pub fn symbol(self) -> &'static str {
        match self {
            ConcUnit::Picomolar => "pM",
            ConcUnit::Nanomolar => "nM",
            ConcUnit::Micromolar => "uM",
            ConcUnit::Millimolar => "mM",
            ConcUnit::Molar => "M",
        }
    }
}

impl fmt::Display for ConcUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol())
    }
}

impl std::str::FromStr for ConcUnit {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        ConcUnit::parse(s).ok_or_else(|| format!("'{s}' is not a concentration unit; use one of {ACCEPTED_UNITS}"))
    }
}

/// A qualifier in front of a number: the value is exact, a bound, or approximate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize)]
pub enum Qualifier {
    /// Exact (`=` or nothing).
    #[default]
    #[serde(rename = "=")]
    Equal,
    /// `<`: the true value is below.
    #[serde(rename = "<")]
    Less,
    /// `<=`.
    #[serde(rename = "<=")]
    AtMost,
    /// `>`: the true value is above.
    #[serde(rename = ">")]
    Greater,
    /// `>=`.
    #[serde(rename = ">=")]
    AtLeast,
    /// `~`: approximate; treated as a number but carried to the output.
    #[serde(rename = "~")]
    About,
}

impl Qualifier {
    /// The symbol as written in tables.
    pub fn symbol(self) -> &'static str {
        match self {
            Qualifier::Equal => "=",
            Qualifier::Less => "<",
            Qualifier::AtMost => "<=",
            Qualifier::Greater => ">",
            Qualifier::AtLeast => ">=",
            Qualifier::About => "~",
        }
    }

    /// Whether the value is a bound rather than a number.
    pub fn is_bound(self) -> bool {
        !matches!(self, Qualifier::Equal | Qualifier::About)
    }

    /// The qualifier of 1/x or −log x: bounds flip direction.
    pub fn reversed(self) -> Qualifier {
        match self {
            Qualifier::Less => Qualifier::Greater,
            Qualifier::AtMost => Qualifier::AtLeast,
            Qualifier::Greater => Qualifier::Less,
            Qualifier::AtLeast => Qualifier::AtMost,
            q => q,
        }
    }

    /// Splits a leading qualifier off a cell: `"> 10 uM"` → (`>`, `"10 uM"`).
    pub fn split(text: &str) -> (Qualifier, &str) {
        let t = text.trim_start();
        for (sym, q) in [
            ("<=", Qualifier::AtMost),
            (">=", Qualifier::AtLeast),
            ("≤", Qualifier::AtMost),
            ("≥", Qualifier::AtLeast),
            ("<", Qualifier::Less),
            (">", Qualifier::Greater),
            ("~", Qualifier::About),
            ("=", Qualifier::Equal),
        ] {
            if let Some(rest) = t.strip_prefix(sym) {
                return (q, rest.trim_start());
            }
        }
        (Qualifier::Equal, t)
    }
}

impl fmt::Display for Qualifier {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol())
    }
}

/// A number as written in a cell: qualifier, value and the unit written with it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Written {
    /// `>`, `<`, … or exact.
    pub qualifier: Qualifier,
    /// The number as written (in `unit`, if any).
    pub value: f64,
    /// The unit written in the cell itself, if any.
    pub unit: Option<ConcUnit>,
}

/// Why a cell is not a number (with optional qualifier and unit).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum CellProblem {
    /// Empty cell.
    Empty,
    /// Not a number.
    NotANumber,
    /// `NaN` or infinite.
    NotFinite,
    /// Written with a magnitude beyond the largest double (about 1.8e308).
    TooLarge,
    /// Written non-zero but smaller than the smallest normal double
    /// (about 2.2e-308), so it would be read as 0 or lose its digits.
    TooSmall,
    /// Text after the number that is not a concentration unit.
    UnknownUnit(String),
}

impl CellProblem {
    /// A short description for error messages.
    pub fn describe(&self) -> String {
        match self {
            CellProblem::Empty => "empty cell".into(),
            CellProblem::NotANumber => "not a number".into(),
            CellProblem::NotFinite => "not a finite number".into(),
            CellProblem::TooLarge => {
                "too large to hold: beyond ±1.8e308, the largest number a double can hold (check the exponent or the unit)".into()
            }
            CellProblem::TooSmall => {
                "too small to hold: non-zero but below 2.2e-308, the smallest normal double, so it would be read as 0 (check the exponent or the unit)".into()
            }
            CellProblem::UnknownUnit(u) => format!("unknown unit '{u}'"),
        }
    }
}

/// Parses `[qualifier] number [unit]`, e.g. `"150 nM"`, `">10uM"`, `"1e-3"`.
pub fn parse_written(cell: &str) -> Result<Written, CellProblem> {
    if let Some(value) = plain_decimal(cell) {
        return Ok(Written { qualifier: Qualifier::Equal, value, unit: None });
    }
    let (qualifier, rest) = Qualifier::split(cell);
    let rest = rest.trim();
    if rest.is_empty() {
        return Err(CellProblem::Empty);
    }
    let split = number_prefix_len(rest);
    let (number, unit_text) = rest.split_at(split);
    let value: f64 = number.parse().map_err(|_| {
        if rest.eq_ignore_ascii_case("nan") || rest.to_ascii_lowercase().contains("inf") {
            CellProblem::NotFinite
        } else {
            CellProblem::NotANumber
        }
    })?;
    check_magnitude(number, value)?;
    let unit_text = unit_text.trim();
    let unit = if unit_text.is_empty() {
        None
    } else {
        Some(ConcUnit::parse(unit_text).ok_or_else(|| CellProblem::UnknownUnit(unit_text.to_string()))?)
    };
    Ok(Written { qualifier, value, unit })
}

/// The value of a cell that is only a plain decimal (`-12.5`, `10000`,
/// `0.000123`: an optional minus, at most 15 digits, at most one point),
/// computed as Clinger's fast path (PLDI 1990): the digits as an integer
/// below 2^53 and a power of ten up to 10^15 are exact doubles, so one
/// correctly rounded division gives the correctly rounded value — the same
/// double `str::parse` gives. Anything else (exponents, units,
/// qualifiers, spaces, long mantissas) returns `None` for the general parser.
pub(crate) fn plain_decimal(cell: &str) -> Option<f64> {
    const POWERS: [f64; 16] = [1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15];
    let bytes = cell.as_bytes();
    let (negative, bytes) = match bytes.split_first() {
        Some((b'-', rest)) => (true, rest),
        _ => (false, bytes),
    };
    // At most 15 digits and one point; the mantissa then stays below 10^15.
    if bytes.is_empty() || bytes.len() > 16 {
        return None;
    }
    // The digits before the point, then (after it) the rest, which must all
    // be digits: one test a byte in either loop.
    let (mut mantissa, mut i) = (0u64, 0);
    while let Some(&b) = bytes.get(i) {
        let digit = b.wrapping_sub(b'0');
        if digit >= 10 {
            break;
        }
        mantissa = 10 * mantissa + u64::from(digit);
        i += 1;
    }
    let point = i < bytes.len();
    if point {
        if bytes[i] != b'.' {
            return None;
        }
        for &b in &bytes[i + 1..] {
            let digit = b.wrapping_sub(b'0');
            if digit >= 10 {
                return None;
            }
            mantissa = 10 * mantissa + u64::from(digit);
        }
    }
    let digits = bytes.len() - usize::from(point);
    if digits == 0 || digits > 15 {
        return None;
    }
    let decimals = if point { bytes.len() - 1 - i } else { 0 };
    let value = mantissa as f64 / POWERS[decimals];
    Some(if negative { -value } else { value })
}

/// A decimal number that parsed to ±∞ overflowed, and one with a non-zero
/// digit that parsed to 0 or a subnormal underflowed: Rust's parser rounds
/// both silently (`"1e-400"` is 0), so a typo in an exponent would pass as
/// a value.
fn check_magnitude(number: &str, value: f64) -> Result<(), CellProblem> {
    let has_digits = number.bytes().any(|b| b.is_ascii_digit());
    if !value.is_finite() {
        // `inf` and `NaN` are words; `1e400` is digits that overflowed.
        return Err(if has_digits && value.is_infinite() { CellProblem::TooLarge } else { CellProblem::NotFinite });
    }
    let mantissa = number.split(['e', 'E']).next().unwrap_or("");
    let written_non_zero = mantissa.bytes().any(|b| (b'1'..=b'9').contains(&b));
    if written_non_zero && value.abs() < f64::MIN_POSITIVE {
        return Err(CellProblem::TooSmall);
    }
    Ok(())
}

/// Length of the leading run of characters that can belong to a decimal
/// number in scientific notation.
fn number_prefix_len(s: &str) -> usize {
    let bytes = s.as_bytes();
    let mut i = 0;
    let mut seen_digit = false;
    if i < bytes.len() && (bytes[i] == b'+' || bytes[i] == b'-') {
        i += 1;
    }
    while i < bytes.len() && (bytes[i].is_ascii_digit() || bytes[i] == b'.') {
        seen_digit |= bytes[i].is_ascii_digit();
        i += 1;
    }
    if seen_digit && i < bytes.len() && (bytes[i] == b'e' || bytes[i] == b'E') {
        let mut j = i + 1;
        if j < bytes.len() && (bytes[j] == b'+' || bytes[j] == b'-') {
            j += 1;
        }
        if j < bytes.len() && bytes[j].is_ascii_digit() {
            while j < bytes.len() && bytes[j].is_ascii_digit() {
                j += 1;
            }
            i = j;
        }
    }
    if seen_digit { i } else { s.len() }
}

/// A concentration given on the command line, e.g. `--enzyme "10 nM"`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ConcentrationArg {
    /// In mol/L.
    pub molar: f64,
    /// The unit it was written in.
    pub unit: ConcUnit,
}

impl ConcentrationArg {
    /// Parses `number unit`; the unit is required and the value must be positive.
    pub fn parse(text: &str) -> Result<ConcentrationArg, String> {
        let w = parse_written(text).map_err(|p| format!("{}: expected e.g. '10 nM'", p.describe()))?;
        if w.qualifier != Qualifier::Equal {
            return Err("a qualifier makes no sense here; give the concentration itself, e.g. '10 nM'".into());
        }
        let unit = w
            .unit
            .ok_or_else(|| format!("'{text}' has no unit; write it with one, e.g. '{text} nM' ({ACCEPTED_UNITS})"))?;
        if w.value <= 0.0 {
            return Err(format!("'{text}' is not positive; a concentration must be > 0"));
        }
        let molar = unit.to_molar(w.value);
        if !molar.is_finite() || molar < f64::MIN_POSITIVE {
            return Err(format!("'{text}' is {molar:e} mol/L, beyond what a double can hold; check the exponent"));
        }
        Ok(ConcentrationArg { molar, unit })
    }
}

/// How close two concentrations must be (relatively) to be the same level:
/// far above the rounding of a unit conversion (~1e-16), far below any
/// difference a dilution series means.
pub const LEVEL_TOLERANCE: f64 = 1e-9;

/// Each concentration replaced by the level it belongs to, so that values
/// written in different units (`1000 nM`, `1 uM`), which differ in their
/// last bits after conversion, group as replicates. Sorted values closer
/// than [`LEVEL_TOLERANCE`] (relative) to the first of their run share its
/// value; the output is in the input's order.
pub fn same_levels(values: &[f64]) -> Vec<f64> {
    let mut order: Vec<usize> = (0..values.len()).collect();
    order.sort_by(|&a, &b| values[a].total_cmp(&values[b]));
    let mut levels = values.to_vec();
    let mut first: Option<f64> = None;
    for &k in &order {
        let v = values[k];
        match first {
            Some(f) if (v - f).abs() <= LEVEL_TOLERANCE * f.abs().max(v.abs()) => levels[k] = f,
            _ => first = Some(v),
        }
    }
    levels
}

/// −log10 of a molar concentration: pKi, pIC50.
pub fn p_value(molar: f64) -> f64 {
    -molar.log10()
}

/// A number for people: `digits` significant digits, scientific when very
/// large or small.
pub fn sig(value: f64, digits: usize) -> String {
    if !value.is_finite() {
        return if value.is_nan() { "—".into() } else { format!("{value}") };
    }
    if value == 0.0 {
        return "0".into();
    }
    let magnitude = value.abs().log10().floor() as i32;
    if !(-4..6).contains(&magnitude) {
        return format!("{:.*e}", digits.saturating_sub(1), value);
    }
    let decimals = (digits as i32 - 1 - magnitude).max(0) as usize;
    format!("{value:.decimals$}")
}

/// A potency (IC50, Ki, KI …) for people: three significant figures, the
/// integer digits rounded too (`6666` → `6670`), so that a table never
/// suggests more precision than an assay carries (common practice).
pub fn potency(value: f64) -> String {
    if !value.is_finite() || value == 0.0 {
        return sig(value, 3);
    }
    let magnitude = value.abs().log10().floor() as i32;
    if (3..6).contains(&magnitude) {
        let step = 10f64.powi(magnitude - 2);
        let rounded = (value / step).round() * step;
        return sig(rounded, 3);
    }
    sig(value, 3)
}

/// A unit as people read it: `uM` → `µM` and `umol` → `µmol` wherever they
/// stand as a unit (`uM/min`, `1/(uM·min)`), the ASCII spelling being kept
/// for files (exports stay ASCII).
pub fn for_people(unit: &str) -> String {
    let mut out = String::with_capacity(unit.len() + 1);
    for (i, c) in unit.char_indices() {
        let starts_word = !unit[..i].ends_with(|b: char| b.is_ascii_alphabetic());
        let rest = &unit[i + c.len_utf8()..];
        let micro_molar = rest.starts_with('M') && !rest[1..].starts_with(|b: char| b.is_ascii_alphabetic());
        if c == 'u' && starts_word && (micro_molar || rest.starts_with("mol")) {
            out.push('µ');
        } else {
            out.push(c);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn potencies_have_three_significant_figures() {
        for (v, text) in [
            (9.454, "9.45"),
            (0.35, "0.350"),
            (6666.0, "6670"),
            (49999.0, "50000"),
            (835.1, "835"),
            (1.0e7, "1.00e7"),
            (-12.34, "-12.3"),
        ] {
            assert_eq!(potency(v), text, "{v}");
        }
    }

    #[test]
    fn micro_is_written_as_mu_for_people_only_where_it_is_a_unit() {
        for (unit, text) in [
            ("uM", "µM"),
            ("uM/min", "µM/min"),
            ("1/(uM*min)", "1/(µM*min)"),
            ("1/(uM·min)", "1/(µM·min)"),
            ("umol/L", "µmol/L"),
            ("nM", "nM"),
            ("1/min", "1/min"),
            ("uMax", "uMax"),
            ("sum", "sum"),
        ] {
            assert_eq!(for_people(unit), text, "{unit}");
        }
    }

    #[test]
    fn parses_every_accepted_spelling() {
        for (text, unit) in [
            ("pM", ConcUnit::Picomolar),
            ("nM", ConcUnit::Nanomolar),
            ("uM", ConcUnit::Micromolar),
            ("µM", ConcUnit::Micromolar),
            ("μM", ConcUnit::Micromolar),
            ("mM", ConcUnit::Millimolar),
            ("M", ConcUnit::Molar),
            ("mol/L", ConcUnit::Molar),
            ("mmol/L", ConcUnit::Millimolar),
            ("umol/l", ConcUnit::Micromolar),
            ("nmol/L", ConcUnit::Nanomolar),
        ] {
            assert_eq!(ConcUnit::parse(text), Some(unit), "{text}");
        }
        for bad in ["mg/L", "nm", "MM", "", "min", "ng"] {
            assert_eq!(ConcUnit::parse(bad), None, "{bad}");
        }
    }

    #[test]
    fn parses_cells_with_qualifiers_and_units() {
        let w = parse_written("> 10 uM").unwrap();
        assert_eq!((w.qualifier, w.unit), (Qualifier::Greater, Some(ConcUnit::Micromolar)));
        assert_relative_eq!(w.value, 10.0);
        let w = parse_written("<=1.5e-3mM").unwrap();
        assert_eq!((w.qualifier, w.unit), (Qualifier::AtMost, Some(ConcUnit::Millimolar)));
        assert_relative_eq!(w.value, 1.5e-3);
        let w = parse_written("-2.5").unwrap();
        assert_relative_eq!(w.value, -2.5);
        assert_eq!(parse_written("abc"), Err(CellProblem::NotANumber));
        assert_eq!(parse_written("NaN"), Err(CellProblem::NotFinite));
        assert_eq!(parse_written("inf"), Err(CellProblem::NotFinite));
    }

    #[test]
    fn same_levels_groups_values_written_in_different_units() {
        let nm = ConcUnit::Nanomolar.to_molar(300.0) / ConcUnit::Micromolar.to_molar(1.0);
        assert_ne!(nm.to_bits(), 0.3f64.to_bits(), "the case this guards: 300 nM in uM is not 0.3");
        assert_eq!(same_levels(&[0.3, nm, 0.0, 1.0, 0.3001, -0.0]), [0.3, 0.3, 0.0, 1.0, 0.3001, 0.0]);
    }

    #[test]
    fn underflowing_and_overflowing_numbers_are_errors_not_zero_or_infinity() {
        assert_eq!(parse_written("1e-400"), Err(CellProblem::TooSmall));
        assert_eq!(parse_written("-3.5e-320 nM"), Err(CellProblem::TooSmall));
        assert_eq!(parse_written("1e400"), Err(CellProblem::TooLarge));
        assert_eq!(parse_written("> -2e309 uM"), Err(CellProblem::TooLarge));
        assert_eq!(parse_written("0e-400").map(|w| w.value), Ok(0.0));
        assert_eq!(parse_written("0.000").map(|w| w.value), Ok(0.0));
        assert_eq!(parse_written("2.3e-308").map(|w| w.value), Ok(2.3e-308));
        assert_eq!(parse_written("1.7e308").map(|w| w.value), Ok(1.7e308));
        assert_eq!(parse_written("  "), Err(CellProblem::Empty));
        assert_eq!(parse_written("3 furlongs"), Err(CellProblem::UnknownUnit("furlongs".into())));
    }

    #[test]
    fn converts_between_units() {
        assert_relative_eq!(ConcUnit::Nanomolar.to_molar(150.0), 1.5e-7, max_relative = 1e-15);
        assert_relative_eq!(ConcUnit::Micromolar.from_molar(1.5e-7), 0.15, max_relative = 1e-15);
        assert_relative_eq!(p_value(1e-9), 9.0, max_relative = 1e-15);
    }

    /// The fast path gives the very double `str::parse` gives, on every
    /// shape of plain decimal it takes, and declines everything else.
    #[test]
    fn plain_decimals_parse_as_the_standard_library_parses_them() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand::rngs::StdRng::seed_from_u64(7);
        for _ in 0..300_000 {
            let digits = rng.random_range(1..=15);
            let mut text: String = (0..digits).map(|_| char::from(b'0' + rng.random_range(0..10u8))).collect();
            if rng.random_bool(0.7) {
                text.insert(rng.random_range(0..=text.len()), '.');
            }
            if rng.random_bool(0.3) {
                text.insert(0, '-');
            }
            let fast = plain_decimal(&text).unwrap();
            assert_eq!(fast.to_bits(), text.parse::<f64>().unwrap().to_bits(), "{text}");
        }
        for declined in ["", "-", ".", "1e3", "1.2.3", " 1", "+1", "1234567890123456", "> 1", "5 nM", "nan", "--1"] {
            assert_eq!(plain_decimal(declined), None, "{declined}");
        }
        assert_eq!(plain_decimal("-0").map(f64::to_bits), Some((-0.0f64).to_bits()));
    }
}
