//! Numbers with units as written in an experiment file, converted to SI by what they measure.
//!
//! A physical number is written as a TOML number (in the unit stated for that key: the sample's
//! value unit for values, SI otherwise, see `docs/experiment-file.md`), as a string
//! `"<number> <unit>"` such as `"120 um"`, `"1.5e-12 m2/s"`, `"25 degC"`, or as the name of a
//! parameter. Whether a string is a number or a name is decided by its first character: a digit,
//! sign or decimal point starts a number.
//!
//! Units of lengths, times, diffusivities, masses and amounts are those of [`crate::units`].
//! Composite units are built from them: rates `1/<time>` (`1/s`, `1/h`), speeds
//! `<length>/<time>` (`m/s`, `um/s`), and fluxes `<value unit> <length>/<time>` (`K m/s`).
//! The sample's value unit u is a temperature unit (converted to K, with the 273.15 K offset for
//! values and without it for differences) or any other label (a concentration such as `mol/m3`
//! or `wt%`), which is then used as written (scale 1).
//!
//! Gas permeation adds pressures ([`PRESSURE_UNITS`]) and solubility coefficients
//! `<value unit>/<pressure unit>` (`mol/m3/bar`): the concentration just inside a face exposed to
//! a gas at pressure p is S·p (Henry's law).

use crate::units::{Quantity, Unit};

/// What a number in the experiment file measures; decides the units accepted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// Length, m.
    Length,
    /// Time, s.
    Time,
    /// Diffusivity, m²/s.
    Diffusivity,
    /// Rate, 1/s.
    Rate,
    /// Transfer coefficient, m/s.
    Speed,
    /// A value of u (temperature, concentration), in the sample's value unit.
    Value,
    /// A difference of u (amplitude, reference scale u_ref, uncertainty).
    ValueDifference,
    /// A flux of u, u·m/s.
    Flux,
    /// A plain number.
    Dimensionless,
    /// An angle, rad (`rad` or `deg`).
    Angle,
    /// A gas pressure, Pa.
    Pressure,
    /// A solubility coefficient S (value of u per pressure), value unit / Pa.
    Solubility,
    /// A measured quantity of a dataset (mass, amount, value, signal): any unit of
    /// [`crate::units`], a composite of the above, or an unknown label kept at scale 1.
    Measured,
}

impl Kind {
    /// Plain name for messages.
    pub fn name(self) -> &'static str {
        match self {
            Kind::Length => "length",
            Kind::Time => "time",
            Kind::Diffusivity => "diffusivity",
            Kind::Rate => "rate",
            Kind::Speed => "transfer coefficient (speed)",
            Kind::Value => "value of the sample's quantity",
            Kind::ValueDifference => "difference of the sample's quantity",
            Kind::Flux => "flux",
            Kind::Dimensionless => "plain number",
            Kind::Angle => "angle",
            Kind::Pressure => "pressure",
            Kind::Solubility => "solubility coefficient (value per pressure)",
            Kind::Measured => "measured quantity",
        }
    }

    /// The unit of a bare TOML number of this kind, as a label for messages and docs.
    pub fn bare_unit(self, value_unit: &Unit) -> String {
        match self {
            Kind::Length => "m".into(),
            Kind::Time => "s".into(),
            Kind::Diffusivity => "m2/s".into(),
            Kind::Rate => "1/s".into(),
            Kind::Speed => "m/s".into(),
            Kind::Value | Kind::ValueDifference => value_unit.label().to_string(),
            Kind::Flux => format!("{} m/s", value_unit.label()),
            Kind::Dimensionless => String::new(),
            Kind::Angle => "rad".into(),
            Kind::Pressure => "Pa".into(),
            Kind::Solubility => format!("{}/Pa", value_unit.label()),
            Kind::Measured => String::new(),
        }
    }
}

/// An affine map from a written number to SI, with the unit label for reports.
#[derive(Debug, Clone, PartialEq)]
pub struct Conversion {
    /// The unit as written (empty for a bare number).
    pub label: String,
    /// `x_SI = scale · x + offset`.
    pub scale: f64,
    /// Offset, SI (273.15 K for values in degC, else 0).
    pub offset: f64,
}

impl Conversion {
    /// A written number → SI.
    pub fn to_si(&self, x: f64) -> f64 {
        self.scale * x + self.offset
    }

    /// An SI number → the written unit (for reports).
    pub fn from_si(&self, x: f64) -> f64 {
        (x - self.offset) / self.scale
    }

    fn of(label: &str, scale: f64, offset: f64) -> Self {
        Conversion {
            label: label.trim().to_string(),
            scale,
            offset,
        }
    }
}

/// A number split from a quantity string: `"120 um"` → (120, Some("um")).
#[derive(Debug, Clone, PartialEq)]
pub struct Written {
    /// The number.
    pub number: f64,
    /// The unit text after it, trimmed; `None` when there is none.
    pub unit: Option<String>,
}

/// True when the text is to be read as a number (possibly with unit) rather than a name.
pub fn looks_numeric(s: &str) -> bool {
    matches!(s.trim_start().chars().next(), Some(c) if c.is_ascii_digit() || c == '+' || c == '-' || c == '.')
}

/// True for a valid parameter name: a letter or `_`, then letters, digits and `_`.
pub fn is_name(s: &str) -> bool {
    let mut chars = s.chars();
    matches!(chars.next(), Some(c) if c.is_ascii_alphabetic() || c == '_')
        && chars.all(|c| c.is_ascii_alphanumeric() || c == '_')
}

/// Split `"<number><blank?><unit>"`. `None` when no finite number starts the text.
pub fn split_number(s: &str) -> Option<Written> {
    let s = s.trim();
    // Longest prefix that is a number: handles "120 um", "120um", "1e-12m2/s".
    let mut best = None;
    for (i, _) in s
        .char_indices()
        .skip(1)
        .chain(std::iter::once((s.len(), ' ')))
    {
        if let Ok(v) = s[..i].trim_end().parse::<f64>() {
            best = Some((i, v));
        }
    }
    let (i, number) = best?;
    if !number.is_finite() {
        return None;
    }
    let rest = s[i..].trim();
    Some(Written {
        number,
        unit: (!rest.is_empty()).then(|| rest.to_string()),
    })
}

/// The sample's value unit: a temperature unit, a known unit, or any label at scale 1.
pub fn value_unit(label: &str) -> Unit {
    Unit::parse(label).unwrap_or_else(|_| Unit::arbitrary(label))
}

/// The conversion of a unit written for a number of kind `kind` (`None`: a bare number).
/// `Err` carries the message naming the units accepted.
pub fn conversion(kind: Kind, unit: Option<&str>, value_unit: &Unit) -> Result<Conversion, String> {
    let Some(text) = unit.map(str::trim) else {
        return Ok(match kind {
            Kind::Value => {
                Conversion::of(value_unit.label(), value_unit.scale(), value_unit.offset())
            }
            Kind::ValueDifference => Conversion::of(value_unit.label(), value_unit.scale(), 0.0),
            Kind::Flux | Kind::Solubility => {
                Conversion::of(&kind.bare_unit(value_unit), value_unit.scale(), 0.0)
            }
            Kind::Pressure => Conversion::of("Pa", 1.0, 0.0),
            _ => Conversion::of("", 1.0, 0.0),
        });
    };
    let known = |q: Quantity, t: &str| -> Result<Unit, String> {
        Unit::parse_at(t, Some(q), &Default::default()).map_err(|e| match e {
            crate::Error::Input { message, .. } => message,
            other => other.to_string(),
        })
    };
    match kind {
        Kind::Length => known(Quantity::Length, text).map(|u| Conversion::of(text, u.scale(), 0.0)),
        Kind::Time => known(Quantity::Time, text).map(|u| Conversion::of(text, u.scale(), 0.0)),
        Kind::Diffusivity => {
            known(Quantity::Diffusivity, text).map(|u| Conversion::of(text, u.scale(), 0.0))
        }
        Kind::Dimensionless => {
            known(Quantity::Dimensionless, text).map(|u| Conversion::of(text, u.scale(), 0.0))
        }
        Kind::Angle => match text {
            "rad" => Ok(Conversion::of(text, 1.0, 0.0)),
            "deg" | "°" => Ok(Conversion::of(text, std::f64::consts::PI / 180.0, 0.0)),
            _ => Err(format!(
                "unknown unit '{text}' for an angle; use rad or deg"
            )),
        },
        Kind::Rate => per_time(text, |num| {
            if num == "1" || num.is_empty() {
                Ok(1.0)
            } else {
                Err(format!("a rate is written 1/<time>, found '{text}'"))
            }
        })
        .map(|s| Conversion::of(text, s, 0.0)),
        Kind::Speed => per_time(text, |num| known(Quantity::Length, num).map(|u| u.scale()))
            .map(|s| Conversion::of(text, s, 0.0)),
        Kind::Value | Kind::ValueDifference => {
            let offset_wanted = kind == Kind::Value;
            if value_unit.quantity() == Quantity::Arbitrary {
                if text == value_unit.label() {
                    Ok(Conversion::of(text, 1.0, 0.0))
                } else {
                    Err(format!(
                        "unit '{text}' differs from the sample's value unit '{}'; write values \
                         in that unit (or as bare numbers)",
                        value_unit.label()
                    ))
                }
            } else {
                known(value_unit.quantity(), text).map(|u| {
                    Conversion::of(
                        text,
                        u.scale(),
                        if offset_wanted { u.offset() } else { 0.0 },
                    )
                })
            }
        }
        Kind::Flux => {
            // "<value unit> <length>/<time>"
            let Some((v, speed)) = text.rsplit_once(' ') else {
                return Err(format!(
                    "a flux is written '<value unit> <length>/<time>', such as '{} m/s'; found '{text}'",
                    value_unit.label()
                ));
            };
            let cv = conversion(Kind::ValueDifference, Some(v), value_unit)?;
            let cs = conversion(Kind::Speed, Some(speed), value_unit)?;
            Ok(Conversion::of(text, cv.scale * cs.scale, 0.0))
        }
        Kind::Pressure => pressure_scale(text).map(|s| Conversion::of(text, s, 0.0)),
        Kind::Solubility => {
            // "<value unit>/<pressure unit>": the last slash separates the pressure unit, so
            // a value unit with a slash of its own (mol/m3) stays whole.
            let Some((v, p)) = text.rsplit_once('/') else {
                return Err(format!(
                    "a solubility coefficient is written '<value unit>/<pressure unit>', such as \
                     '{}/bar'; found '{text}'",
                    value_unit.label()
                ));
            };
            let cv = conversion(Kind::ValueDifference, Some(v.trim()), value_unit)?;
            let ps = pressure_scale(p.trim())?;
            Ok(Conversion::of(text, cv.scale / ps, 0.0))
        }
        Kind::Measured => {
            if let Ok(u) = Unit::parse(text) {
                return Ok(Conversion::of(text, u.scale(), u.offset()));
            }
            for k in [Kind::Rate, Kind::Speed, Kind::Flux, Kind::Value] {
                if let Ok(c) = conversion(k, Some(text), value_unit) {
                    return Ok(c);
                }
            }
            Ok(Conversion::of(text, 1.0, 0.0))
        }
    }
}

/// Pressure units and their size in Pa. Torr = 101325/760 Pa, mmHg (conventional) =
/// 133.322387415 Pa, psi = 6894.757293168 Pa (NIST SP 811, 2008, Appendix B.8 — from memory).
pub const PRESSURE_UNITS: &[(&str, f64)] = &[
    ("Pa", 1.0),
    ("kPa", 1e3),
    ("MPa", 1e6),
    ("bar", 1e5),
    ("mbar", 1e2),
    ("atm", 101_325.0),
    ("Torr", 101_325.0 / 760.0),
    ("mmHg", 133.322_387_415),
    ("cmHg", 1_333.223_874_15),
    ("psi", 6_894.757_293_168),
];

/// Pa per unit of a pressure unit.
fn pressure_scale(text: &str) -> Result<f64, String> {
    PRESSURE_UNITS
        .iter()
        .find(|(u, _)| *u == text.trim())
        .map(|(_, s)| *s)
        .ok_or_else(|| {
            let names: Vec<&str> = PRESSURE_UNITS.iter().map(|(u, _)| *u).collect();
            format!(
                "unknown pressure unit '{}'; use one of {}",
                text.trim(),
                names.join(", ")
            )
        })
}

/// Split `"<num>/<time>"` and apply `numerator` to the part before the slash.
fn per_time(text: &str, numerator: impl Fn(&str) -> Result<f64, String>) -> Result<f64, String> {
    let Some((num, den)) = text.split_once('/') else {
        return Err(format!("expected '<unit>/<time unit>', found '{text}'"));
    };
    let n = numerator(num.trim())?;
    let d =
        Unit::parse_at(den.trim(), Some(Quantity::Time), &Default::default()).map_err(|_| {
            format!(
                "unknown time unit '{}' in '{text}'; use s, min, h or d",
                den.trim()
            )
        })?;
    Ok(n / d.scale())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splits_numbers_and_units() {
        let w = split_number("120 um").unwrap();
        assert_eq!((w.number, w.unit.as_deref()), (120.0, Some("um")));
        let w = split_number("1e-12m2/s").unwrap();
        assert_eq!((w.number, w.unit.as_deref()), (1e-12, Some("m2/s")));
        assert_eq!(split_number("2.5").unwrap().unit, None);
        assert!(split_number("D").is_none());
        assert!(looks_numeric("-3 K") && !looks_numeric("D_film"));
    }

    #[test]
    fn converts_composites() {
        let k = value_unit("degC");
        // 0 °C = 273.15 K; a difference of 1 °C is 1 K (BIPM SI Brochure 9th ed., 2.3.1).
        let c = conversion(Kind::Value, Some("degC"), &k).unwrap();
        assert!((c.to_si(25.0) - 298.15).abs() < 1e-12);
        let c = conversion(Kind::ValueDifference, Some("degC"), &k).unwrap();
        assert_eq!(c.to_si(5.0), 5.0);
        let c = conversion(Kind::Rate, Some("1/min"), &k).unwrap();
        assert!((c.to_si(6.0) - 0.1).abs() < 1e-15);
        let c = conversion(Kind::Speed, Some("um/s"), &k).unwrap();
        assert!((c.to_si(3.0) - 3e-6).abs() < 1e-20);
        let c = conversion(Kind::Flux, Some("K mm/s"), &k).unwrap();
        assert!((c.to_si(2.0) - 2e-3).abs() < 1e-18);
        assert!(conversion(Kind::Length, Some("furlong"), &k).is_err());
        let arb = value_unit("mol/m3");
        assert!(conversion(Kind::Value, Some("mol/m3"), &arb).is_ok());
        assert!(conversion(Kind::Value, Some("kg/m3"), &arb).is_err());
    }

    #[test]
    fn converts_pressures_and_solubilities() {
        let arb = value_unit("mol/m3");
        // 1 bar = 1e5 Pa; 1 atm = 101325 Pa (both exact by definition, BIPM SI Brochure 9th
        // ed. Table 8 and CGPM 1954 — from memory).
        let c = conversion(Kind::Pressure, Some("bar"), &arb).unwrap();
        assert_eq!(c.to_si(2.0), 2e5);
        let c = conversion(Kind::Pressure, Some("atm"), &arb).unwrap();
        assert_eq!(c.to_si(1.0), 101_325.0);
        let c = conversion(Kind::Solubility, Some("mol/m3/bar"), &arb).unwrap();
        assert!((c.to_si(50.0) - 5e-4).abs() < 1e-18);
        let e = conversion(Kind::Solubility, Some("mol/m3/furlong"), &arb).unwrap_err();
        assert!(
            e.contains("unknown pressure unit 'furlong'") && e.contains("bar"),
            "{e}"
        );
        let e = conversion(Kind::Solubility, Some("kg/m3/bar"), &arb).unwrap_err();
        assert!(e.contains("differs from the sample's value unit"), "{e}");
        assert!(conversion(Kind::Pressure, Some("m"), &arb).is_err());
    }
}
