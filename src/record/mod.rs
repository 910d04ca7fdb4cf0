//! Recordings: termvel's own append-only text format, one event a line.
//!
//! ```text
//! %termvel-recording 1
//! %created 2026-12-02T10:11:12Z
//! %source can0 can
//! %source gnss0 nmea
//! %config vehicle 57 config/vehicle.toml
//! %|kind = "vehicle"
//! %|...                                    (57 lines of the file, each after "%|")
//! %end-header
//! (1764670272.123456) can0 0C4#E02E000000000000       a CAN frame: candump -L syntax
//! [1764670272.130000] gnss0 line $GPRMC,...*70          a serial line, as received
//! [1764670272.500000] op mark boost on at the 2 km board
//! [1764670273.000000] op ack coolant hot
//! [1764670274.000000] gnss0 link down device vanished
//! [1764670274.100000] session tick
//! [1764670274.100000] session note raise caution boost-low …
//! ```
//!
//! CAN lines are exactly `candump -L` lines (with nine fraction digits when a
//! time is not whole microseconds), so `grep '^('` turns a recording into a
//! log that can-utils and python-can read. Other events use `[time]`. Text
//! payloads escape control bytes and backslash as `\xNN`; bytes that are not
//! UTF-8 are escaped too, so any serial garbage survives the trip. Source
//! names (1 to [`MAX_NAME`] bytes) escape spaces as well, so a name is always
//! one word. A `%source` line may also appear in the body when a source
//! first shows up.
//!
//! An embedded config line is written as it is after `%|`, or escaped after
//! `%\` when it holds a control character; a line longer than
//! [`CONFIG_CHUNK_CHARS`] characters continues on `%+` lines, so no line of
//! the file is longer than the reader accepts. `%config KIND N- ORIGIN` (a
//! dash after the count) says the text's last line has no line end.
//!
//! The property the tests hold: whatever the writer accepts reads back
//! identically. The reader also takes a plain candump log (no header), and
//! CRLF line ends.

pub mod config_choice;
pub mod files;
pub mod reader;
pub mod time_order;
pub mod writer;

pub use config_choice::ConfigChoiceError;
pub use files::{create_recording, default_record_dir};
pub use reader::{BodyError, LineError, ReadStats, ReaderPosition, RecordingError, RecordingReader, SourceDeclError};
pub use time_order::{TimeOrderStats, TimeStep};
pub use writer::RecordingWriter;

use crate::config::ConfigText;
use crate::event::SourceTable;

/// How a followed run's recording (`termvel follow --record-dir`) begins
/// its session notes about what it did not receive: event batches lost
/// between two times, a late start. The report lists them.
pub const SHARE_NOTE_PREFIX: &str = "share: ";

/// The first line of every recording, before the version number.
pub const MAGIC: &str = "%termvel-recording";
/// Format version written by this build.
pub const VERSION: u32 = 1;
/// Longest line the reader accepts; longer lines are corrupt and skipped.
/// The writer never writes a longer one: names are short, config lines are
/// cut into chunks, and text payloads are at most [`MAX_TEXT`] bytes (four
/// bytes each when every one is escaped).
pub const MAX_LINE: usize = 64 * 1024;
/// Longest text payload (a serial line, a mark, a note), bytes; the serial
/// sources cut lines at 4 KiB. A longer text is cut by the writer and says so.
pub const MAX_TEXT: usize = (MAX_LINE - 1024) / 4;
/// Longest source name, bytes (interface names are at most 15).
pub const MAX_NAME: usize = 64;
/// Characters of an embedded config line per recording line.
pub const CONFIG_CHUNK_CHARS: usize = 1024;
/// File extension of recordings.
pub const EXTENSION: &str = "tvrec";

/// What a recording's header holds.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Header {
    pub version: u32,
    /// Wall-clock creation time, for people; nothing depends on it.
    pub created: Option<String>,
    pub sources: SourceTable,
    /// The configuration in use when recording, embedded verbatim.
    pub configs: Vec<ConfigText>,
    /// False for a plain candump log.
    pub is_termvel: bool,
}

/// Escapes a text payload for one recording line.
pub fn escape_into(out: &mut Vec<u8>, bytes: &[u8]) {
    let utf8 = std::str::from_utf8(bytes).is_ok();
    for &b in bytes {
        let plain = b == b' ' || (b.is_ascii_graphic() && b != b'\\') || (utf8 && b >= 0x80);
        if plain {
            out.push(b);
        } else {
            const D: &[u8; 16] = b"0123456789abcdef";
            out.extend_from_slice(&[b'\\', b'x', D[(b >> 4) as usize], D[(b & 15) as usize]]);
        }
    }
}

/// Escapes a source name: as [`escape_into`], and spaces too, so the name
/// is one word on every line.
pub fn escape_name_into(out: &mut Vec<u8>, name: &str) {
    for part in name.split(' ').enumerate() {
        if part.0 > 0 {
            out.extend_from_slice(b"\\x20");
        }
        escape_into(out, part.1.as_bytes());
    }
}

/// A source name as written in a recording (see [`escape_name_into`]).
pub fn escaped_name(name: &str) -> String {
    let mut out = Vec::with_capacity(name.len());
    escape_name_into(&mut out, name);
    String::from_utf8(out).expect("escaping keeps UTF-8")
}

/// Reverses [`escape_name_into`]: `None` for a malformed escape or a name
/// that is not UTF-8.
pub fn unescape_name(s: &[u8]) -> Option<String> {
    if !s.contains(&b'\\') {
        return std::str::from_utf8(s).ok().map(str::to_string);
    }
    String::from_utf8(unescape(s)?).ok()
}

/// Reverses [`escape_into`]. `None` for a malformed escape.
pub fn unescape(s: &[u8]) -> Option<Vec<u8>> {
    let mut out = Vec::with_capacity(s.len());
    let mut i = 0;
    while i < s.len() {
        if s[i] == b'\\' {
            if s.get(i + 1) != Some(&b'x') {
                return None;
            }
            let h = s.get(i + 2..i + 4)?;
            if !h.iter().all(u8::is_ascii_hexdigit) {
                return None;
            }
            out.push(u8::from_str_radix(std::str::from_utf8(h).ok()?, 16).ok()?);
            i += 4;
        } else {
            out.push(s[i]);
            i += 1;
        }
    }
    Some(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_round_trips_any_bytes() {
        let cases: [&[u8]; 5] =
            [b"plain text", b"tab\there", b"back\\slash", &[0, 1, 0xFF, 0xFE, b'\r'], "°C ok".as_bytes()];
        for c in cases {
            let mut out = Vec::new();
            escape_into(&mut out, c);
            assert!(!out.contains(&b'\n') && !out.contains(&b'\r'));
            assert_eq!(unescape(&out).as_deref(), Some(c));
        }
        let mut out = Vec::new();
        escape_into(&mut out, "°C".as_bytes());
        assert_eq!(out, "°C".as_bytes(), "valid UTF-8 stays readable");
        assert_eq!(unescape(b"bad \\x4"), None);
        assert_eq!(unescape(b"bad \\q41"), None);
    }
}
