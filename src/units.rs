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

/// A set of display units: what the screens show numbers in. SI stays
/// inside; the set only words a value at the edge.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Default)]
pub enum UnitSet {
    /// km/h, km and m, kW, bar, hPa, °C.
    #[default]
    Metric,
    /// US customary where the trade uses it: mph, mi and ft, hp for
    /// mechanical power, psi, inHg, °F; the pack stays in kW and kWh (as
    /// US practice has it).
    Imperial,
}

impl UnitSet {
    /// The name of the set, as the settings file and the screens write it.
    pub fn name(self) -> &'static str {
        match self {
            UnitSet::Metric => "metric",
            UnitSet::Imperial => "imperial",
        }
    }

    /// The set of that name.
    pub fn from_name(name: &str) -> Option<UnitSet> {
        [UnitSet::Metric, UnitSet::Imperial].into_iter().find(|u| u.name() == name)
    }

    /// The other set.
    pub fn toggle(self) -> UnitSet {
        match self {
            UnitSet::Metric => UnitSet::Imperial,
            UnitSet::Imperial => UnitSet::Metric,
        }
    }

    /// Speed's display unit.
    pub fn speed_unit(self) -> &'static str {
        Measure::Speed.unit(self).symbol
    }

    /// A speed in display units.
    pub fn speed(self, mps: f64) -> f64 {
        Measure::Speed.unit(self).from_si(mps)
    }

    /// Mechanical power's display unit.
    pub fn power_unit(self) -> &'static str {
        Measure::Power.unit(self).symbol
    }

    /// A mechanical power in display units.
    pub fn power(self, w: f64) -> f64 {
        Measure::Power.unit(self).from_si(w)
    }

    /// The unit a course distance is drawn in on a chart's axis (km, mi).
    pub fn course_unit(self) -> DisplayUnit {
        Measure::Distance.unit(self)
    }
}

/// What a value measures, as far as showing it goes: its dimension, refined
/// where one dimension reads in different units (tyre against air
/// pressure, the car's mechanical power against the pack's electrical
/// power, a 0..1 fraction as a percentage against a coefficient).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Measure {
    Speed,
    Accel,
    ShaftSpeed,
    Torque,
    /// Mechanical power (engine, wheels, road load).
    Power,
    /// The pack's electrical power.
    ElectricPower,
    Voltage,
    Current,
    /// A 0..1 fraction shown as a percentage.
    Percent,
    Temperature,
    /// A heating rate, per second.
    TemperatureRate,
    /// Tyres, hydraulics.
    Pressure,
    /// The weather's pressure.
    AirPressure,
    /// A place along the course: m below 1 km (ft below 1000 ft), else km (mi).
    Distance,
    /// A height (GNSS altitude).
    Height,
    Time,
    Energy,
    Charge,
    Angle,
    /// Latitude and longitude, degrees.
    Coordinate,
    Mass,
    Resistance,
    Density,
    Area,
    /// kW delivered per kWh of capacity.
    DischargeRate,
    /// A plain coefficient or ratio (Crr, R²), three significant digits.
    Coefficient,
    /// A whole number (a gear, a count, a flag).
    Count,
    /// A number without a known meaning: four significant digits.
    Plain,
}

/// How many decimals a display unit shows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Precision {
    /// Always this many.
    Fixed(u8),
    /// This many significant digits, with at least `min` and at most `max` decimals.
    Significant { digits: u8, min: u8, max: u8 },
}

/// A display unit: its symbol, its map from SI (`si = value·factor +
/// offset`) and its precision.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DisplayUnit {
    pub symbol: &'static str,
    pub factor: f64,
    pub offset: f64,
    pub precision: Precision,
}

const fn du(symbol: &'static str, factor: f64, precision: Precision) -> DisplayUnit {
    DisplayUnit { symbol, factor, offset: 0.0, precision }
}

const fn fixed(n: u8) -> Precision {
    Precision::Fixed(n)
}

/// One foot in m, exactly (international foot, 1959).
pub const FOOT_M: f64 = 0.3048;
/// One international mile in m, exactly.
pub const MILE_M: f64 = 1609.344;
/// One inch of mercury (conventional, 0 °C) in Pa, from memory (NIST SP 811: 3.386389 kPa).
pub const INHG_PA: f64 = 3386.389;
/// One pound in kg, exactly.
pub const POUND_KG: f64 = 0.453_592_37;

impl DisplayUnit {
    /// A value in this unit from SI.
    pub fn from_si(self, si: f64) -> f64 {
        (si - self.offset) / self.factor
    }

    /// The decimals `v` (in this unit) is shown with.
    pub fn decimals(self, v: f64) -> usize {
        match self.precision {
            Precision::Fixed(n) => n as usize,
            Precision::Significant { digits, min, max } => {
                let mag = if v == 0.0 || !v.is_finite() { 0 } else { v.abs().log10().floor() as i32 };
                (digits as i32 - 1 - mag).clamp(min as i32, max as i32) as usize
            }
        }
    }

    /// `si` in this unit, as a number with its precision (one decimal fewer
    /// when `coarse`), without the unit: `—` unknown, `∞` unlimited, never
    /// a negative zero.
    pub fn number(self, si: f64, coarse: bool) -> String {
        if si.is_nan() {
            return "—".into();
        }
        let v = self.from_si(si);
        if v.is_infinite() {
            return if v > 0.0 { "∞".into() } else { "-∞".into() };
        }
        let d = self.decimals(v).saturating_sub(usize::from(coarse));
        number_text(v, d)
    }
}

/// `v` with `decimals` decimals, never "-0" or "-0.0": a value that rounds
/// to zero shows without a sign. The sign of a negative value is the ASCII
/// hyphen-minus everywhere.
pub fn number_text(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    match s.strip_prefix('-') {
        Some(rest) if rest.bytes().all(|b| b == b'0' || b == b'.') => rest.to_string(),
        _ => s,
    }
}

impl Measure {
    /// The display unit of this measure in `set` (for [`Measure::Distance`],
    /// the long one: km or mi; [`show`] picks m or ft for short ones).
    pub fn unit(self, set: UnitSet) -> DisplayUnit {
        use Measure as M;
        use UnitSet::{Imperial as I, Metric as Me};
        let sig = |digits, min, max| Precision::Significant { digits, min, max };
        match (self, set) {
            (M::Speed, Me) => du("km/h", 1.0 / 3.6, fixed(1)),
            (M::Speed, I) => du("mph", MPH_MPS, fixed(1)),
            (M::Accel, Me) => du("m/s²", 1.0, fixed(2)),
            (M::Accel, I) => du("g", G0, fixed(3)),
            (M::ShaftSpeed, _) => du("rpm", 1.0, fixed(0)),
            (M::Torque, Me) => du("N·m", 1.0, fixed(0)),
            (M::Torque, I) => du("lbf·ft", FOOT_M * POUND_KG * G0, fixed(0)),
            (M::Power, Me) => du("kW", 1e3, fixed(0)),
            (M::Power, I) => du("hp", HP_W, fixed(0)),
            (M::ElectricPower, _) => du("kW", 1e3, fixed(0)),
            (M::Voltage, _) => du("V", 1.0, sig(4, 1, 4)),
            (M::Current, _) => du("A", 1.0, fixed(1)),
            (M::Percent, _) => du("%", 0.01, fixed(1)),
            (M::Temperature, Me) => du("°C", 1.0, fixed(1)),
            (M::Temperature, I) => {
                DisplayUnit { symbol: "°F", factor: 5.0 / 9.0, offset: -32.0 * 5.0 / 9.0, precision: fixed(1) }
            }
            (M::TemperatureRate, Me) => du("°C/s", 1.0, fixed(3)),
            (M::TemperatureRate, I) => du("°F/s", 5.0 / 9.0, fixed(3)),
            (M::Pressure, Me) => du("bar", 1e5, fixed(2)),
            (M::Pressure, I) => du("psi", PSI_PA, fixed(1)),
            (M::AirPressure, Me) => du("hPa", 100.0, fixed(1)),
            (M::AirPressure, I) => du("inHg", INHG_PA, fixed(2)),
            (M::Distance, Me) => du("km", 1e3, fixed(2)),
            (M::Distance, I) => du("mi", MILE_M, fixed(2)),
            (M::Height, Me) => du("m", 1.0, fixed(1)),
            (M::Height, I) => du("ft", FOOT_M, fixed(0)),
            (M::Time, _) => du("s", 1.0, fixed(1)),
            (M::Energy, _) => du("kWh", 3.6e6, fixed(2)),
            (M::Charge, _) => du("Ah", 3600.0, fixed(2)),
            (M::Angle, _) => du("°", 1.0, fixed(1)),
            (M::Coordinate, _) => du("°", 1.0, fixed(6)),
            (M::Mass, Me) => du("kg", 1.0, fixed(0)),
            (M::Mass, I) => du("lb", POUND_KG, fixed(0)),
            (M::Resistance, _) => du("mΩ", 1e-3, fixed(2)),
            (M::Density, Me) => du("kg/m³", 1.0, fixed(4)),
            (M::Density, I) => du("lb/ft³", POUND_KG / (FOOT_M * FOOT_M * FOOT_M), fixed(5)),
            (M::Area, Me) => du("m²", 1.0, fixed(3)),
            (M::Area, I) => du("ft²", FOOT_M * FOOT_M, fixed(2)),
            (M::DischargeRate, _) => du("kW/kWh", 1.0, fixed(1)),
            (M::Coefficient, _) => du("", 1.0, sig(3, 0, 6)),
            (M::Count, _) => du("", 1.0, fixed(0)),
            (M::Plain, _) => du("", 1.0, sig(4, 0, 4)),
        }
    }

    /// The short unit of a distance below a threshold (m below 1 km, ft
    /// below 1000 ft); `None` for other measures.
    fn short_unit(self, set: UnitSet) -> Option<(DisplayUnit, f64)> {
        match (self, set) {
            (Measure::Distance, UnitSet::Metric) => Some((du("m", 1.0, fixed(0)), 1000.0)),
            (Measure::Distance, UnitSet::Imperial) => Some((du("ft", FOOT_M, fixed(0)), 1000.0 * FOOT_M)),
            _ => None,
        }
    }

    /// The measure a value of this SI unit string shows as, when nothing
    /// more is known (the derived quantities' table states the rest).
    pub fn of_si_unit(unit: &str) -> Measure {
        match unit {
            "m/s" => Measure::Speed,
            "m/s²" => Measure::Accel,
            "rpm" => Measure::ShaftSpeed,
            "N·m" => Measure::Torque,
            "W" => Measure::Power,
            "V" => Measure::Voltage,
            "A" => Measure::Current,
            "°C" => Measure::Temperature,
            "°C/s" => Measure::TemperatureRate,
            "Pa" => Measure::Pressure,
            "m" => Measure::Distance,
            "s" => Measure::Time,
            "J" => Measure::Energy,
            "C" => Measure::Charge,
            "°" => Measure::Angle,
            "kg" => Measure::Mass,
            "Ω" => Measure::Resistance,
            "kg/m³" => Measure::Density,
            "m²" => Measure::Area,
            "kW/kWh" => Measure::DischargeRate,
            "1" => Measure::Coefficient,
            _ => Measure::Plain,
        }
    }

    /// The measure of a channel, from its dimension and its name: the
    /// weather's pressure reads in hPa and the tyres' in bar, the pack's
    /// power stays electrical, latitude and longitude keep six decimals.
    /// A plain channel is a count when `whole` (its values are whole
    /// numbers), else a plain number.
    pub fn of_channel(name: &str, dimension: Dimension, whole: bool) -> Measure {
        match dimension {
            Dimension::Speed => Measure::Speed,
            Dimension::Accel => Measure::Accel,
            Dimension::ShaftSpeed => Measure::ShaftSpeed,
            Dimension::Torque => Measure::Torque,
            Dimension::Power if name.starts_with("battery.") => Measure::ElectricPower,
            Dimension::Power => Measure::Power,
            Dimension::Voltage => Measure::Voltage,
            Dimension::Current => Measure::Current,
            Dimension::Fraction => Measure::Percent,
            Dimension::Temperature => Measure::Temperature,
            Dimension::Pressure if name.starts_with("ambient.") || name.contains("baro") => Measure::AirPressure,
            Dimension::Pressure => Measure::Pressure,
            Dimension::Length => Measure::Height,
            Dimension::Time => Measure::Time,
            Dimension::Energy => Measure::Energy,
            Dimension::Charge => Measure::Charge,
            Dimension::Angle if name.ends_with(".lat") || name.ends_with(".lon") => Measure::Coordinate,
            Dimension::Angle => Measure::Angle,
            Dimension::Mass => Measure::Mass,
            Dimension::Resistance => Measure::Resistance,
            Dimension::Plain if whole => Measure::Count,
            Dimension::Plain => Measure::Plain,
        }
    }
}

/// A value as shown: the number (with its sign, decimals and no unit) and
/// its unit symbol (empty for counts and plain numbers).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Shown {
    pub number: String,
    pub unit: &'static str,
}

impl std::fmt::Display for Shown {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self.unit {
            "" => f.write_str(&self.number),
            // Degrees of angle sit on the number; every other unit after a space.
            "°" => write!(f, "{}°", self.number),
            u => write!(f, "{} {u}", self.number),
        }
    }
}

/// The SI value `si` of `measure` in `set`, with the set's precision (one
/// decimal fewer when `coarse`): distances below 1 km (1000 ft) in m (ft).
pub fn show(measure: Measure, set: UnitSet, si: f64, coarse: bool) -> Shown {
    let unit = match measure.short_unit(set) {
        // Compared after rounding, so 999.6 m shows as 1.00 km, not 1000 m.
        Some((short, below)) if si.is_finite() && (si.abs() / short.factor).round() * short.factor < below => short,
        _ => measure.unit(set),
    };
    Shown { number: unit.number(si, coarse), unit: unit.symbol }
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

    fn shown(m: Measure, set: UnitSet, si: f64) -> String {
        show(m, set, si, false).to_string()
    }

    // Issue 15, item 12: raw pascals (`tyre.fl.pressure 273040 Pa`,
    // `ambient.pressure 98400.0 Pa`), charge as `0.3150` with unit `1`,
    // counts with decimals: every measure has a display unit per set.
    #[test]
    fn the_display_table_per_set() {
        use Measure as M;
        use UnitSet::{Imperial, Metric};
        // Tyres in bar and psi; 273 040 Pa = 39.6 psi (1 psi = 6894.757 Pa).
        assert_eq!(shown(M::Pressure, Metric, 273_040.0), "2.73 bar");
        assert_eq!(shown(M::Pressure, Imperial, 273_040.0), "39.6 psi");
        // Air in hPa and inHg; 98 400 Pa = 29.06 inHg (1 inHg = 3386.389 Pa, NIST SP 811, from memory).
        assert_eq!(shown(M::AirPressure, Metric, 98_400.0), "984.0 hPa");
        assert_eq!(shown(M::AirPressure, Imperial, 98_400.0), "29.06 inHg");
        assert_eq!(shown(M::Percent, Imperial, 0.315), "31.5 %");
        assert_eq!(shown(M::Count, Metric, 6.0), "6");
        assert_eq!(shown(M::Speed, Metric, 100.0), "360.0 km/h");
        assert_eq!(shown(M::Speed, Imperial, 100.0), "223.7 mph");
        assert_eq!(shown(M::Power, Imperial, 101e3), "135 hp");
        assert_eq!(shown(M::ElectricPower, Imperial, 101e3), "101 kW");
        assert_eq!(shown(M::Energy, Imperial, 6.336e6), "1.76 kWh");
        // 37.5 °C = 99.5 °F; a rate converts without the offset.
        assert_eq!(shown(M::Temperature, Imperial, 37.5), "99.5 °F");
        assert_eq!(shown(M::TemperatureRate, Imperial, 0.1), "0.180 °F/s");
        assert_eq!(shown(M::Distance, Metric, 319.0), "319 m");
        assert_eq!(shown(M::Distance, Metric, 6460.0), "6.46 km");
        // 1000 ft is 304.8 m: below it feet, from it miles.
        assert_eq!(shown(M::Distance, Imperial, 300.0), "984 ft");
        assert_eq!(shown(M::Distance, Imperial, 6460.0), "4.01 mi");
        assert_eq!(shown(M::Height, Imperial, 240.0), "787 ft");
        assert_eq!(shown(M::Coordinate, Metric, 46.816_31), "46.816310°");
        // 4 significant digits for voltages: a pack and a cell.
        assert_eq!(shown(M::Voltage, Metric, 676.0), "676.0 V");
        assert_eq!(shown(M::Voltage, Metric, 3.512), "3.512 V");
        assert_eq!(shown(M::Coefficient, Metric, 0.012), "0.0120");
        assert_eq!(shown(M::Coefficient, Metric, 0.000_123_4), "0.000123");
        // Coarse: one decimal fewer.
        assert_eq!(show(M::Speed, Metric, 365.0 / 3.6, true).to_string(), "365 km/h");
        assert_eq!(shown(M::Speed, Metric, f64::NAN), "— km/h");
        assert_eq!(shown(M::Time, Metric, f64::INFINITY), "∞ s");
    }

    #[test]
    fn every_measure_converts_both_ways_in_both_sets() {
        use Measure as M;
        let all = [
            M::Speed,
            M::Accel,
            M::ShaftSpeed,
            M::Torque,
            M::Power,
            M::ElectricPower,
            M::Voltage,
            M::Current,
            M::Percent,
            M::Temperature,
            M::TemperatureRate,
            M::Pressure,
            M::AirPressure,
            M::Distance,
            M::Height,
            M::Time,
            M::Energy,
            M::Charge,
            M::Angle,
            M::Coordinate,
            M::Mass,
            M::Resistance,
            M::Density,
            M::Area,
            M::DischargeRate,
            M::Coefficient,
            M::Count,
            M::Plain,
        ];
        for m in all {
            for set in [UnitSet::Metric, UnitSet::Imperial] {
                let u = m.unit(set);
                // A parseable symbol converts as the parser says.
                if let Some(p) = parse_unit(u.symbol).filter(|_| !u.symbol.is_empty() && u.symbol != "%") {
                    assert!((p.to_si(u.from_si(123.4)) - 123.4).abs() < 1e-9, "{m:?} {set:?} {}", u.symbol);
                }
                assert!(!shown(m, set, -1e-12).starts_with('-'), "{m:?} {set:?}: a negative zero");
            }
        }
        assert_eq!(UnitSet::from_name("imperial"), Some(UnitSet::Imperial));
        assert_eq!(UnitSet::Metric.toggle().name(), "imperial");
    }

    #[test]
    fn channels_pick_their_measure_by_dimension_and_name() {
        use Measure as M;
        assert_eq!(Measure::of_channel("tyre.fl.pressure", Dimension::Pressure, false), M::Pressure);
        assert_eq!(Measure::of_channel("ambient.pressure", Dimension::Pressure, false), M::AirPressure);
        assert_eq!(Measure::of_channel("battery.power_limit", Dimension::Power, false), M::ElectricPower);
        assert_eq!(Measure::of_channel("engine.power", Dimension::Power, false), M::Power);
        assert_eq!(Measure::of_channel("battery.soc", Dimension::Fraction, false), M::Percent);
        assert_eq!(Measure::of_channel("gearbox.gear", Dimension::Plain, true), M::Count);
        assert_eq!(Measure::of_channel("x.lambda", Dimension::Plain, false), M::Plain);
        assert_eq!(Measure::of_channel("gnss.lat", Dimension::Angle, false), M::Coordinate);
        assert_eq!(Measure::of_si_unit("m/s"), M::Speed);
    }
}
