//! Units of measurement: the only place where user units are turned into SI and back.
//!
//! Every quantity inside fickfit is SI (s, m, K, m²/s, kg, mol, or a plain number). A
//! [`Unit`] is an affine map from the user's number `u` to SI,
//!
//! ```text
//! x_SI = scale · u + offset          (values,      `Unit::to_si`)
//! Δx_SI = scale · Δu                 (differences, `Unit::diff_to_si`)
//! ```
//!
//! `offset` is non-zero only for `degC` (0 °C = 273.15 K). A temperature *difference* of 1 °C
//! is 1 K, so uncertainties and steps of temperatures must use the difference map.
//!
//! Accepted unit strings (case-sensitive, surrounding blanks ignored, `^` and `²` may be used
//! in powers, so `m^2/s` and `m²/s` equal `m2/s`):
//!
//! | kind | units |
//! | --- | --- |
//! | time | `s`, `min`, `h`, `d` |
//! | length | `m`, `cm`, `mm`, `um` (also `µm`, `μm`), `nm` |
//! | temperature | `K`, `degC` (also `°C`) |
//! | diffusivity | `m2/s`, `cm2/s`, `mm2/s`, `um2/s` |
//! | mass | `kg`, `g`, `mg`, `ug` (also `µg`) |
//! | amount of substance | `mol`, `mmol`, `umol` (also `µmol`) |
//! | dimensionless | `1`, `-`, `dimensionless`, `fraction`, `%` |
//!
//! A unit the program does not know (counts, a.u., a detector signal) can still be used as an
//! arbitrary scale-1 unit that keeps its label: [`Unit::arbitrary`].
//!
//! Header cells name their unit in brackets at the end: `time [min]`, `x [um]`, `T (degC)`;
//! see [`split_header`].
//!
//! References: BIPM, *The International System of Units (SI)*, 9th ed. 2019, Table 8
//! (minute, hour, day) and section 2.3.1 (T/K = t/°C + 273.15) — from memory.

use std::fmt;

use crate::error::{Error, InputKind, Location, Result};

/// The kind of physical quantity a unit measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Quantity {
    /// Time; SI unit s.
    Time,
    /// Length or position; SI unit m.
    Length,
    /// Thermodynamic temperature; SI unit K.
    Temperature,
    /// Diffusion coefficient or thermal diffusivity; SI unit m²/s.
    Diffusivity,
    /// Mass; SI unit kg.
    Mass,
    /// Amount of substance; SI unit mol.
    Amount,
    /// A plain number (fraction, ratio, percent); SI unit 1.
    Dimensionless,
    /// A unit the user named that fickfit does not convert (counts, a.u., ...); scale 1.
    Arbitrary,
}

impl Quantity {
    /// A short English name, for messages.
    pub fn name(self) -> &'static str {
        match self {
            Quantity::Time => "time",
            Quantity::Length => "length",
            Quantity::Temperature => "temperature",
            Quantity::Diffusivity => "diffusivity",
            Quantity::Mass => "mass",
            Quantity::Amount => "amount of substance",
            Quantity::Dimensionless => "dimensionless",
            Quantity::Arbitrary => "arbitrary",
        }
    }

    /// The SI unit symbol of this kind (empty for dimensionless and arbitrary units).
    pub fn si_symbol(self) -> &'static str {
        match self {
            Quantity::Time => "s",
            Quantity::Length => "m",
            Quantity::Temperature => "K",
            Quantity::Diffusivity => "m2/s",
            Quantity::Mass => "kg",
            Quantity::Amount => "mol",
            Quantity::Dimensionless | Quantity::Arbitrary => "",
        }
    }

    /// The unit strings accepted for this kind, comma-separated, for messages.
    pub fn accepted(self) -> String {
        let list: Vec<&str> = TABLE
            .iter()
            .filter(|e| e.quantity == self)
            .map(|e| e.symbol)
            .collect();
        if list.is_empty() {
            "any label (arbitrary units are set by the caller)".to_string()
        } else {
            list.join(", ")
        }
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// A unit: its label as written, its quantity kind, and the affine map to SI
/// (`x_SI = scale · u + offset`).
#[derive(Debug, Clone, PartialEq)]
pub struct Unit {
    label: String,
    quantity: Quantity,
    scale: f64,
    offset: f64,
}

/// One entry of the unit table: canonical symbol, kind, scale, offset.
struct Entry {
    symbol: &'static str,
    quantity: Quantity,
    scale: f64,
    offset: f64,
}

const fn e(symbol: &'static str, quantity: Quantity, scale: f64) -> Entry {
    Entry {
        symbol,
        quantity,
        scale,
        offset: 0.0,
    }
}

/// 0 °C in kelvin (BIPM SI Brochure, 9th ed., section 2.3.1; exact by definition).
const ZERO_CELSIUS_K: f64 = 273.15;

/// The unit table. Scales are exact decimal definitions (SI Brochure, Table 8 for min/h/d).
const TABLE: &[Entry] = &[
    e("s", Quantity::Time, 1.0),
    e("min", Quantity::Time, 60.0),
    e("h", Quantity::Time, 3600.0),
    e("d", Quantity::Time, 86400.0),
    e("m", Quantity::Length, 1.0),
    e("cm", Quantity::Length, 1e-2),
    e("mm", Quantity::Length, 1e-3),
    e("um", Quantity::Length, 1e-6),
    e("nm", Quantity::Length, 1e-9),
    e("K", Quantity::Temperature, 1.0),
    Entry {
        symbol: "degC",
        quantity: Quantity::Temperature,
        scale: 1.0,
        offset: ZERO_CELSIUS_K,
    },
    e("m2/s", Quantity::Diffusivity, 1.0),
    e("cm2/s", Quantity::Diffusivity, 1e-4),
    e("mm2/s", Quantity::Diffusivity, 1e-6),
    e("um2/s", Quantity::Diffusivity, 1e-12),
    e("kg", Quantity::Mass, 1.0),
    e("g", Quantity::Mass, 1e-3),
    e("mg", Quantity::Mass, 1e-6),
    e("ug", Quantity::Mass, 1e-9),
    e("mol", Quantity::Amount, 1.0),
    e("mmol", Quantity::Amount, 1e-3),
    e("umol", Quantity::Amount, 1e-6),
    e("1", Quantity::Dimensionless, 1.0),
    e("-", Quantity::Dimensionless, 1.0),
    e("dimensionless", Quantity::Dimensionless, 1.0),
    e("fraction", Quantity::Dimensionless, 1.0),
    e("%", Quantity::Dimensionless, 1e-2),
];

/// Spelling variants → canonical symbol: micro sign / Greek mu, degree sign, powers.
fn normalize(s: &str) -> String {
    let s = s.trim();
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            'µ' | 'μ' => out.push('u'),
            '²' => out.push('2'),
            '^' | ' ' => {}
            _ => out.push(c),
        }
    }
    if out == "°C" {
        return "degC".to_string();
    }
    out
}

impl Unit {
    /// Parse a unit string (see the module table). Unknown strings are an
    /// [`InputKind::UnknownUnit`] error listing every accepted unit; the location is empty
    /// (callers that know where the string came from use [`Unit::parse_at`]).
    pub fn parse(s: &str) -> Result<Unit> {
        Unit::parse_at(s, None, &Location::default())
    }

    /// Parse a unit string that must be of the kind `expected` (when given). An unknown unit,
    /// or a unit of another kind, is an [`InputKind::UnknownUnit`] error at `location` listing
    /// the units accepted for `expected` (or all units when `expected` is `None`).
    pub fn parse_at(s: &str, expected: Option<Quantity>, location: &Location) -> Result<Unit> {
        let norm = normalize(s);
        let found = TABLE.iter().find(|e| e.symbol == norm);
        match (found, expected) {
            (Some(entry), Some(q)) if entry.quantity != q => Err(Error::input(
                InputKind::UnknownUnit,
                location.clone(),
                format!(
                    "unit '{}' is a {} unit, but a {} is expected here; use one of: {}",
                    s.trim(),
                    entry.quantity,
                    q,
                    q.accepted()
                ),
            )),
            (Some(entry), _) => Ok(Unit {
                label: s.trim().to_string(),
                quantity: entry.quantity,
                scale: entry.scale,
                offset: entry.offset,
            }),
            (None, Some(q)) => Err(Error::input(
                InputKind::UnknownUnit,
                location.clone(),
                format!(
                    "unknown unit '{}' for a {}; use one of: {}",
                    s.trim(),
                    q,
                    q.accepted()
                ),
            )),
            (None, None) => Err(Error::input(
                InputKind::UnknownUnit,
                location.clone(),
                format!(
                    "unknown unit '{}'; use one of: {} (or declare it as an arbitrary unit)",
                    s.trim(),
                    all_accepted()
                ),
            )),
        }
    }

    /// The SI unit of a kind (scale 1, offset 0), labelled with its SI symbol.
    pub fn si(quantity: Quantity) -> Unit {
        Unit {
            label: quantity.si_symbol().to_string(),
            quantity,
            scale: 1.0,
            offset: 0.0,
        }
    }

    /// A plain number with no unit written (scale 1, empty label).
    pub fn none() -> Unit {
        Unit {
            label: String::new(),
            quantity: Quantity::Dimensionless,
            scale: 1.0,
            offset: 0.0,
        }
    }

    /// A unit fickfit does not convert (counts, a.u., detector volts...): scale 1, kind
    /// [`Quantity::Arbitrary`], label kept for reports.
    pub fn arbitrary(label: impl Into<String>) -> Unit {
        Unit {
            label: label.into().trim().to_string(),
            quantity: Quantity::Arbitrary,
            scale: 1.0,
            offset: 0.0,
        }
    }

    /// The label as the user wrote it (empty for [`Unit::none`]).
    pub fn label(&self) -> &str {
        &self.label
    }

    /// The quantity kind.
    pub fn quantity(&self) -> Quantity {
        self.quantity
    }

    /// Multiplicative factor to SI: `x_SI = scale · u + offset`.
    pub fn scale(&self) -> f64 {
        self.scale
    }

    /// Additive offset to SI in SI units (273.15 K for degC, 0 otherwise).
    pub fn offset(&self) -> f64 {
        self.offset
    }

    /// A value in this unit → SI: `x_SI = scale · u + offset`.
    #[inline]
    pub fn to_si(&self, u: f64) -> f64 {
        self.scale * u + self.offset
    }

    /// An SI value → this unit (for reports): `u = (x_SI − offset) / scale`.
    #[inline]
    pub fn from_si(&self, x: f64) -> f64 {
        (x - self.offset) / self.scale
    }

    /// A difference (step, uncertainty) in this unit → SI: `Δx_SI = scale · Δu`.
    #[inline]
    pub fn diff_to_si(&self, du: f64) -> f64 {
        self.scale * du
    }

    /// A difference in SI → this unit: `Δu = Δx_SI / scale`.
    #[inline]
    pub fn diff_from_si(&self, dx: f64) -> f64 {
        dx / self.scale
    }
}

impl fmt::Display for Unit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.label)
    }
}

/// Every accepted unit symbol, for messages.
pub fn all_accepted() -> String {
    TABLE
        .iter()
        .map(|e| e.symbol)
        .collect::<Vec<_>>()
        .join(", ")
}

/// Split a header cell into its name and its unit string: `time [min]` → (`time`,
/// `Some("min")`), `T (degC)` → (`T`, `Some("degC")`), `sensor 3` → (`sensor 3`, `None`).
///
/// Only a bracketed group at the very end counts as the unit (square brackets or
/// parentheses); both parts are trimmed. An empty group (`x []`) gives `None`.
pub fn split_header(cell: &str) -> (&str, Option<&str>) {
    let cell = cell.trim();
    for (open, close) in [('[', ']'), ('(', ')')] {
        if let Some(body) = cell.strip_suffix(close) {
            if let Some(pos) = body.rfind(open) {
                let name = body[..pos].trim();
                let unit = body[pos + open.len_utf8()..].trim();
                if name.is_empty() {
                    continue;
                }
                return (name, if unit.is_empty() { None } else { Some(unit) });
            }
        }
    }
    (cell, None)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn u(s: &str) -> Unit {
        match Unit::parse(s) {
            Ok(u) => u,
            Err(e) => panic!("unit {s} should parse: {e}"),
        }
    }

    // Definitions of the non-SI units accepted with the SI: BIPM SI Brochure, 9th ed. 2019,
    // Table 8 (from memory): 1 min = 60 s, 1 h = 3600 s, 1 d = 86 400 s.
    #[test]
    fn times() {
        assert_eq!(u("s").to_si(1.0), 1.0);
        assert_eq!(u("min").to_si(1.0), 60.0);
        assert_eq!(u("h").to_si(1.0), 3600.0);
        assert_eq!(u("d").to_si(1.0), 86400.0);
        assert_eq!(u("h").quantity(), Quantity::Time);
    }

    // SI prefixes (SI Brochure, Table 7, from memory).
    #[test]
    fn lengths() {
        assert_eq!(u("m").to_si(2.0), 2.0);
        assert_relative_eq!(u("cm").to_si(1.0), 1e-2);
        assert_relative_eq!(u("mm").to_si(1.0), 1e-3);
        assert_relative_eq!(u("um").to_si(1.0), 1e-6);
        assert_relative_eq!(u("µm").to_si(1.0), 1e-6); // micro sign U+00B5
        assert_relative_eq!(u("μm").to_si(1.0), 1e-6); // Greek mu U+03BC
        assert_relative_eq!(u("nm").to_si(250.0), 2.5e-7);
        assert_eq!(u("µm").quantity(), Quantity::Length);
        assert_eq!(u("µm").label(), "µm");
    }

    // T/K = t/°C + 273.15 (SI Brochure section 2.3.1, from memory); a difference of 1 °C is
    // a difference of 1 K.
    #[test]
    fn temperatures() {
        assert_relative_eq!(u("degC").to_si(25.0), 298.15, epsilon = 1e-12);
        assert_relative_eq!(u("°C").to_si(0.0), 273.15);
        assert_eq!(u("K").to_si(300.0), 300.0);
        assert_eq!(u("degC").diff_to_si(1.0), 1.0);
        assert_eq!(u("degC").diff_from_si(2.5), 2.5);
        assert_relative_eq!(u("degC").from_si(373.15), 100.0, epsilon = 1e-12);
        assert_eq!(u("degC").quantity(), Quantity::Temperature);
    }

    #[test]
    fn diffusivities() {
        assert_eq!(u("m2/s").to_si(1.0), 1.0);
        assert_relative_eq!(u("cm2/s").to_si(1.0), 1e-4);
        assert_relative_eq!(u("mm2/s").to_si(1.0), 1e-6);
        assert_relative_eq!(u("um2/s").to_si(1.0), 1e-12);
        assert_relative_eq!(u("µm²/s").to_si(1.0), 1e-12);
        assert_relative_eq!(u("cm^2/s").to_si(1.0), 1e-4);
        assert_eq!(u("cm2/s").quantity(), Quantity::Diffusivity);
    }

    #[test]
    fn masses_amounts_and_plain_numbers() {
        assert_eq!(u("kg").to_si(1.0), 1.0);
        assert_relative_eq!(u("g").to_si(1.0), 1e-3);
        assert_relative_eq!(u("mg").to_si(1.0), 1e-6);
        assert_relative_eq!(u("ug").to_si(1.0), 1e-9);
        assert_relative_eq!(u("µg").to_si(1.0), 1e-9);
        assert_eq!(u("mol").to_si(1.0), 1.0);
        assert_relative_eq!(u("mmol").to_si(1.0), 1e-3);
        assert_relative_eq!(u("umol").to_si(1.0), 1e-6);
        assert_eq!(u("mg").quantity(), Quantity::Mass);
        assert_eq!(u("umol").quantity(), Quantity::Amount);
        assert_eq!(u("1").to_si(0.5), 0.5);
        assert_eq!(u("-").to_si(0.5), 0.5);
        assert_eq!(u("fraction").to_si(0.5), 0.5);
        assert_eq!(u("dimensionless").to_si(0.5), 0.5);
        assert_relative_eq!(u("%").to_si(50.0), 0.5);
        assert_eq!(u("%").quantity(), Quantity::Dimensionless);
        let a = Unit::arbitrary("counts");
        assert_eq!(a.to_si(7.0), 7.0);
        assert_eq!(a.label(), "counts");
        assert_eq!(a.quantity(), Quantity::Arbitrary);
    }

    #[test]
    fn round_trip_from_si() {
        for s in [
            "s", "min", "h", "d", "cm", "um", "nm", "K", "degC", "cm2/s", "mg", "%",
        ] {
            let unit = u(s);
            for x in [-3.5, 0.0, 1.0, 1234.5] {
                assert_relative_eq!(unit.from_si(unit.to_si(x)), x, epsilon = 1e-9);
                assert_relative_eq!(unit.diff_from_si(unit.diff_to_si(x)), x, epsilon = 1e-9);
            }
        }
    }

    #[test]
    fn unknown_unit_lists_the_accepted_units_of_the_expected_kind() {
        let loc = Location::file("a.csv")
            .with_line(1)
            .with_column("time [fortnight]");
        let err = Unit::parse_at("fortnight", Some(Quantity::Time), &loc).unwrap_err();
        assert_eq!(err.input_kind(), Some(InputKind::UnknownUnit));
        assert_eq!(err.location(), Some(&loc));
        let msg = err.to_string();
        assert!(msg.contains("'fortnight'"), "{msg}");
        assert!(msg.contains("s, min, h, d"), "{msg}");
        // A known unit of the wrong kind is refused too.
        let err = Unit::parse_at("mm", Some(Quantity::Time), &loc).unwrap_err();
        assert_eq!(err.input_kind(), Some(InputKind::UnknownUnit));
        assert!(err.to_string().contains("length"));
        // Without an expected kind every unit is listed.
        let err = Unit::parse("furlong").unwrap_err();
        assert!(err.to_string().contains("cm2/s"));
    }

    #[test]
    fn header_cells() {
        assert_eq!(split_header("time [min]"), ("time", Some("min")));
        assert_eq!(split_header(" x [um] "), ("x", Some("um")));
        assert_eq!(split_header("mass [mg]"), ("mass", Some("mg")));
        assert_eq!(split_header("T [degC]"), ("T", Some("degC")));
        assert_eq!(split_header("T (degC)"), ("T", Some("degC")));
        assert_eq!(split_header("mass (dry) [mg]"), ("mass (dry)", Some("mg")));
        assert_eq!(split_header("sensor 3"), ("sensor 3", None));
        assert_eq!(split_header("x []"), ("x", None));
        assert_eq!(split_header("[mg]"), ("[mg]", None));
    }
}
