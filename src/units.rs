//! Units: what a signal's unit string means and how it converts to SI.
//!
//! Inside termvel every value is SI, with the few exceptions the trade reads
//! directly (°C for temperatures, rpm for shaft speed, degrees for angles,
//! 0..1 for fractions). Display units are a view setting and live in the UI.

/// What a quantity measures. A signal may feed a canonical channel only when
/// their dimensions agree.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Dimension {
    Speed,
    Accel,
    ShaftSpeed,
    Torque,
    Power,
    Voltage,
    Current,
    Fraction,
    Temperature,
    Pressure,
    Length,
    Time,
    Energy,
    Charge,
    Angle,
    Mass,
    Resistance,
    /// A count, an enumeration or a flag.
    Plain,
}

impl Dimension {
    /// The unit termvel keeps values of this dimension in.
    pub fn si_unit(self) -> &'static str {
        match self {
            Dimension::Speed => "m/s",
            Dimension::Accel => "m/s²",
            Dimension::ShaftSpeed => "rpm",
            Dimension::Torque => "N·m",
            Dimension::Power => "W",
            Dimension::Voltage => "V",
            Dimension::Current => "A",
            Dimension::Fraction => "1",
            Dimension::Temperature => "°C",
            Dimension::Pressure => "Pa",
            Dimension::Length => "m",
            Dimension::Time => "s",
            Dimension::Energy => "J",
            Dimension::Charge => "C",
            Dimension::Angle => "°",
            Dimension::Mass => "kg",
            Dimension::Resistance => "Ω",
            Dimension::Plain => "",
        }
    }

    pub fn name(self) -> &'static str {
        match self {
            Dimension::Speed => "speed",
            Dimension::Accel => "acceleration",
            Dimension::ShaftSpeed => "shaft speed",
            Dimension::Torque => "torque",
            Dimension::Power => "power",
            Dimension::Voltage => "voltage",
            Dimension::Current => "current",
            Dimension::Fraction => "fraction",
            Dimension::Temperature => "temperature",
            Dimension::Pressure => "pressure",
            Dimension::Length => "length",
            Dimension::Time => "time",
            Dimension::Energy => "energy",
            Dimension::Charge => "charge",
            Dimension::Angle => "angle",
            Dimension::Mass => "mass",
            Dimension::Resistance => "resistance",
            Dimension::Plain => "plain number",
        }
    }
}

/// A unit: its dimension and the affine map to SI, `si = value·factor + offset`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Unit {
    pub dimension: Dimension,
    pub factor: f64,
    pub offset: f64,
}

impl Unit {
    const fn new(dimension: Dimension, factor: f64) -> Unit {
        Unit { dimension, factor, offset: 0.0 }
    }

    pub fn to_si(self, value: f64) -> f64 {
        value * self.factor + self.offset
    }

    pub fn from_si(self, si: f64) -> f64 {
        (si - self.offset) / self.factor
    }

    /// Whether a value in this unit may feed a channel of `dim`. Plain
    /// numbers may feed fractions (a 0..1 state of charge needs no unit).
    pub fn fits(self, dim: Dimension) -> bool {
        self.dimension == dim || (self.dimension == Dimension::Plain && dim == Dimension::Fraction)
    }
}

/// Standard gravity, m/s² (3rd CGPM, 1901).
pub const G0: f64 = 9.80665;
/// One knot in m/s: 1852 m per hour, exactly.
pub const KNOT_MPS: f64 = 1852.0 / 3600.0;
/// One mile per hour in m/s: 1609.344 m per hour, exactly.
pub const MPH_MPS: f64 = 0.44704;
/// One pound-force per square inch in Pa: 0.45359237 kg · g0 / 0.0254² m².
pub const PSI_PA: f64 = 0.453_592_37 * G0 / (0.0254 * 0.0254);
/// Mechanical horsepower in W: 550 ft·lbf/s.
pub const HP_W: f64 = 550.0 * 0.3048 * 0.453_592_37 * G0;
/// Metric horsepower in W: 75 kgf·m/s.
pub const PS_W: f64 = 75.0 * G0;

/// Every unit string termvel understands, with its meaning. Several spellings
/// of one unit are accepted because signal maps come from many hands.
pub const UNITS: &[(&str, Unit)] = &[
    ("m/s", Unit::new(Dimension::Speed, 1.0)),
    ("km/h", Unit::new(Dimension::Speed, 1.0 / 3.6)),
    ("kph", Unit::new(Dimension::Speed, 1.0 / 3.6)),
    ("mph", Unit::new(Dimension::Speed, MPH_MPS)),
    ("kn", Unit::new(Dimension::Speed, KNOT_MPS)),
    ("m/s2", Unit::new(Dimension::Accel, 1.0)),
    ("m/s²", Unit::new(Dimension::Accel, 1.0)),
    ("g", Unit::new(Dimension::Accel, G0)),
    ("rpm", Unit::new(Dimension::ShaftSpeed, 1.0)),
    ("1/min", Unit::new(Dimension::ShaftSpeed, 1.0)),
    ("rad/s", Unit::new(Dimension::ShaftSpeed, 60.0 / std::f64::consts::TAU)),
    ("N·m", Unit::new(Dimension::Torque, 1.0)),
    ("Nm", Unit::new(Dimension::Torque, 1.0)),
    ("N.m", Unit::new(Dimension::Torque, 1.0)),
    ("lbf·ft", Unit::new(Dimension::Torque, 0.3048 * 0.453_592_37 * G0)),
    ("W", Unit::new(Dimension::Power, 1.0)),
    ("kW", Unit::new(Dimension::Power, 1e3)),
    ("MW", Unit::new(Dimension::Power, 1e6)),
    ("hp", Unit::new(Dimension::Power, HP_W)),
    ("PS", Unit::new(Dimension::Power, PS_W)),
    ("V", Unit::new(Dimension::Voltage, 1.0)),
    ("mV", Unit::new(Dimension::Voltage, 1e-3)),
    ("A", Unit::new(Dimension::Current, 1.0)),
    ("mA", Unit::new(Dimension::Current, 1e-3)),
    ("%", Unit::new(Dimension::Fraction, 0.01)),
    ("1", Unit::new(Dimension::Plain, 1.0)),
    ("", Unit::new(Dimension::Plain, 1.0)),
    ("°C", Unit::new(Dimension::Temperature, 1.0)),
    ("degC", Unit::new(Dimension::Temperature, 1.0)),
    ("K", Unit { dimension: Dimension::Temperature, factor: 1.0, offset: -273.15 }),
    ("°F", Unit { dimension: Dimension::Temperature, factor: 5.0 / 9.0, offset: -32.0 * 5.0 / 9.0 }),
    ("degF", Unit { dimension: Dimension::Temperature, factor: 5.0 / 9.0, offset: -32.0 * 5.0 / 9.0 }),
    ("Pa", Unit::new(Dimension::Pressure, 1.0)),
    ("hPa", Unit::new(Dimension::Pressure, 100.0)),
    ("mbar", Unit::new(Dimension::Pressure, 100.0)),
    ("kPa", Unit::new(Dimension::Pressure, 1e3)),
    ("bar", Unit::new(Dimension::Pressure, 1e5)),
    ("psi", Unit::new(Dimension::Pressure, PSI_PA)),
    ("m", Unit::new(Dimension::Length, 1.0)),
    ("mm", Unit::new(Dimension::Length, 1e-3)),
    ("km", Unit::new(Dimension::Length, 1e3)),
    ("ft", Unit::new(Dimension::Length, 0.3048)),
    ("s", Unit::new(Dimension::Time, 1.0)),
    ("ms", Unit::new(Dimension::Time, 1e-3)),
    ("min", Unit::new(Dimension::Time, 60.0)),
    ("h", Unit::new(Dimension::Time, 3600.0)),
    ("J", Unit::new(Dimension::Energy, 1.0)),
    ("kJ", Unit::new(Dimension::Energy, 1e3)),
    ("MJ", Unit::new(Dimension::Energy, 1e6)),
    ("Wh", Unit::new(Dimension::Energy, 3600.0)),
    ("kWh", Unit::new(Dimension::Energy, 3.6e6)),
    ("C", Unit::new(Dimension::Charge, 1.0)),
    ("Ah", Unit::new(Dimension::Charge, 3600.0)),
    ("mAh", Unit::new(Dimension::Charge, 3.6)),
    ("°", Unit::new(Dimension::Angle, 1.0)),
    ("deg", Unit::new(Dimension::Angle, 1.0)),
    ("rad", Unit::new(Dimension::Angle, 180.0 / std::f64::consts::PI)),
    ("kg", Unit::new(Dimension::Mass, 1.0)),
    ("Ω", Unit::new(Dimension::Resistance, 1.0)),
    ("ohm", Unit::new(Dimension::Resistance, 1.0)),
    ("mΩ", Unit::new(Dimension::Resistance, 1e-3)),
    ("mohm", Unit::new(Dimension::Resistance, 1e-3)),
    ("count", Unit::new(Dimension::Plain, 1.0)),
    ("bool", Unit::new(Dimension::Plain, 1.0)),
];

/// Looks up a unit string.
pub fn parse_unit(s: &str) -> Option<Unit> {
    UNITS.iter().find(|(name, _)| *name == s).map(|(_, u)| *u)
}

/// The accepted unit strings, for error messages.
pub fn unit_names() -> String {
    UNITS.iter().filter(|(n, _)| !n.is_empty()).map(|(n, _)| *n).collect::<Vec<_>>().join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn si(unit: &str, v: f64) -> f64 {
        parse_unit(unit).unwrap().to_si(v)
    }

    #[test]
    fn exact_definitions() {
        // 1 kn = 1.852 km/h exactly (REFERENCES.md, NMEA 0183 section).
        assert!((si("kn", 173.8) - 89.410_444).abs() < 1e-5);
        // 1 mph = 1.609344 km/h (international mile, 1959), from memory.
        assert!((si("mph", 100.0) - 160.9344 / 3.6).abs() < 1e-12);
        // 1 psi = 6894.757 Pa (NIST SP 811 appendix B), from memory.
        assert!((si("psi", 1.0) - 6894.757).abs() < 1e-3);
        // 1 hp = 745.6999 W (NIST SP 811), from memory.
        assert!((si("hp", 1.0) - 745.6999).abs() < 1e-4);
        // 1 PS = 735.49875 W (from memory; 75 kgf·m/s).
        assert!((si("PS", 1.0) - 735.49875).abs() < 1e-9);
        assert_eq!(si("kWh", 1.0), 3.6e6);
        assert_eq!(si("bar", 1.0), 1e5);
    }

    #[test]
    fn temperatures_are_affine() {
        assert!((si("K", 273.15)).abs() < 1e-12);
        assert!((si("°F", 212.0) - 100.0).abs() < 1e-12);
        assert!((si("degF", 32.0)).abs() < 1e-12);
        let f = parse_unit("°F").unwrap();
        assert!((f.from_si(f.to_si(451.0)) - 451.0).abs() < 1e-9);
    }

    #[test]
    fn fractions_and_plain() {
        assert_eq!(si("%", 55.0), 0.55);
        assert!(parse_unit("").unwrap().fits(Dimension::Fraction));
        assert!(!parse_unit("V").unwrap().fits(Dimension::Fraction));
        assert!(parse_unit("furlong/fortnight").is_none());
    }
}
