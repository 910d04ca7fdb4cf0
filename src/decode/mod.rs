//! decode: events to typed samples. Pure functions, no I/O, no clocks.
//!
//! CAN frames go through the compiled signal map; serial lines through the
//! parser of their source's protocol (NMEA 0183 or termvel's line
//! telemetry). Parse errors are counted per source and the last one kept
//! for the feed screen; nothing here stops on bad input.

pub mod busload;
pub mod can;
pub mod candump;
pub mod hex;
pub mod lines;
pub mod nmea;
pub mod serial_line;
pub mod slcan;
pub mod syntax;

pub use can::{CanCounters, CanMap, Sample};

use std::collections::HashMap;

use crate::channel::{ChannelId, ChannelTable, canonical_dimension, ch};
use crate::config::Signals;
use crate::event::{Event, Payload, SourceId, SourceKind, TimeNs};
use crate::units::{Dimension, parse_unit};

pub use crate::channel::MAX_MAGNITUDE;

/// Whether a decoded value (SI) may enter the channel store: finite and
/// within [`MAX_MAGNITUDE`] (NaN fails the comparison).
#[inline]
pub fn admissible(value: f64) -> bool {
    value.abs() <= MAX_MAGNITUDE
}

/// Decode problems of one source.
#[derive(Clone, Debug, Default, PartialEq, serde::Serialize)]
pub struct SourceDecodeStats {
    /// Lines that did not parse (bad checksum, malformed fields).
    pub parse_errors: u64,
    /// The most recent parse error, for display.
    pub last_error: Option<String>,
    /// Adapter replies read (acknowledgements, refusals, status, version,
    /// serial number): what a serial CAN adapter said that was not a frame.
    pub replies: u64,
}

/// Turns events into samples.
#[derive(Clone, Debug)]
pub struct Decoder {
    pub channels: ChannelTable,
    pub can: CanMap,
    per_source: Vec<SourceDecodeStats>,
    lines_period_ns: TimeNs,
    /// Line-telemetry keys seen, with their channel.
    line_keys: HashMap<String, ChannelId>,
    /// Values rejected for being non-finite or beyond [`MAX_MAGNITUDE`]
    /// after decoding and conversion to SI: never stored, counted here.
    pub rejected_values: u64,
}

impl Decoder {
    /// Compiles the signal map and registers the expected periods of the
    /// GNSS channels.
    pub fn new(signals: &Signals) -> Decoder {
        let mut channels = ChannelTable::default();
        let can = CanMap::compile(signals, &mut channels);
        for id in
            [ch::GNSS_SPEED, ch::GNSS_LAT, ch::GNSS_LON, ch::GNSS_ALT, ch::GNSS_FIX, ch::GNSS_COURSE, ch::GNSS_SATS]
        {
            channels.expect_period(id, signals.gnss_period_ns);
        }
        Decoder {
            channels,
            can,
            per_source: Vec::new(),
            lines_period_ns: signals.lines_period_ns,
            line_keys: HashMap::new(),
            rejected_values: 0,
        }
    }

    /// Decode statistics of `source`.
    pub fn source_stats(&self, source: SourceId) -> SourceDecodeStats {
        self.per_source.get(source.0 as usize).cloned().unwrap_or_default()
    }

    fn stats_mut(&mut self, source: SourceId) -> &mut SourceDecodeStats {
        let i = source.0 as usize;
        if self.per_source.len() <= i {
            self.per_source.resize(i + 1, SourceDecodeStats::default());
        }
        &mut self.per_source[i]
    }

    /// Counts a parse error against `source`.
    pub fn parse_error(&mut self, source: SourceId, message: String) {
        let s = self.stats_mut(source);
        s.parse_errors += 1;
        s.last_error = Some(message);
    }

    /// Counts an adapter reply from `source`.
    pub fn reply(&mut self, source: SourceId) {
        self.stats_mut(source).replies += 1;
    }

    /// Total adapter replies over all sources.
    pub fn replies(&self) -> u64 {
        self.per_source.iter().map(|s| s.replies).sum()
    }

    /// Total parse errors over all sources.
    pub fn parse_errors(&self) -> u64 {
        self.per_source.iter().map(|s| s.parse_errors).sum()
    }

    /// Decodes one event from a source of `kind`, appending samples to `out`.
    #[inline]
    pub fn decode(&mut self, ev: &Event, kind: SourceKind, out: &mut Vec<Sample>) {
        let start = out.len();
        self.decode_any(ev, kind, out);
        // One gate for every protocol: a value that is not finite, or too
        // large to stay finite in a display unit or a derived quantity, is
        // rejected and counted, never stored.
        if !out[start..].iter().all(|s| admissible(s.value)) {
            let before = out.len();
            let mut i = 0;
            out.retain(|s| {
                let keep = i < start || admissible(s.value);
                i += 1;
                keep
            });
            self.rejected_values += (before - out.len()) as u64;
        }
    }

    fn decode_any(&mut self, ev: &Event, kind: SourceKind, out: &mut Vec<Sample>) {
        match (&ev.payload, kind) {
            (Payload::Can(frame), _) => self.can.decode(ev.t_ns, frame, out),
            (Payload::Line(line), SourceKind::Nmea) => self.decode_nmea(ev.t_ns, ev.source, line, out),
            (Payload::Line(line), SourceKind::Lines) => self.decode_lines(ev.t_ns, ev.source, line, out),
            // Refused where it was read, error included: counted, not
            // parsed again.
            (Payload::BadLine { error, .. }, _) => self.parse_error(ev.source, error.clone()),
            // A CAN source's line, read back from a recording: what a serial
            // CAN adapter sent that was not a frame (recorded as a line).
            // This is its one parse in a replay.
            (Payload::Line(line), SourceKind::Can) => match serial_line::adapter_message(line) {
                Ok(Some(frame)) => self.can.decode(ev.t_ns, &frame, out),
                Ok(None) => self.reply(ev.source),
                Err(e) => self.parse_error(ev.source, serial_line::adapter_error(&e)),
            },
            _ => {}
        }
    }

    fn decode_nmea(&mut self, t_ns: TimeNs, source: SourceId, line: &[u8], out: &mut Vec<Sample>) {
        let d = match nmea::parse_sentence(line) {
            Ok(Some(d)) => d,
            Ok(None) => return,
            Err(e) => {
                self.parse_error(source, format!("NMEA: {e}"));
                return;
            }
        };
        // Without a fix, speed and position are not truth.
        let valid = d.fix != Some(0);
        let mut push = |channel, v: Option<f64>, valid: bool| {
            if let Some(value) = v {
                out.push(Sample { t_ns, channel, value, valid: valid && value.is_finite() });
            }
        };
        push(ch::GNSS_SPEED, d.speed_mps, valid);
        push(ch::GNSS_COURSE, d.course_deg, valid);
        push(ch::GNSS_LAT, d.lat_deg, valid);
        push(ch::GNSS_LON, d.lon_deg, valid);
        push(ch::GNSS_ALT, d.alt_m, valid);
        push(ch::GNSS_FIX, d.fix.map(f64::from), true);
        push(ch::GNSS_SATS, d.sats.map(f64::from), true);
    }

    fn decode_lines(&mut self, t_ns: TimeNs, source: SourceId, line: &[u8], out: &mut Vec<Sample>) {
        let mut fields = Vec::new();
        if let Err(e) = lines::parse(line, &mut fields) {
            self.parse_error(source, format!("line telemetry: {e}"));
            return;
        }
        let start = out.len();
        for f in &fields {
            let unit = match f.unit {
                None => None,
                Some(u) => match parse_unit(u) {
                    Some(unit) => Some(unit),
                    None => {
                        out.truncate(start);
                        self.parse_error(source, format!("line telemetry: {}: unknown unit \"{u}\"", f.key));
                        return;
                    }
                },
            };
            let dim = canonical_dimension(f.key).or(unit.map(|u| u.dimension)).unwrap_or(Dimension::Plain);
            if let Some(u) = unit
                && !u.fits(dim)
            {
                out.truncate(start);
                self.parse_error(
                    source,
                    format!("line telemetry: {}: unit {} is not a {}", f.key, f.unit.unwrap_or(""), dim.name()),
                );
                return;
            }
            let channel = match self.line_keys.get(f.key) {
                Some(c) => *c,
                None => match self.channels.try_intern(f.key, dim) {
                    Ok(c) => {
                        self.channels.expect_period(c, self.lines_period_ns);
                        self.line_keys.insert(f.key.to_string(), c);
                        c
                    }
                    Err(e) => {
                        out.truncate(start);
                        self.parse_error(source, format!("line telemetry: {e}"));
                        return;
                    }
                },
            };
            let value = unit.map_or(f.value, |u| u.to_si(f.value));
            out.push(Sample { t_ns, channel, value, valid: value.is_finite() });
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::event::{CanFrame, CanId, DataFrame};

    fn line(t_ns: TimeNs, body: &str) -> Event {
        let text = format!("{body} #{:02X}", lines::crc8(body.as_bytes()));
        Event::new(t_ns, SourceId(2), Payload::Line(text.into_bytes()))
    }

    // Issue 13, item 9: 1e308 m/s was stored (and shown as inf km/h), and
    // 1e305 kWh became inf J in the store, while nothing was counted.
    #[test]
    fn values_not_finite_or_too_large_in_si_are_rejected_and_counted() {
        let signals = crate::config::ConfigSet::embedded().signals;
        let mut d = Decoder::new(&signals);
        let mut out = Vec::new();
        d.decode(&line(1, "vehicle.speed=1e308 battery.soc=0.5"), SourceKind::Lines, &mut out);
        d.decode(&line(2, "battery.energy[kWh]=1e305"), SourceKind::Lines, &mut out);
        d.decode(&line(3, "battery.energy[kWh]=1e23"), SourceKind::Lines, &mut out);
        assert_eq!(out.len(), 2, "{out:?}");
        assert_eq!(out[0].channel, ch::BATTERY_SOC);
        assert_eq!(out[1].value, 1e23 * 3.6e6, "a large value that fits is kept");
        assert_eq!((d.rejected_values, d.parse_errors()), (2, 0));
        assert!(admissible(MAX_MAGNITUDE) && admissible(-1.8e19) && !admissible(f64::INFINITY));
    }

    // Issue 13, item 9: a 64-bit signal scaled by 1e300 decoded to inf with
    // `out_of_range: 0, rejected_values: 0`.
    #[test]
    fn a_can_signal_that_scales_past_the_limit_is_rejected_and_counted() {
        use crate::config::signals::{ByteOrder, Message, Signal};
        let mut signals = crate::config::ConfigSet::embedded().signals;
        let signal = Signal {
            name: "big".into(),
            channel: "x.big".into(),
            start_bit: 0,
            bit_length: 64,
            byte_order: ByteOrder::Little,
            signed: false,
            scale: 1e300,
            offset: 0.0,
            unit_name: String::new(),
            unit: parse_unit("").unwrap(),
            min: None,
            max: None,
        };
        let id = CanId::Standard(0x7F0);
        signals.messages =
            vec![Message { id, name: "m".into(), period_ns: 10_000_000, length: 8, fd: false, signals: vec![signal] }];
        let mut d = Decoder::new(&signals);
        let mut out = Vec::new();
        for data in [[0xFF; 8], [0; 8]] {
            let frame = CanFrame::Data(DataFrame::new(id, &data).unwrap());
            d.decode(&Event::new(1, SourceId(2), Payload::Can(frame)), SourceKind::Can, &mut out);
        }
        assert_eq!(out.len(), 1, "the zero frame decodes, the other is rejected: {out:?}");
        assert_eq!(out[0].value, 0.0);
        assert_eq!(d.rejected_values, 1);
    }

    // Issue 13, item 7: line telemetry interned every new key, and the
    // 65 537th got the id of vehicle.speed and overwrote it.
    #[test]
    fn a_key_past_the_channel_limit_is_a_counted_error_not_a_reused_id() {
        let signals = crate::config::ConfigSet::embedded().signals;
        let mut d = Decoder::new(&signals);
        let mut out = Vec::new();
        let first = d.channels.len();
        let room = crate::channel::MAX_CHANNELS - first;
        for i in 0..room {
            d.decode(&line(1, &format!("k{i}=1")), SourceKind::Lines, &mut out);
        }
        assert_eq!((out.len(), d.parse_errors()), (room, 0));
        out.clear();
        d.decode(&line(2, "one.more=7 vehicle.speed=50"), SourceKind::Lines, &mut out);
        assert!(out.is_empty(), "the line is refused whole: {out:?}");
        let stats = d.source_stats(SourceId(2));
        assert_eq!(stats.parse_errors, 1);
        assert!(stats.last_error.unwrap().contains("the channel table is full (65536 channels)"));
        d.decode(&line(3, "vehicle.speed=50 k7=2"), SourceKind::Lines, &mut out);
        assert_eq!(
            out.iter().map(|s| (s.channel, s.value)).collect::<Vec<_>>(),
            vec![(ch::VEHICLE_SPEED, 50.0), (ChannelId(first as u16 + 7), 2.0)]
        );
    }
}
