//! Property tests (proptest) of the two places every number enters the tool:
//! the cell parser of `[qualifier] number [unit]` and the CSV table reader.
//! The properties are the contracts DESIGN.md states for them: what is
//! written is what is read (round trip through the shortest f64 text and
//! every unit), the qualifier and unit are recognised wherever the spacing
//! puts them, line numbers are right for any line ending, and no input of
//! any shape panics.

use kimech::io::Table;
use kimech::units::{ConcUnit, Qualifier, parse_written};
use proptest::prelude::*;

fn unit() -> impl Strategy<Value = ConcUnit> {
    prop::sample::select(ConcUnit::ALL.to_vec())
}

fn qualifier() -> impl Strategy<Value = Qualifier> {
    prop::sample::select(vec![
        Qualifier::Equal,
        Qualifier::About,
        Qualifier::Less,
        Qualifier::AtMost,
        Qualifier::Greater,
        Qualifier::AtLeast,
    ])
}

/// Finite numbers across the range a double holds in normal form.
fn number() -> impl Strategy<Value = f64> {
    (-1.0e300f64..1.0e300).prop_filter("normal or zero", |v| *v == 0.0 || v.abs() >= f64::MIN_POSITIVE)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    /// A number written with Rust's shortest round-trip formatting, a unit
    /// and a qualifier, with or without spaces, reads back exactly.
    #[test]
    fn a_written_concentration_reads_back_exactly(
        value in number(), u in unit(), q in qualifier(), space_q in any::<bool>(), space_u in any::<bool>()
    ) {
        let q_text = if q == Qualifier::Equal { String::new() } else { q.symbol().to_string() };
        let text = format!(
            "{q_text}{}{value}{}{}",
            if space_q && !q_text.is_empty() { " " } else { "" },
            if space_u { " " } else { "" },
            u.symbol()
        );
        let w = parse_written(&text).map_err(|p| TestCaseError::fail(format!("{text}: {}", p.describe())))?;
        prop_assert_eq!(w.value, value, "{}", text);
        prop_assert_eq!(w.unit, Some(u), "{}", text);
        prop_assert_eq!(w.qualifier, q, "{}", text);
    }

    /// Unit conversion through mol/L and back is the identity to rounding.
    #[test]
    fn unit_conversion_round_trips(value in 1.0e-200f64..1.0e200, from in unit(), to in unit()) {
        let molar = from.to_molar(value);
        let there = to.from_molar(molar);
        let back = from.from_molar(to.to_molar(there));
        prop_assert!(((back - value) / value).abs() < 1e-14, "{} -> {} -> {}", value, there, back);
    }

    /// Any text at all is either a reading or a stated problem, never a panic;
    /// a reading is finite.
    #[test]
    fn any_cell_text_is_read_or_refused(text in ".{0,24}") {
        if let Ok(w) = parse_written(&text) {
            prop_assert!(w.value.is_finite(), "{} read as {}", text, w.value);
        }
    }

    /// The reader gives every data row its line number in the file, whatever
    /// the line ending (LF, CRLF or CR) and with blank lines in between.
    #[test]
    fn line_numbers_are_right_for_any_line_ending(
        values in prop::collection::vec(-1.0e6f64..1.0e6, 1..30),
        ending in prop::sample::select(vec!["\n", "\r\n", "\r"]),
        blank_every in 2usize..7,
    ) {
        let mut text = format!("substrate (uM),rate{ending}");
        let mut expected_lines = Vec::new();
        let mut line = 1u64;
        for (k, v) in values.iter().enumerate() {
            if k % blank_every == blank_every - 1 {
                text.push_str(ending);
                line += 1;
            }
            line += 1;
            text.push_str(&format!("{},{v}{ending}", k + 1));
            expected_lines.push(line);
        }
        let table = Table::parse("p.csv", text.as_bytes(), b',')
            .map_err(|e| TestCaseError::fail(e.to_string()))?;
        let lines: Vec<u64> = table.rows.iter().map(|r| r.line).collect();
        prop_assert_eq!(lines, expected_lines);
        for (row, v) in table.rows.iter().zip(&values) {
            prop_assert_eq!(table.number(row, 1).map_err(|e| TestCaseError::fail(e.to_string()))?, *v);
        }
    }

    /// Arbitrary bytes never make the reader panic.
    #[test]
    fn any_bytes_are_read_or_refused(bytes in prop::collection::vec(any::<u8>(), 0..200)) {
        let _ = Table::parse("x.csv", &bytes, b',');
    }
}
