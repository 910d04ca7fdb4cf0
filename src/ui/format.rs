//! Numbers as the screens show them: display units are a view setting, SI
//! stays inside. Unknown values show as "—" and unlimited ones as "∞".

use crate::event::{NS_PER_S, TimeNs};

/// The display unit set (metric or imperial): the table of display units
/// per measure is the vocabulary's (`crate::units`), so the alert texts the
/// engine states as values read the same as every other number here.
pub use crate::units::UnitSet as Units;
use crate::units::{self, Measure};

/// "—" for unknown values.
pub const UNKNOWN: &str = "—";

/// A number with `digits` decimals, or "—"; never a negative zero.
pub fn num(v: Option<f64>, digits: usize) -> String {
    match v {
        Some(x) if x.is_finite() => units::number_text(x, digits),
        Some(x) if x.is_infinite() => "∞".into(),
        _ => UNKNOWN.into(),
    }
}

/// A value of `measure` in the set's display unit, with its unit: "101 kW",
/// "2.73 bar", "—".
pub fn value(u: Units, measure: Measure, si: Option<f64>) -> String {
    match si {
        Some(x) if !x.is_nan() => units::show(measure, u, x, false).to_string(),
        _ => UNKNOWN.into(),
    }
}

/// As [`value`] with one decimal fewer: "365 km/h".
pub fn rounded(u: Units, measure: Measure, si: Option<f64>) -> String {
    match si {
        Some(x) if !x.is_nan() => units::show(measure, u, x, true).to_string(),
        _ => UNKNOWN.into(),
    }
}

/// The number of a value of `measure` in the set's display unit, without
/// the unit (the unit is said once, beside it).
pub fn number(u: Units, measure: Measure, si: Option<f64>) -> String {
    match si {
        Some(x) if !x.is_nan() => measure.unit(u).number(x, false),
        _ => UNKNOWN.into(),
    }
}

/// A difference of `measure` with its sign and unit: "+0.5 km/h", "-1.2
/// km/h"; one that rounds to zero has no sign.
pub fn signed(u: Units, measure: Measure, si: f64) -> String {
    let text = value(u, measure, Some(si));
    if si > 0.0 && text.starts_with(|c: char| c.is_ascii_digit()) && text.chars().any(|c| ('1'..='9').contains(&c)) {
        format!("+{text}")
    } else {
        text
    }
}

/// Speed in display units, no unit.
pub fn speed(u: Units, mps: Option<f64>) -> String {
    number(u, Measure::Speed, mps)
}

/// Mechanical power (engine, wheels, road load) with its unit: kW or hp.
pub fn power(u: Units, w: Option<f64>) -> String {
    value(u, Measure::Power, w)
}

/// The pack's electrical power with its unit: kW in both sets.
pub fn electric_power(u: Units, w: Option<f64>) -> String {
    value(u, Measure::ElectricPower, w)
}

/// A distance along the course: m below 1 km, else km (ft below 1000 ft,
/// else mi).
pub fn distance(u: Units, m: Option<f64>) -> String {
    match m {
        Some(x) if x.is_finite() => value(u, Measure::Distance, Some(x)),
        _ => UNKNOWN.into(),
    }
}

/// Seconds: "12.4 s", "∞" or "—".
pub fn seconds(s: Option<f64>) -> String {
    match s {
        Some(x) if x.is_infinite() => "∞".into(),
        Some(x) if x.is_finite() && x >= 100.0 => format!("{x:.0} s"),
        Some(x) if x.is_finite() => format!("{x:.1} s"),
        _ => UNKNOWN.into(),
    }
}

/// Stream time of day, UTC: "07:43:12.3".
pub fn clock(t_ns: TimeNs) -> String {
    let (_, _, _, h, m, s) = crate::civil_time::utc_parts(t_ns.div_euclid(NS_PER_S));
    let tenth = t_ns.rem_euclid(NS_PER_S) / (NS_PER_S / 10);
    format!("{h:02}:{m:02}:{s:02}.{tenth}")
}

/// An elapsed stream time, to the nearest tenth: "1:02.3".
pub fn elapsed(ns: TimeNs) -> String {
    let ns = ns.max(0);
    let tenths = (ns + NS_PER_S / 20) / (NS_PER_S / 10);
    format!("{}:{:02}.{}", tenths / 600, tenths / 10 % 60, tenths % 10)
}

/// The age of a value: "0.1 s", "12 s", "3 min".
pub fn age(s: f64) -> String {
    if !s.is_finite() {
        UNKNOWN.into()
    } else if s < 10.0 {
        format!("{s:.1} s")
    } else if s < 120.0 {
        format!("{s:.0} s")
    } else {
        format!("{:.0} min", s / 60.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn display_units() {
        assert!((Units::Metric.speed(100.0) - 360.0).abs() < 1e-9);
        // 100 m/s = 223.694 mph (1 mph = 0.44704 m/s exactly).
        assert!((Units::Imperial.speed(100.0) - 223.693_6).abs() < 1e-3);
        assert_eq!(power(Units::Metric, Some(245_000.0)), "245 kW");
        assert_eq!(power(Units::Imperial, Some(745.699_87 * 300.0)), "300 hp");
        assert_eq!(distance(Units::Metric, Some(820.4)), "820 m");
        assert_eq!(distance(Units::Metric, Some(6046.0)), "6.05 km");
        // Issue 15, item 12: imperial distances are feet and miles, never km.
        assert_eq!(distance(Units::Imperial, Some(250.0)), "820 ft");
        assert_eq!(distance(Units::Imperial, Some(1078.0)), "0.67 mi");
        assert_eq!(distance(Units::Metric, Some(999.6)), "1.00 km", "rounded before the switch");
        assert_eq!(seconds(Some(f64::INFINITY)), "∞");
        assert_eq!(seconds(None), "—");
        assert_eq!(elapsed(62_300_000_000), "1:02.3");
        assert_eq!(elapsed(27_999_000_000), "0:28.0", "to the nearest tenth");
        assert_eq!(clock(1_773_474_190_250_000_000), "07:43:10.2");
    }

    // Issue 15, item 12: `−0 kW` beside `-6 hp`: no negative zero, and one
    // sign glyph (ASCII) for every negative figure.
    #[test]
    fn no_negative_zero_and_one_sign() {
        assert_eq!(power(Units::Metric, Some(-300.0)), "0 kW");
        assert_eq!(power(Units::Imperial, Some(-4474.0)), "-6 hp");
        assert_eq!(num(Some(-0.04), 1), "0.0");
        assert_eq!(num(Some(-0.06), 1), "-0.1");
        assert_eq!(value(Units::Metric, Measure::Speed, Some(-1e-9)), "0.0 km/h");
        // The pack's power is electrical: kW in both sets.
        assert_eq!(electric_power(Units::Imperial, Some(101e3)), "101 kW");
        assert_eq!(power(Units::Imperial, Some(101e3)), "135 hp");
        assert_eq!(signed(Units::Metric, Measure::Speed, 0.5 / 3.6), "+0.5 km/h");
        assert_eq!(signed(Units::Metric, Measure::Speed, -0.01), "0.0 km/h");
        assert_eq!(signed(Units::Metric, Measure::Speed, -1.0), "-3.6 km/h");
    }
}
