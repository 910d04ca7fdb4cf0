//! Numbers as the screens show them: display units are a view setting, SI
//! stays inside. Unknown values show as "—" and unlimited ones as "∞".

use crate::event::{NS_PER_S, TimeNs};

/// The display unit system.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Units {
    /// km/h, kW, km.
    Metric,
    /// mph, hp, mi.
    Imperial,
}

impl Units {
    pub fn speed_unit(self) -> &'static str {
        match self {
            Units::Metric => "km/h",
            Units::Imperial => "mph",
        }
    }
    pub fn speed(self, mps: f64) -> f64 {
        match self {
            Units::Metric => mps * 3.6,
            Units::Imperial => mps / crate::units::MPH_MPS,
        }
    }
    pub fn power_unit(self) -> &'static str {
        match self {
            Units::Metric => "kW",
            Units::Imperial => "hp",
        }
    }
    pub fn power(self, w: f64) -> f64 {
        match self {
            Units::Metric => w / 1e3,
            Units::Imperial => w / crate::units::HP_W,
        }
    }
    pub fn toggle(self) -> Units {
        match self {
            Units::Metric => Units::Imperial,
            Units::Imperial => Units::Metric,
        }
    }
}

/// "—" for unknown values.
pub const UNKNOWN: &str = "—";

/// A number with `digits` decimals, or "—".
pub fn num(v: Option<f64>, digits: usize) -> String {
    match v {
        Some(x) if x.is_finite() => format!("{x:.digits$}"),
        Some(x) if x.is_infinite() => "∞".into(),
        _ => UNKNOWN.into(),
    }
}

/// Speed in display units, no unit.
pub fn speed(u: Units, mps: Option<f64>) -> String {
    num(mps.map(|v| u.speed(v)), 1)
}

/// Power in display units with its unit.
pub fn power(u: Units, w: Option<f64>) -> String {
    match w {
        Some(x) if x.is_finite() => format!("{:.0} {}", u.power(x), u.power_unit()),
        _ => UNKNOWN.into(),
    }
}

/// A distance: metres below 1 km, else km (or miles).
pub fn distance(u: Units, m: Option<f64>) -> String {
    match (u, m) {
        (_, Some(x)) if !x.is_finite() => UNKNOWN.into(),
        (Units::Metric, Some(x)) if x.abs() < 1000.0 => format!("{x:.0} m"),
        (Units::Metric, Some(x)) => format!("{:.2} km", x / 1000.0),
        (Units::Imperial, Some(x)) => format!("{:.2} mi", x / 1609.344),
        (_, None) => UNKNOWN.into(),
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
        assert_eq!(seconds(Some(f64::INFINITY)), "∞");
        assert_eq!(seconds(None), "—");
        assert_eq!(elapsed(62_300_000_000), "1:02.3");
        assert_eq!(elapsed(27_999_000_000), "0:28.0", "to the nearest tenth");
        assert_eq!(clock(1_773_474_190_250_000_000), "07:43:10.2");
    }
}
