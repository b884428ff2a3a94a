//! Units: the one place where written units become internal values.
//!
//! Internal units: lengths in micrometres, angles in radians, optical loss
//! in dB, propagation loss in dB/cm, power in mW, fractions as plain numbers
//! (so `90%` is 0.9). A unit written after an expression scales all of it.

use crate::syntax::ast::Unit;

/// The kind of quantity a place in the language expects.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    /// An angle in radians; a bare number is radians.
    Angle,
    /// A fraction between 0 and 1; a bare number, or a percentage.
    Fraction,
    /// A length; a unit is required.
    Length,
    /// An optical loss in dB; the unit is required.
    Loss,
    /// A propagation loss in dB/cm; the unit is required.
    LossPerLength,
    /// Electrical power in mW; the unit is required.
    Power,
    /// A plain number (a definition parameter that is not an angle).
    Number,
}

impl Kind {
    pub fn describe(self) -> &'static str {
        match self {
            Kind::Angle => "an angle",
            Kind::Fraction => "a fraction",
            Kind::Length => "a length",
            Kind::Loss => "a loss",
            Kind::LossPerLength => "a propagation loss",
            Kind::Power => "a power",
            Kind::Number => "a number",
        }
    }

    /// The units this kind accepts, for hints.
    pub fn units(self) -> &'static str {
        match self {
            Kind::Angle => "rad or deg (a bare number is radians)",
            Kind::Fraction => "% (or a bare number between 0 and 1)",
            Kind::Length => "nm, um, mm or cm",
            Kind::Loss => "dB",
            Kind::LossPerLength => "dB/cm",
            Kind::Power => "mW",
            Kind::Number => "no unit, or rad, deg or %",
        }
    }

    /// Whether a bare number (no unit) is accepted.
    pub fn unit_optional(self) -> bool {
        matches!(self, Kind::Angle | Kind::Fraction | Kind::Number)
    }
}

/// The kind a unit measures.
pub fn kind_of(unit: Unit) -> Kind {
    match unit {
        Unit::Nm | Unit::Um | Unit::Mm | Unit::Cm => Kind::Length,
        Unit::Rad | Unit::Deg => Kind::Angle,
        Unit::Db => Kind::Loss,
        Unit::DbPerCm => Kind::LossPerLength,
        Unit::Mw => Kind::Power,
        Unit::Percent => Kind::Fraction,
    }
}

/// The factor from the written unit to the internal unit of its kind.
pub fn scale(unit: Unit) -> f64 {
    match unit {
        Unit::Nm => 1e-3,
        Unit::Um => 1.0,
        Unit::Mm => 1e3,
        Unit::Cm => 1e4,
        Unit::Rad => 1.0,
        Unit::Deg => std::f64::consts::PI / 180.0,
        Unit::Db | Unit::DbPerCm | Unit::Mw => 1.0,
        Unit::Percent => 1e-2,
    }
}

/// Whether a value of kind `k` may stand where `want` is expected.
pub fn accepts(want: Kind, k: Kind) -> bool {
    k == want || (want == Kind::Number && matches!(k, Kind::Angle | Kind::Fraction))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn conversions_match_the_si_definitions() {
        // 1 mm = 1000 um, 1 cm = 10^4 um, 1 nm = 10^-3 um (SI prefixes, BIPM SI Brochure 2019).
        assert_eq!(scale(Unit::Mm), 1000.0);
        assert_eq!(scale(Unit::Cm), 1e4);
        assert_eq!(scale(Unit::Nm), 1e-3);
        // 180 deg = pi rad.
        assert!((180.0 * scale(Unit::Deg) - std::f64::consts::PI).abs() < 1e-15);
        assert!(accepts(Kind::Number, kind_of(Unit::Deg)));
        assert!(!accepts(Kind::Angle, kind_of(Unit::Nm)));
    }
}
