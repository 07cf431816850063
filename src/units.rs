//! Physical quantities and the exact unit parser.
//!
//! Invariant: every quantity inside rillnet is in SI (m, Pa, m³/s, Pa·s, kg/m³, K, rad).
//! Units exist only at the edges: this parser turns `"100 um"` into `Length` and the report
//! module turns SI back into the units a chip designer reads.
//!
//! The parser is exact for decimal units: it splices the unit's power of ten into the
//! number's own exponent and parses the result once, so `"100 um"` becomes the `f64` nearest
//! to 1e-4 (what `"1e-4".parse()` gives), not `100.0 * 1e-6` (which is off by one ulp).
//! Units with a non-decimal factor (psi, mmHg, per minute, per hour) apply that factor after
//! the exact decimal parse: one rounding more.

use std::fmt;

/// What a number measures; each unit belongs to exactly one dimension.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Dimension {
    Length,
    Pressure,
    VolumeFlow,
    Viscosity,
    Density,
    Diffusivity,
    Concentration,
    MassConcentration,
    Temperature,
    Angle,
    /// Volume (m³): trapped gas, stored liquid.
    Volume,
    /// Area (m²): a well's wetted cross-section.
    Area,
    /// Hydraulic compliance (m³/Pa): stored volume per unit pressure.
    Compliance,
    /// Duration (s).
    Duration,
    /// Acceleration (m/s²): gravity.
    Acceleration,
}

impl Dimension {
    /// Magnitudes accepted from input (SI). Far wider than any chip needs, and narrow enough
    /// that no accepted input overflows a resistance, a flow or a stress to infinity or
    /// underflows it to a subnormal number (products of the extremes stay within about
    /// 1e-200…1e200). Zero is accepted where it means something (a 0 Pa outlet, a position).
    fn magnitude_range(self) -> (f64, f64) {
        match self {
            Dimension::Length => (1e-15, 1e4),
            Dimension::Pressure => (1e-12, 1e9),
            Dimension::VolumeFlow => (1e-30, 1.0),
            Dimension::Viscosity => (1e-7, 1e7),
            Dimension::Density => (1e-3, 1e5),
            Dimension::Diffusivity => (1e-18, 1e-3),
            Dimension::Concentration => (1e-18, 1e5),
            Dimension::MassConcentration => (1e-18, 1e4),
            Dimension::Temperature => (0.0, 1e4),
            Dimension::Angle => (0.0, 1e3),
            Dimension::Volume => (1e-24, 1e3),
            Dimension::Area => (1e-24, 1e4),
            Dimension::Compliance => (1e-30, 1e-3),
            Dimension::Duration => (1e-9, 1e9),
            Dimension::Acceleration => (1e-6, 1e3),
        }
    }

    /// The accepted range in words, for messages.
    pub fn accepted_range(self) -> &'static str {
        match self {
            Dimension::Length => "1 fm to 10 km, or 0",
            Dimension::Pressure => "magnitudes from 1 pPa to 10 kbar, or 0",
            Dimension::VolumeFlow => "magnitudes up to 1 m^3/s",
            Dimension::Viscosity => "positive, 1e-7 to 1e7 Pa*s",
            Dimension::Density => "positive, 1e-3 to 1e5 kg/m^3",
            Dimension::Diffusivity => "positive, 1e-18 to 1e-3 m^2/s",
            Dimension::Concentration => "0, or 1e-18 to 1e5 mol/m^3 (100 M)",
            Dimension::MassConcentration => "0, or 1e-18 to 1e4 kg/m^3 (10 000 mg/mL)",
            Dimension::Temperature => "absolute zero to 10 000 K",
            Dimension::Angle => "magnitudes up to 1000 rad",
            Dimension::Volume => "1e-24 to 1000 m^3, or 0",
            Dimension::Area => "1e-24 to 1e4 m^2, or 0",
            Dimension::Compliance => "1e-30 to 1e-3 m^3/Pa, or 0",
            Dimension::Duration => "1 ns to 1e9 s, or 0",
            Dimension::Acceleration => "1e-6 to 1000 m/s^2, or 0",
        }
    }

    /// Whether an SI value read from input lies in the accepted range.
    pub fn accepts(self, value: f64) -> bool {
        let (lo, hi) = self.magnitude_range();
        match self {
            Dimension::Temperature => (lo..=hi).contains(&value),
            Dimension::Viscosity | Dimension::Density => (lo..=hi).contains(&value.abs()),
            Dimension::Diffusivity => (lo..=hi).contains(&value),
            Dimension::Concentration | Dimension::MassConcentration => {
                value == 0.0 || (lo..=hi).contains(&value)
            }
            _ => value == 0.0 || (lo..=hi).contains(&value.abs()),
        }
    }

    /// Human name used in error messages ("a length").
    pub fn noun(self) -> &'static str {
        match self {
            Dimension::Length => "a length",
            Dimension::Pressure => "a pressure",
            Dimension::VolumeFlow => "a volume flow rate",
            Dimension::Viscosity => "a dynamic viscosity",
            Dimension::Density => "a density",
            Dimension::Diffusivity => "a diffusion coefficient",
            Dimension::Concentration => "a molar concentration",
            Dimension::MassConcentration => "a mass concentration",
            Dimension::Temperature => "a temperature",
            Dimension::Angle => "an angle",
            Dimension::Volume => "a volume",
            Dimension::Area => "an area",
            Dimension::Compliance => "a compliance",
            Dimension::Duration => "a duration",
            Dimension::Acceleration => "an acceleration",
        }
    }

    /// The unit symbols accepted for this dimension, for "expected one of" messages.
    pub fn accepted_units(self) -> Vec<&'static str> {
        UNITS
            .iter()
            .filter(|u| u.dimension == self && !u.alias)
            .map(|u| u.symbol)
            .collect()
    }

    /// An example value with a unit, used in hints.
    pub fn example(self) -> &'static str {
        match self {
            Dimension::Length => "200 um",
            Dimension::Pressure => "150 mbar",
            Dimension::VolumeFlow => "10 uL/min",
            Dimension::Viscosity => "1.0 mPa*s",
            Dimension::Density => "998 kg/m^3",
            Dimension::Diffusivity => "5e-10 m^2/s",
            Dimension::Concentration => "10 uM",
            Dimension::MassConcentration => "2 mg/mL",
            Dimension::Temperature => "37 degC",
            Dimension::Angle => "54.74 deg",
            Dimension::Volume => "20 uL",
            Dimension::Area => "12 mm^2",
            Dimension::Compliance => "0.5 uL/bar",
            Dimension::Duration => "10 min",
            Dimension::Acceleration => "9.80665 m/s^2",
        }
    }
}

impl fmt::Display for Dimension {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.noun())
    }
}

/// One accepted unit symbol: SI value = number · 10^exp10 · factor + offset.
struct UnitDef {
    symbol: &'static str,
    dimension: Dimension,
    exp10: i32,
    factor: f64,
    offset: f64,
    /// Alternative spelling, not listed in "expected one of" messages.
    alias: bool,
}

const fn u(symbol: &'static str, dimension: Dimension, exp10: i32) -> UnitDef {
    UnitDef {
        symbol,
        dimension,
        exp10,
        factor: 1.0,
        offset: 0.0,
        alias: false,
    }
}

const fn alias(mut def: UnitDef) -> UnitDef {
    def.alias = true;
    def
}

const fn scaled(mut def: UnitDef, factor: f64) -> UnitDef {
    def.factor = factor;
    def
}

const MINUTE: f64 = 1.0 / 60.0;
const HOUR: f64 = 1.0 / 3600.0;
/// 1 psi = 6894.757293168361 Pa (NIST SP 811, Appendix B.8).
const PSI: f64 = 6_894.757_293_168_361;
/// 1 mmHg = 133.322387415 Pa (NIST SP 811, Appendix B.8, conventional mmHg).
const MMHG: f64 = 133.322_387_415;
/// Conventional millimetre of water: 1 mmH2O = 9.80665 Pa (NIST SP 811, Appendix B.8).
const MMH2O: f64 = 9.806_65;
/// Conventional inch of water: 1 inH2O = 249.0889 Pa (NIST SP 811, Appendix B.8; 25.4 mmH2O
/// conventional = 249.08891 Pa).
const INH2O: f64 = 249.088_91;
/// Standard atmosphere: 1 atm = 101 325 Pa exactly (NIST SP 811, Appendix B.8).
const ATM: f64 = 101_325.0;
/// 1 torr = 101 325/760 Pa exactly (NIST SP 811, Appendix B.8).
const TORR: f64 = 101_325.0 / 760.0;
/// 1 degree = π/180 rad.
const DEGREE: f64 = std::f64::consts::PI / 180.0;

use Dimension as D;

static UNITS: &[UnitDef] = &[
    // length
    u("m", D::Length, 0),
    u("cm", D::Length, -2),
    u("mm", D::Length, -3),
    u("um", D::Length, -6),
    alias(u("µm", D::Length, -6)), // U+00B5 micro sign
    alias(u("μm", D::Length, -6)), // U+03BC Greek mu
    u("nm", D::Length, -9),
    // pressure (gauge, relative to the outlet reference)
    u("Pa", D::Pressure, 0),
    u("hPa", D::Pressure, 2),
    u("kPa", D::Pressure, 3),
    u("MPa", D::Pressure, 6),
    u("mbar", D::Pressure, 2),
    u("bar", D::Pressure, 5),
    scaled(u("psi", D::Pressure, 0), PSI),
    scaled(u("mmHg", D::Pressure, 0), MMHG),
    scaled(u("mmH2O", D::Pressure, 0), MMH2O),
    scaled(u("cmH2O", D::Pressure, 1), MMH2O),
    scaled(u("inH2O", D::Pressure, 0), INH2O),
    scaled(u("atm", D::Pressure, 0), ATM),
    scaled(u("torr", D::Pressure, 0), TORR),
    alias(scaled(u("Torr", D::Pressure, 0), TORR)),
    // volume flow (lower-case l accepted as an alias of L)
    u("m^3/s", D::VolumeFlow, 0),
    alias(u("m3/s", D::VolumeFlow, 0)),
    u("mL/s", D::VolumeFlow, -6),
    alias(u("ml/s", D::VolumeFlow, -6)),
    scaled(u("mL/min", D::VolumeFlow, -6), MINUTE),
    alias(scaled(u("ml/min", D::VolumeFlow, -6), MINUTE)),
    scaled(u("mL/h", D::VolumeFlow, -6), HOUR),
    alias(scaled(u("ml/h", D::VolumeFlow, -6), HOUR)),
    u("uL/s", D::VolumeFlow, -9),
    alias(u("ul/s", D::VolumeFlow, -9)),
    alias(u("µL/s", D::VolumeFlow, -9)),
    alias(u("µl/s", D::VolumeFlow, -9)),
    alias(u("μL/s", D::VolumeFlow, -9)),
    alias(u("μl/s", D::VolumeFlow, -9)),
    scaled(u("uL/min", D::VolumeFlow, -9), MINUTE),
    alias(scaled(u("ul/min", D::VolumeFlow, -9), MINUTE)),
    alias(scaled(u("µL/min", D::VolumeFlow, -9), MINUTE)),
    alias(scaled(u("µl/min", D::VolumeFlow, -9), MINUTE)),
    alias(scaled(u("μL/min", D::VolumeFlow, -9), MINUTE)),
    alias(scaled(u("μl/min", D::VolumeFlow, -9), MINUTE)),
    scaled(u("uL/h", D::VolumeFlow, -9), HOUR),
    alias(scaled(u("ul/h", D::VolumeFlow, -9), HOUR)),
    alias(scaled(u("µL/h", D::VolumeFlow, -9), HOUR)),
    alias(scaled(u("µl/h", D::VolumeFlow, -9), HOUR)),
    alias(scaled(u("μL/h", D::VolumeFlow, -9), HOUR)),
    alias(scaled(u("μl/h", D::VolumeFlow, -9), HOUR)),
    u("nL/s", D::VolumeFlow, -12),
    alias(u("nl/s", D::VolumeFlow, -12)),
    scaled(u("nL/min", D::VolumeFlow, -12), MINUTE),
    alias(scaled(u("nl/min", D::VolumeFlow, -12), MINUTE)),
    // volume
    u("m^3", D::Volume, 0),
    alias(u("m3", D::Volume, 0)),
    u("L", D::Volume, -3),
    alias(u("l", D::Volume, -3)),
    u("mL", D::Volume, -6),
    alias(u("ml", D::Volume, -6)),
    u("uL", D::Volume, -9),
    alias(u("ul", D::Volume, -9)),
    alias(u("µL", D::Volume, -9)),
    alias(u("µl", D::Volume, -9)),
    alias(u("μL", D::Volume, -9)),
    alias(u("μl", D::Volume, -9)),
    u("nL", D::Volume, -12),
    alias(u("nl", D::Volume, -12)),
    u("pL", D::Volume, -15),
    alias(u("pl", D::Volume, -15)),
    // area
    u("m^2", D::Area, 0),
    alias(u("m2", D::Area, 0)),
    u("cm^2", D::Area, -4),
    u("mm^2", D::Area, -6),
    alias(u("mm2", D::Area, -6)),
    u("um^2", D::Area, -12),
    alias(u("µm^2", D::Area, -12)),
    alias(u("μm^2", D::Area, -12)),
    // compliance (volume per pressure); 1 bar = 1e5 Pa, 1 mbar = 100 Pa exactly
    u("m^3/Pa", D::Compliance, 0),
    alias(u("m3/Pa", D::Compliance, 0)),
    u("mL/bar", D::Compliance, -11),
    alias(u("ml/bar", D::Compliance, -11)),
    u("uL/bar", D::Compliance, -14),
    alias(u("ul/bar", D::Compliance, -14)),
    alias(u("µL/bar", D::Compliance, -14)),
    alias(u("µl/bar", D::Compliance, -14)),
    alias(u("μL/bar", D::Compliance, -14)),
    alias(u("μl/bar", D::Compliance, -14)),
    u("uL/mbar", D::Compliance, -11),
    alias(u("ul/mbar", D::Compliance, -11)),
    alias(u("µL/mbar", D::Compliance, -11)),
    u("uL/kPa", D::Compliance, -12),
    alias(u("ul/kPa", D::Compliance, -12)),
    u("nL/mbar", D::Compliance, -14),
    alias(u("nl/mbar", D::Compliance, -14)),
    u("nL/Pa", D::Compliance, -12),
    alias(u("nl/Pa", D::Compliance, -12)),
    scaled(u("uL/psi", D::Compliance, -9), 1.0 / PSI),
    alias(scaled(u("ul/psi", D::Compliance, -9), 1.0 / PSI)),
    // acceleration
    u("m/s^2", D::Acceleration, 0),
    alias(u("m/s2", D::Acceleration, 0)),
    // duration
    u("s", D::Duration, 0),
    u("ms", D::Duration, -3),
    scaled(u("min", D::Duration, 0), 60.0),
    scaled(u("h", D::Duration, 0), 3600.0),
    alias(scaled(u("hr", D::Duration, 0), 3600.0)),
    scaled(u("day", D::Duration, 0), 86_400.0),
    // dynamic viscosity
    u("Pa*s", D::Viscosity, 0),
    alias(u("Pa.s", D::Viscosity, 0)),
    alias(u("Pa·s", D::Viscosity, 0)),
    u("mPa*s", D::Viscosity, -3),
    alias(u("mPa.s", D::Viscosity, -3)),
    alias(u("mPa·s", D::Viscosity, -3)),
    u("cP", D::Viscosity, -3),
    // density
    u("kg/m^3", D::Density, 0),
    alias(u("kg/m3", D::Density, 0)),
    u("g/cm^3", D::Density, 3),
    alias(u("g/cm3", D::Density, 3)),
    alias(u("g/mL", D::Density, 3)),
    // diffusion coefficient
    u("m^2/s", D::Diffusivity, 0),
    alias(u("m2/s", D::Diffusivity, 0)),
    u("cm^2/s", D::Diffusivity, -4),
    alias(u("cm2/s", D::Diffusivity, -4)),
    u("mm^2/s", D::Diffusivity, -6),
    alias(u("mm2/s", D::Diffusivity, -6)),
    u("um^2/s", D::Diffusivity, -12),
    alias(u("um2/s", D::Diffusivity, -12)),
    alias(u("µm^2/s", D::Diffusivity, -12)),
    alias(u("μm^2/s", D::Diffusivity, -12)),
    // molar concentration (SI: mol/m^3; 1 mM = 1 mol/m^3)
    u("mol/m^3", D::Concentration, 0),
    alias(u("mol/m3", D::Concentration, 0)),
    u("M", D::Concentration, 3),
    alias(u("mol/L", D::Concentration, 3)),
    u("mM", D::Concentration, 0),
    u("uM", D::Concentration, -3),
    alias(u("µM", D::Concentration, -3)),
    alias(u("μM", D::Concentration, -3)),
    u("nM", D::Concentration, -6),
    u("pM", D::Concentration, -9),
    // mass concentration (SI: kg/m^3; 1 mg/mL = 1 kg/m^3)
    u("mg/mL", D::MassConcentration, 0),
    alias(u("g/L", D::MassConcentration, 0)),
    u("ug/mL", D::MassConcentration, -3),
    alias(u("µg/mL", D::MassConcentration, -3)),
    alias(u("μg/mL", D::MassConcentration, -3)),
    alias(u("mg/L", D::MassConcentration, -3)),
    u("ng/mL", D::MassConcentration, -6),
    // temperature
    u("K", D::Temperature, 0),
    UnitDef {
        symbol: "degC",
        dimension: D::Temperature,
        exp10: 0,
        factor: 1.0,
        offset: 273.15,
        alias: false,
    },
    UnitDef {
        symbol: "°C",
        dimension: D::Temperature,
        exp10: 0,
        factor: 1.0,
        offset: 273.15,
        alias: true,
    },
    // angle
    scaled(u("deg", D::Angle, 0), DEGREE),
    alias(scaled(u("°", D::Angle, 0), DEGREE)),
    u("rad", D::Angle, 0),
];

/// Why a text is not a valid quantity. The message says what was expected.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum UnitError {
    #[error("'{text}' is a bare number; {dim} needs a unit, e.g. '{example}' (units: {units})")]
    BareNumber {
        text: String,
        dim: Dimension,
        example: &'static str,
        units: String,
    },
    #[error("'{text}' is not a number followed by a unit; expected {dim}, e.g. '{example}'")]
    NotAQuantity {
        text: String,
        dim: Dimension,
        example: &'static str,
    },
    #[error("unknown unit '{unit}' in '{text}'; expected {dim} in one of: {units}")]
    UnknownUnit {
        text: String,
        unit: String,
        dim: Dimension,
        units: String,
    },
    #[error("'{text}' is {found}, but {dim} is expected here (units: {units})")]
    WrongDimension {
        text: String,
        found: Dimension,
        dim: Dimension,
        units: String,
    },
    #[error("'{text}' is not finite; expected {dim}")]
    NotFinite { text: String, dim: Dimension },
    #[error("'{text}' is outside the range rillnet accepts for {dim} ({range}); check the value and its unit")]
    OutOfRange {
        text: String,
        dim: Dimension,
        range: &'static str,
    },
}

fn unit_list(dim: Dimension) -> String {
    dim.accepted_units().join(", ")
}

/// Split `"12.5e-1 uL/min"` into the mantissa digits, the decimal exponent and the unit text.
fn split_number(text: &str) -> Option<(&str, i32, &str)> {
    let bytes = text.as_bytes();
    let mut i = 0;
    if i < bytes.len() && (bytes[i] == b'+' || bytes[i] == b'-') {
        i += 1;
    }
    let digits_start = i;
    while i < bytes.len() && bytes[i].is_ascii_digit() {
        i += 1;
    }
    let mut n_digits = i - digits_start;
    if i < bytes.len() && bytes[i] == b'.' {
        i += 1;
        let frac_start = i;
        while i < bytes.len() && bytes[i].is_ascii_digit() {
            i += 1;
        }
        n_digits += i - frac_start;
    }
    if n_digits == 0 {
        return None;
    }
    let mantissa_end = i;
    let mut exponent = 0i32;
    if i < bytes.len() && (bytes[i] == b'e' || bytes[i] == b'E') {
        let mut j = i + 1;
        if j < bytes.len() && (bytes[j] == b'+' || bytes[j] == b'-') {
            j += 1;
        }
        let exp_digits_start = j;
        while j < bytes.len() && bytes[j].is_ascii_digit() {
            j += 1;
        }
        if j > exp_digits_start {
            // A huge exponent is clamped; the parse then gives 0 or inf and is reported.
            exponent = text[i + 1..j].parse::<i64>().map_or(i32::MAX / 2, |e| {
                e.clamp(i64::from(-(i32::MAX / 2)), i64::from(i32::MAX / 2)) as i32
            });
            i = j;
        }
    }
    Some((&text[..mantissa_end], exponent, text[i..].trim()))
}

/// Parse `text` as a quantity of dimension `dim`, returning its SI value.
///
/// ```
/// use rillnet::units::{parse_si, Dimension};
/// assert_eq!(parse_si("100 um", Dimension::Length).unwrap(), 1e-4);
/// assert_eq!(parse_si("150 mbar", Dimension::Pressure).unwrap(), 15000.0);
/// assert!(parse_si("3 mbar", Dimension::Length).is_err()); // wrong kind of unit
/// assert!(parse_si("12", Dimension::Length).is_err()); // bare number
/// ```
pub fn parse_si(text: &str, dim: Dimension) -> Result<f64, UnitError> {
    let trimmed = text.trim();
    let Some((mantissa, exponent, unit)) = split_number(trimmed) else {
        return Err(UnitError::NotAQuantity {
            text: trimmed.to_string(),
            dim,
            example: dim.example(),
        });
    };
    if unit.is_empty() {
        let value: f64 = mantissa.parse().unwrap_or(f64::NAN);
        // A bare zero is unambiguous for every dimension except temperature.
        if value == 0.0 && dim != D::Temperature && dim.accepts(0.0) {
            return Ok(0.0);
        }
        return Err(UnitError::BareNumber {
            text: trimmed.to_string(),
            dim,
            example: dim.example(),
            units: unit_list(dim),
        });
    }
    let Some(def) = UNITS.iter().find(|d| d.symbol == unit) else {
        return Err(UnitError::UnknownUnit {
            text: trimmed.to_string(),
            unit: unit.to_string(),
            dim,
            units: unit_list(dim),
        });
    };
    if def.dimension != dim {
        return Err(UnitError::WrongDimension {
            text: trimmed.to_string(),
            found: def.dimension,
            dim,
            units: unit_list(dim),
        });
    }
    let total_exp = i64::from(exponent) + i64::from(def.exp10);
    let exact: f64 =
        format!("{mantissa}e{total_exp}")
            .parse()
            .map_err(|_| UnitError::NotAQuantity {
                text: trimmed.to_string(),
                dim,
                example: dim.example(),
            })?;
    let value = if def.factor == 1.0 {
        exact + def.offset
    } else {
        exact * def.factor + def.offset
    };
    if !value.is_finite() {
        return Err(UnitError::NotFinite {
            text: trimmed.to_string(),
            dim,
        });
    }
    if !dim.accepts(value) {
        return Err(UnitError::OutOfRange {
            text: trimmed.to_string(),
            dim,
            range: dim.accepted_range(),
        });
    }
    Ok(value)
}

/// A number that was given without a unit (YAML/JSON numeric): only 0 is accepted.
pub fn bare_number_si(value: f64, dim: Dimension) -> Result<f64, UnitError> {
    if value == 0.0 && dim != D::Temperature && dim.accepts(0.0) {
        Ok(0.0)
    } else {
        Err(UnitError::BareNumber {
            text: format!("{value}"),
            dim,
            example: dim.example(),
            units: unit_list(dim),
        })
    }
}

/// A typed SI quantity. The dimension travels with the type, so a pressure cannot be passed
/// where a length is expected.
pub trait Quantity: Copy {
    const DIMENSION: Dimension;
    fn from_si(value: f64) -> Self;
    fn si(self) -> f64;
}

macro_rules! quantity {
    ($(#[$doc:meta])* $name:ident, $dim:ident) => {
        $(#[$doc])*
        #[derive(Clone, Copy, Debug, PartialEq, PartialOrd, Default)]
        pub struct $name(f64);

        impl $name {
            /// Wrap a value already in SI units.
            pub const fn from_si(value: f64) -> Self {
                Self(value)
            }
            /// The value in SI units.
            pub const fn si(self) -> f64 {
                self.0
            }
        }

        impl Quantity for $name {
            const DIMENSION: Dimension = Dimension::$dim;
            fn from_si(value: f64) -> Self {
                Self(value)
            }
            fn si(self) -> f64 {
                self.0
            }
        }

        impl std::str::FromStr for $name {
            type Err = UnitError;
            fn from_str(s: &str) -> Result<Self, UnitError> {
                parse_si(s, Dimension::$dim).map(Self)
            }
        }
    };
}

quantity!(
    /// Length in metres.
    Length,
    Length
);
quantity!(
    /// Gauge pressure in pascals.
    Pressure,
    Pressure
);
quantity!(
    /// Volume flow rate in m³/s.
    VolumeFlow,
    VolumeFlow
);
quantity!(
    /// Dynamic viscosity in Pa·s.
    Viscosity,
    Viscosity
);
quantity!(
    /// Mass density in kg/m³.
    Density,
    Density
);
quantity!(
    /// Diffusion coefficient in m²/s.
    Diffusivity,
    Diffusivity
);
quantity!(
    /// Molar concentration in mol/m³ (= mM).
    Concentration,
    Concentration
);
quantity!(
    /// Mass concentration in kg/m³ (= mg/mL).
    MassConcentration,
    MassConcentration
);
quantity!(
    /// Absolute temperature in kelvin.
    Temperature,
    Temperature
);
quantity!(
    /// Plane angle in radians.
    Angle,
    Angle
);
quantity!(
    /// Volume in m³.
    Volume,
    Volume
);
quantity!(
    /// Area in m².
    Area,
    Area
);
quantity!(
    /// Hydraulic compliance in m³/Pa (stored volume per unit pressure).
    Compliance,
    Compliance
);
quantity!(
    /// Duration in seconds.
    Duration,
    Duration
);
quantity!(
    /// Acceleration in m/s².
    Acceleration,
    Acceleration
);

/// Display conversions used by the reports (SI → the units designers read).
pub mod display {
    /// Format a number with about `sig` significant digits, switching to exponent form for very
    /// large or small magnitudes.
    pub fn fmt_sig(x: f64, sig: usize) -> String {
        if x == 0.0 {
            return "0".to_string();
        }
        if !x.is_finite() {
            return format!("{x}");
        }
        // The magnitude after rounding to `sig` digits, so that 9.99999 prints as "10.00", not
        // "10.000" (a set 10 µL/min that comes back as 9.999999999 must not gain a digit).
        let rounded = format!("{:.*e}", sig.saturating_sub(1), x);
        let mag = rounded
            .rsplit('e')
            .next()
            .and_then(|e| e.parse::<i32>().ok())
            .unwrap_or(0);
        if !(-3..6).contains(&mag) {
            return rounded;
        }
        let decimals = (sig as i32 - 1 - mag).max(0) as usize;
        format!("{x:.decimals$}")
    }

    /// Pa → mbar.
    pub fn mbar(pa: f64) -> f64 {
        pa / 100.0
    }
    /// m³/s → µL/min.
    pub fn ul_per_min(m3_per_s: f64) -> f64 {
        m3_per_s * 6.0e10
    }
    /// m/s → mm/s.
    pub fn mm_per_s(m_per_s: f64) -> f64 {
        m_per_s * 1.0e3
    }
    /// m → µm.
    pub fn um(m: f64) -> f64 {
        m * 1.0e6
    }
    /// m → mm.
    pub fn mm(m: f64) -> f64 {
        m * 1.0e3
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rounding_up_to_the_next_decade_keeps_the_digit_count() {
        use display::fmt_sig;
        assert_eq!(fmt_sig(9.999_999_999, 4), "10.00");
        assert_eq!(fmt_sig(10.000_000_001, 4), "10.00");
        assert_eq!(fmt_sig(0.999_999_999_9, 4), "1.000");
        assert_eq!(fmt_sig(-99.999_99, 3), "-100");
        assert_eq!(fmt_sig(999_999.9, 4), "1.000e6");
        assert_eq!(fmt_sig(1.234_5e-4, 3), "1.23e-4");
        assert_eq!(fmt_sig(0.012_34, 3), "0.0123");
    }

    #[test]
    fn decimal_units_are_exact() {
        // The spliced exponent gives the correctly rounded value, the same as parsing "1e-4".
        assert_eq!(parse_si("100 um", D::Length).unwrap(), 1e-4);
        assert_eq!(parse_si("100um", D::Length).unwrap(), 1e-4);
        assert_eq!(parse_si("0.1 mm", D::Length).unwrap(), 1e-4);
        assert_eq!(parse_si("12 mm", D::Length).unwrap(), 0.012);
        assert_eq!(parse_si("1.5e3 um", D::Length).unwrap(), 1.5e-3);
        assert_eq!(parse_si("200 µm", D::Length).unwrap(), 2e-4);
        assert_eq!(parse_si("200 μm", D::Length).unwrap(), 2e-4);
        assert_eq!(parse_si("150 mbar", D::Pressure).unwrap(), 15000.0);
        assert_eq!(parse_si("1.0 mPa*s", D::Viscosity).unwrap(), 1e-3);
        assert_eq!(parse_si("1 cP", D::Viscosity).unwrap(), 1e-3);
        assert_eq!(parse_si("1.26 g/cm^3", D::Density).unwrap(), 1260.0);
        assert_eq!(parse_si("-2.5 kPa", D::Pressure).unwrap(), -2500.0);
    }

    #[test]
    fn solute_units() {
        // 1 mM = 1 mol/m^3 and 1 mg/mL = 1 kg/m^3 by definition of the prefixes.
        assert_eq!(parse_si("10 uM", D::Concentration).unwrap(), 1e-2);
        assert_eq!(parse_si("2.5 mM", D::Concentration).unwrap(), 2.5);
        assert_eq!(parse_si("1 M", D::Concentration).unwrap(), 1e3);
        assert_eq!(parse_si("50 nM", D::Concentration).unwrap(), 5e-5);
        assert_eq!(parse_si("3 ug/mL", D::MassConcentration).unwrap(), 3e-3);
        assert_eq!(parse_si("5e-10 m^2/s", D::Diffusivity).unwrap(), 5e-10);
        assert_eq!(parse_si("500 um^2/s", D::Diffusivity).unwrap(), 5e-10);
        assert_eq!(parse_si("5e-6 cm^2/s", D::Diffusivity).unwrap(), 5e-10);
        // Negative concentrations and diffusivities, and a zero diffusivity, are refused.
        assert!(parse_si("-1 uM", D::Concentration).is_err());
        assert!(parse_si("-1 mg/mL", D::MassConcentration).is_err());
        assert!(parse_si("0", D::Diffusivity).is_err());
        assert!(parse_si("-5e-10 m^2/s", D::Diffusivity).is_err());
        assert_eq!(parse_si("0", D::Concentration).unwrap(), 0.0);
        assert!(matches!(
            parse_si("2 mg/mL", D::Concentration).unwrap_err(),
            UnitError::WrongDimension {
                found: D::MassConcentration,
                ..
            }
        ));
    }

    #[test]
    fn scaled_units() {
        // 60 µL/min = 1 µL/s = 1e-9 m³/s.
        approx::assert_relative_eq!(
            parse_si("60 uL/min", D::VolumeFlow).unwrap(),
            1e-9,
            max_relative = 1e-15
        );
        approx::assert_relative_eq!(
            parse_si("3.6 mL/h", D::VolumeFlow).unwrap(),
            1e-9,
            max_relative = 1e-15
        );
        // NIST SP 811: 1 psi = 6894.757 Pa.
        approx::assert_relative_eq!(
            parse_si("1 psi", D::Pressure).unwrap(),
            6894.757,
            max_relative = 1e-6
        );
        assert_eq!(parse_si("37 degC", D::Temperature).unwrap(), 310.15);
        approx::assert_relative_eq!(
            parse_si("90 deg", D::Angle).unwrap(),
            std::f64::consts::FRAC_PI_2,
            max_relative = 1e-15
        );
    }

    #[test]
    fn heads_atmospheres_and_torr_follow_nist_sp811() {
        // NIST SP 811 (2008), Appendix B.8: conventional mmH2O = 9.806 65 Pa, cmH2O = 98.0665 Pa,
        // inH2O (conventional) = 249.0889 Pa, atm = 101 325 Pa, torr = 133.3224 Pa.
        let p = |t: &str| parse_si(t, D::Pressure).unwrap();
        approx::assert_relative_eq!(p("1 mmH2O"), 9.806_65, max_relative = 1e-15);
        approx::assert_relative_eq!(p("5 mmH2O"), 49.033_25, max_relative = 1e-15);
        approx::assert_relative_eq!(p("1 cmH2O"), 98.0665, max_relative = 1e-15);
        // SP 811 prints 2.490 889 E+02 (7 digits).
        approx::assert_relative_eq!(p("1 inH2O"), 249.0889, max_relative = 2.1e-7);
        assert_eq!(p("1 atm"), 101_325.0);
        // SP 811 prints 1.333 224 E+02 (7 digits: half a unit in the last place is 3.8e-7).
        approx::assert_relative_eq!(p("1 torr"), 133.3224, max_relative = 3.8e-7);
        approx::assert_relative_eq!(p("760 torr"), p("1 atm"), max_relative = 1e-15);
        // 1 mmHg (conventional) and 1 torr differ by less than 2e-7 (NIST SP 811, B.8 note).
        approx::assert_relative_eq!(p("1 mmHg"), p("1 torr"), max_relative = 2e-7);
    }

    #[test]
    fn volumes_areas_compliances_and_durations() {
        let v = |t: &str| parse_si(t, D::Volume).unwrap();
        assert_eq!(v("20 uL"), 2e-8);
        assert_eq!(v("20 ul"), 2e-8);
        assert_eq!(v("20 µl"), 2e-8);
        assert_eq!(v("1.5 mL"), 1.5e-6);
        assert_eq!(v("3 nL"), 3e-12);
        assert_eq!(v("1 m^3"), 1.0);
        let a = |t: &str| parse_si(t, D::Area).unwrap();
        assert_eq!(a("12 mm^2"), 1.2e-5);
        assert_eq!(a("100 um^2"), 1e-10);
        // 1 µL/bar = 1e-9 m³ / 1e5 Pa = 1e-14 m³/Pa (definitions of litre and bar, SI brochure).
        let c = |t: &str| parse_si(t, D::Compliance).unwrap();
        assert_eq!(c("0.5 uL/bar"), 5e-15);
        assert_eq!(c("1 nL/mbar"), 1e-14);
        assert_eq!(c("1 nl/mbar"), c("1 uL/bar"));
        approx::assert_relative_eq!(c("1 uL/psi"), 1e-9 / 6_894.757, max_relative = 1e-6);
        let t = |x: &str| parse_si(x, D::Duration).unwrap();
        assert_eq!(t("2 h"), 7200.0);
        assert_eq!(t("2 hr"), 7200.0);
        assert_eq!(t("10 s"), 10.0);
        assert_eq!(t("1.5 min"), 90.0);
        assert_eq!(t("1 day"), 86_400.0);
        let q = |x: &str| parse_si(x, D::VolumeFlow).unwrap();
        approx::assert_relative_eq!(q("60 ul/min"), 1e-9, max_relative = 1e-15);
        approx::assert_relative_eq!(q("3.6 ml/h"), 1e-9, max_relative = 1e-15);
        approx::assert_relative_eq!(q("3600 µl/h"), 1e-9, max_relative = 1e-15);
        // A volume is not a flow.
        assert!(matches!(
            parse_si("5 uL", D::VolumeFlow).unwrap_err(),
            UnitError::WrongDimension { .. }
        ));
    }

    #[test]
    fn bad_quantities_are_explained() {
        let e = parse_si("3 mbar", D::Length).unwrap_err();
        assert!(matches!(e, UnitError::WrongDimension { .. }), "{e}");
        assert!(e.to_string().contains("a pressure"), "{e}");
        let e = parse_si("12", D::Length).unwrap_err();
        assert!(matches!(e, UnitError::BareNumber { .. }));
        assert!(e.to_string().contains("12 mm") || e.to_string().contains("um"));
        assert!(matches!(
            parse_si("12 furlongs", D::Length).unwrap_err(),
            UnitError::UnknownUnit { .. }
        ));
        assert!(matches!(
            parse_si("mm", D::Length).unwrap_err(),
            UnitError::NotAQuantity { .. }
        ));
        assert!(matches!(
            parse_si("1e999 m", D::Length).unwrap_err(),
            UnitError::NotFinite { .. }
        ));
        assert!(parse_si("1e99999999999 m", D::Length).is_err());
        assert_eq!(parse_si("0", D::Pressure).unwrap(), 0.0);
        assert!(parse_si("0", D::Temperature).is_err());
    }
}
