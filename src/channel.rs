//! Channels: the engine's vocabulary.
//!
//! A channel is a named stream of values in SI units. The canonical channels
//! (listed in the README under "The signal map") have fixed ids so the engine
//! reads them by index; every other signal keeps its own name and gets the
//! next free id when first seen.

use std::collections::HashMap;

use crate::units::Dimension;

/// Largest magnitude a channel value may have, in SI units. Beyond it a
/// decoded value is rejected like a non-finite one, and `check` refuses a
/// signal whose scaled range reaches past it: no vehicle quantity comes
/// near (a 100 kWh pack holds 3.6e8 J), while a value of 1e308 m/s is
/// finite but turns infinite the moment it is shown in km/h or cubed into
/// a power. 1e30 keeps a full 64-bit counter (1.8e19) and leaves room for a
/// product of a few values to stay finite.
pub const MAX_MAGNITUDE: f64 = 1e30;

/// Most channels a session holds: every id a [`ChannelId`] can carry.
/// Line telemetry interns each new key that arrives on the wire, so a
/// sender of ever-new keys reaches it; past it a key is refused (and the
/// decoder counts the refusal), never given an id already in use.
pub const MAX_CHANNELS: usize = u16::MAX as usize + 1;

/// The channel table is full: a new name would need an id past
/// [`MAX_CHANNELS`].
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
#[error("the channel table is full ({MAX_CHANNELS} channels); \"{name}\" gets no channel")]
pub struct ChannelTableFull {
    /// The name that was refused.
    pub name: String,
}

/// Index of a channel in a [`ChannelTable`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct ChannelId(pub u16);

macro_rules! canonical {
    ($( $konst:ident = $name:literal, $dim:ident; )*) => {
        /// Fixed ids of the canonical channels.
        pub mod ch {
            use super::ChannelId;
            canonical!(@ids 0u16; $($konst)*);
        }
        /// The canonical channels, in id order: name and dimension.
        pub const CANONICAL: &[(&str, Dimension)] = &[ $( ($name, Dimension::$dim), )* ];
    };
    (@ids $n:expr; $first:ident $($rest:ident)*) => {
        pub const $first: ChannelId = ChannelId($n);
        canonical!(@ids $n + 1u16; $($rest)*);
    };
    (@ids $n:expr;) => {};
}

canonical! {
    VEHICLE_SPEED = "vehicle.speed", Speed;
    GNSS_SPEED = "gnss.speed", Speed;
    VEHICLE_ACCEL = "vehicle.accel", Accel;
    ENGINE_RPM = "engine.rpm", ShaftSpeed;
    ENGINE_TORQUE = "engine.torque", Torque;
    ENGINE_POWER = "engine.power", Power;
    MOTOR_POWER = "motor.power", Power;
    BATTERY_VOLTAGE = "battery.voltage", Voltage;
    BATTERY_CURRENT = "battery.current", Current;
    BATTERY_SOC = "battery.soc", Fraction;
    BATTERY_TEMP = "battery.temp", Temperature;
    BATTERY_POWER_LIMIT = "battery.power_limit", Power;
    DRIVER_THROTTLE = "driver.throttle", Fraction;
    DRIVER_BRAKE = "driver.brake", Fraction;
    DRIVER_BOOST = "driver.boost", Plain;
    GEARBOX_GEAR = "gearbox.gear", Plain;
    AMBIENT_TEMP = "ambient.temp", Temperature;
    AMBIENT_PRESSURE = "ambient.pressure", Pressure;
    AMBIENT_HUMIDITY = "ambient.humidity", Fraction;
    AMBIENT_WIND = "ambient.wind", Speed;
    GNSS_LAT = "gnss.lat", Angle;
    GNSS_LON = "gnss.lon", Angle;
    GNSS_ALT = "gnss.alt", Length;
    GNSS_FIX = "gnss.fix", Plain;
    GNSS_COURSE = "gnss.course", Angle;
    GNSS_SATS = "gnss.sats", Plain;
    TYRE_FL_TEMP = "tyre.fl.temp", Temperature;
    TYRE_FR_TEMP = "tyre.fr.temp", Temperature;
    TYRE_RL_TEMP = "tyre.rl.temp", Temperature;
    TYRE_RR_TEMP = "tyre.rr.temp", Temperature;
    TYRE_FL_PRESSURE = "tyre.fl.pressure", Pressure;
    TYRE_FR_PRESSURE = "tyre.fr.pressure", Pressure;
    TYRE_RL_PRESSURE = "tyre.rl.pressure", Pressure;
    TYRE_RR_PRESSURE = "tyre.rr.pressure", Pressure;
}

/// The dimension a name demands if it is canonical: a listed name, or a
/// `tyre.<position>.temp|pressure` of any position.
pub fn canonical_dimension(name: &str) -> Option<Dimension> {
    if let Some((_, d)) = CANONICAL.iter().find(|(n, _)| *n == name) {
        return Some(*d);
    }
    let mut parts = name.split('.');
    match (parts.next(), parts.next(), parts.next(), parts.next()) {
        (Some("tyre"), Some(pos), Some("temp"), None) if valid_part(pos) => Some(Dimension::Temperature),
        (Some("tyre"), Some(pos), Some("pressure"), None) if valid_part(pos) => Some(Dimension::Pressure),
        _ => None,
    }
}

fn valid_part(s: &str) -> bool {
    !s.is_empty() && s.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'_')
}

/// Whether `name` is a well-formed channel name: dot-separated parts of
/// ASCII letters, digits and underscores.
pub fn valid_channel_name(name: &str) -> bool {
    name.len() <= 64 && name.split('.').all(valid_part)
}

/// One channel's static description.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelInfo {
    pub name: String,
    pub dimension: Dimension,
    /// Period at which fresh samples are expected, if any source promises one.
    pub expected_period_ns: Option<i64>,
}

/// All channels of a session. Canonical channels first, at their fixed ids.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelTable {
    channels: Vec<ChannelInfo>,
    /// Name to id, so interning costs the same with 30 channels or 60 000.
    by_name: HashMap<String, ChannelId>,
}

impl Default for ChannelTable {
    fn default() -> Self {
        let channels: Vec<ChannelInfo> = CANONICAL
            .iter()
            .map(|(n, d)| ChannelInfo { name: n.to_string(), dimension: *d, expected_period_ns: None })
            .collect();
        let by_name = channels.iter().enumerate().map(|(i, c)| (c.name.clone(), ChannelId(i as u16))).collect();
        ChannelTable { channels, by_name }
    }
}

impl ChannelTable {
    /// The id of `name`, adding it (with `dimension`) if it is new: for a
    /// table built from a short fixed list (tests).
    ///
    /// # Panics
    /// When the table is full. Names from input (a signal map, line
    /// telemetry) go through [`ChannelTable::try_intern`].
    pub fn intern(&mut self, name: &str, dimension: Dimension) -> ChannelId {
        self.try_intern(name, dimension).expect("a fixed list of channels fits the table")
    }

    /// The id of `name`, adding it (with `dimension`) if it is new; an
    /// error when it is new and the table already holds [`MAX_CHANNELS`].
    pub fn try_intern(&mut self, name: &str, dimension: Dimension) -> Result<ChannelId, ChannelTableFull> {
        if let Some(id) = self.find(name) {
            return Ok(id);
        }
        let index = self.channels.len();
        let id = u16::try_from(index).map_err(|_| ChannelTableFull { name: name.to_string() })?;
        self.channels.push(ChannelInfo { name: name.to_string(), dimension, expected_period_ns: None });
        self.by_name.insert(name.to_string(), ChannelId(id));
        Ok(ChannelId(id))
    }

    pub fn find(&self, name: &str) -> Option<ChannelId> {
        self.by_name.get(name).copied()
    }

    pub fn get(&self, id: ChannelId) -> &ChannelInfo {
        &self.channels[id.0 as usize]
    }

    /// Records that samples of `id` are expected at least every `period_ns`;
    /// the shortest promise wins.
    pub fn expect_period(&mut self, id: ChannelId, period_ns: i64) {
        let c = &mut self.channels[id.0 as usize];
        c.expected_period_ns = Some(c.expected_period_ns.map_or(period_ns, |p| p.min(period_ns)));
    }

    pub fn len(&self) -> usize {
        self.channels.len()
    }

    pub fn is_empty(&self) -> bool {
        self.channels.is_empty()
    }

    pub fn iter(&self) -> impl Iterator<Item = (ChannelId, &ChannelInfo)> {
        self.channels.iter().enumerate().map(|(i, c)| (ChannelId(i as u16), c))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fixed_ids_match_the_list() {
        let t = ChannelTable::default();
        assert_eq!(t.get(ch::VEHICLE_SPEED).name, "vehicle.speed");
        assert_eq!(t.get(ch::TYRE_RR_PRESSURE).name, "tyre.rr.pressure");
        assert_eq!(t.find("battery.soc"), Some(ch::BATTERY_SOC));
    }

    #[test]
    fn tyre_positions_are_canonical_patterns() {
        assert_eq!(canonical_dimension("tyre.rl2.temp"), Some(Dimension::Temperature));
        assert_eq!(canonical_dimension("tyre.fl.pressure"), Some(Dimension::Pressure));
        assert_eq!(canonical_dimension("tyre..temp"), None);
        assert_eq!(canonical_dimension("coolant.temp"), None);
        assert!(valid_channel_name("coolant.temp"));
        assert!(!valid_channel_name("coolant temp"));
    }

    // Issue 13, item 7: the 65 537th channel got id 0 (`as u16` wrapped) and
    // took over vehicle.speed.
    #[test]
    fn a_full_table_refuses_a_new_name_and_reuses_no_id() {
        let mut t = ChannelTable::default();
        let mut last = ChannelId(0);
        for i in t.len()..MAX_CHANNELS {
            last = t.try_intern(&format!("k{i}"), Dimension::Plain).unwrap();
        }
        assert_eq!((t.len(), last), (MAX_CHANNELS, ChannelId(u16::MAX)));
        let e = t.try_intern("one.more", Dimension::Plain).unwrap_err();
        assert!(e.to_string().contains("65536 channels") && e.to_string().contains("one.more"), "{e}");
        assert_eq!(t.len(), MAX_CHANNELS);
        assert_eq!(t.get(ch::VEHICLE_SPEED).name, "vehicle.speed");
        assert_eq!(t.find("one.more"), None);
        // Names already in the table still resolve.
        assert_eq!(t.try_intern("k100", Dimension::Plain), Ok(ChannelId(100)));
        assert_eq!(t.try_intern("vehicle.speed", Dimension::Speed), Ok(ch::VEHICLE_SPEED));
    }

    #[test]
    fn shortest_period_wins() {
        let mut t = ChannelTable::default();
        t.expect_period(ch::VEHICLE_SPEED, 20_000_000);
        t.expect_period(ch::VEHICLE_SPEED, 10_000_000);
        t.expect_period(ch::VEHICLE_SPEED, 50_000_000);
        assert_eq!(t.get(ch::VEHICLE_SPEED).expected_period_ns, Some(10_000_000));
    }
}
