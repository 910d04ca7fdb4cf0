//! A serial port as a source, speaking one of three line protocols: NMEA 0183
//! from a GNSS receiver, the ASCII serial-line CAN protocol of common USB-CAN
//! adapters (the one Linux's slcan driver implements), or termvel's own
//! `key=value` line telemetry. The source reads, splits lines and stamps
//! them on arrival; the decode layer says once what each line is
//! ([`decode::serial_line::payload_of`]): an adapter frame becomes a CAN event, an
//! adapter line that does not parse a bad line carrying its error (the
//! decoder counts it, the recording keeps it as a line). A port that
//! vanishes (end of file, an I/O error: a USB device unplugged) is reported
//! down at once and reopened with back-off when it returns.

use std::str::FromStr;

use tokio::io::{AsyncReadExt, AsyncWriteExt};

use super::link::{Backoff, EventSender, Link, SessionClock, Shutdown};
use crate::decode::{self, slcan};
use crate::event::{Event, LinkState, SourceId, SourceKind};

/// The protocol a serial port speaks.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Proto {
    Nmea,
    Slcan,
    Lines,
}

impl Proto {
    pub fn source_kind(self) -> SourceKind {
        match self {
            Proto::Nmea => SourceKind::Nmea,
            Proto::Slcan => SourceKind::Can,
            Proto::Lines => SourceKind::Lines,
        }
    }
    /// The word for the protocol in a spec (`proto=…`).
    pub fn word(self) -> &'static str {
        match self {
            Proto::Nmea => "nmea",
            Proto::Slcan => "slcan",
            Proto::Lines => "lines",
        }
    }

    fn default_name(self) -> &'static str {
        match self {
            Proto::Nmea => "gnss",
            Proto::Slcan => "slcan",
            Proto::Lines => "lines",
        }
    }
}

/// Baud rates a serial input may ask for: from the slowest rate a UART
/// offers to the fastest USB serial adapters.
pub const BAUD_RANGE: std::ops::RangeInclusive<u32> = 50..=12_000_000;

/// One serial input: `PATH[,baud=N][,proto=nmea|slcan|lines][,bitrate=N][,name=NAME]`.
#[derive(Clone, Debug, PartialEq)]
pub struct SerialSpec {
    pub path: String,
    pub baud: u32,
    pub proto: Proto,
    /// CAN bit rate the adapter opens its channel at (slcan).
    pub can_bitrate: u32,
    pub name: Option<String>,
}

impl SerialSpec {
    /// The source name: given, or the protocol's word and an index.
    pub fn source_name(&self, index: usize) -> String {
        self.name.clone().unwrap_or_else(|| format!("{}{index}", self.proto.default_name()))
    }
}

impl FromStr for SerialSpec {
    type Err = String;

    fn from_str(s: &str) -> Result<SerialSpec, String> {
        let mut parts = s.split(',');
        let path = parts
            .next()
            .filter(|p| !p.is_empty())
            .ok_or("expected a device path first, e.g. /dev/ttyUSB0")?
            .to_string();
        let mut spec = SerialSpec { path, baud: 115_200, proto: Proto::Nmea, can_bitrate: 500_000, name: None };
        // Each option once: a second value would silently win.
        let mut given: Vec<&str> = Vec::new();
        for p in parts {
            let (k, v) =
                p.split_once('=').ok_or_else(|| format!("expected key=value after the path, found \"{p}\""))?;
            if given.contains(&k) {
                return Err(format!("{k}: given twice; give each option once"));
            }
            match k {
                "baud" => {
                    let baud: u32 = v.parse().map_err(|_| format!("baud: expected a number, found \"{v}\""))?;
                    if !BAUD_RANGE.contains(&baud) {
                        return Err(format!(
                            "baud: expected a rate from {} to {} baud, found {baud}",
                            BAUD_RANGE.start(),
                            BAUD_RANGE.end()
                        ));
                    }
                    spec.baud = baud;
                }
                "bitrate" => {
                    spec.can_bitrate = v.parse().map_err(|_| format!("bitrate: expected a number, found \"{v}\""))?
                }
                "proto" => {
                    spec.proto = match v {
                        "nmea" => Proto::Nmea,
                        "slcan" => Proto::Slcan,
                        "lines" => Proto::Lines,
                        _ => return Err(format!("proto: expected nmea, slcan or lines, found \"{v}\"")),
                    }
                }
                "name" if !v.is_empty() && v.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'_' || b == b'-') => {
                    spec.name = Some(v.into())
                }
                "name" => return Err(format!("name: expected letters, digits, '_' or '-', found \"{v}\"")),
                _ => return Err(format!("expected baud, proto, bitrate or name, found \"{k}\"")),
            }
            given.push(k);
        }
        if given.contains(&"bitrate") && spec.proto != Proto::Slcan {
            return Err(format!(
                "bitrate: sets a serial CAN adapter's bus rate, so it needs proto=slcan; this input is proto={}",
                spec.proto.word()
            ));
        }
        if spec.proto == Proto::Slcan {
            slcan::open_commands(spec.can_bitrate).map_err(|e| format!("bitrate: {e}"))?;
        }
        Ok(spec)
    }
}

/// Longest line kept whole; longer runs without a line end are cut here
/// (and the decoder will reject them), so garbage cannot exhaust memory.
pub const MAX_LINE: usize = 4096;

/// Splits a byte stream into lines: NMEA and line telemetry end lines with
/// LF (a CR before it is dropped, an empty line is nothing); an adapter ends
/// its messages with CR, or sends a bare BEL for a refusal, and a bare CR
/// is its acknowledgement, so an adapter's empty message is a line too.
#[derive(Debug)]
pub struct LineSplitter {
    proto: Proto,
    buf: Vec<u8>,
}

impl LineSplitter {
    pub fn new(proto: Proto) -> LineSplitter {
        LineSplitter { proto, buf: Vec::with_capacity(512) }
    }

    /// Feeds bytes; calls `line` for each complete line.
    pub fn feed(&mut self, bytes: &[u8], mut line: impl FnMut(&[u8])) {
        for &b in bytes {
            let end = match self.proto {
                Proto::Slcan => b == b'\r' || b == 0x07,
                _ => b == b'\n',
            };
            if end {
                if self.proto == Proto::Slcan && b == 0x07 {
                    self.buf.push(b);
                }
                let mut l: &[u8] = &self.buf;
                if self.proto != Proto::Slcan {
                    l = l.strip_suffix(b"\r").unwrap_or(l);
                }
                if !l.is_empty() || self.proto == Proto::Slcan {
                    line(l);
                }
                self.buf.clear();
            } else if self.buf.len() < MAX_LINE {
                self.buf.push(b);
            } else {
                line(&self.buf);
                self.buf.clear();
                self.buf.push(b);
            }
        }
    }
}

/// Stamps one line as the event it stands for; what it is (a frame, a
/// reply, a bad line with its error, a sentence) is the decode layer's
/// call, made once here. Every line is an event: nothing read is dropped.
pub fn event_of(proto: Proto, t_ns: i64, source: SourceId, line: &[u8]) -> Event {
    Event::new(t_ns, source, decode::serial_line::payload_of(proto.source_kind(), line))
}

/// Reads `spec.path` until shutdown.
pub async fn run(spec: SerialSpec, source: SourceId, clock: SessionClock, tx: EventSender, mut stop: Shutdown) {
    let mut link = Link::new(source, clock, tx);
    let mut backoff = Backoff::default();
    let mut buf = vec![0u8; 16 * 1024];
    let mut events = Vec::new();
    loop {
        if *stop.borrow() {
            return;
        }
        let mut port = match tokio_serial::SerialStream::open(&tokio_serial::new(&spec.path, spec.baud)) {
            Ok(p) => p,
            Err(e) => {
                let why = if e.to_string().contains("exclusive lock") {
                    format!("{}: device busy (another program holds it)", spec.path)
                } else {
                    format!("cannot open {}: {e}", spec.path)
                };
                if link.wait_to_retry(LinkState::Retrying, why, &mut backoff, &mut stop).await {
                    return;
                }
                continue;
            }
        };
        if spec.proto == Proto::Slcan {
            // Close first (an adapter left open by an earlier session refuses
            // a bit rate change), then set the bit rate and open.
            let cmds = slcan::open_commands(spec.can_bitrate).unwrap_or_default();
            if let Err(e) = AsyncWriteExt::write_all(&mut port, &cmds).await {
                let why = format!("{}: cannot open the CAN channel: {e}", spec.path);
                if link.wait_to_retry(LinkState::Retrying, why, &mut backoff, &mut stop).await {
                    return;
                }
                continue;
            }
        }
        backoff.reset();
        if !link.set(LinkState::Up, format!("{} open at {} baud", spec.path, spec.baud)).await {
            return;
        }
        let mut split = LineSplitter::new(spec.proto);
        let reason = loop {
            let r = tokio::select! {
                r = port.read(&mut buf) => r,
                _ = stop.changed() => {
                    if spec.proto == Proto::Slcan {
                        // Leave the adapter's channel closed, as found.
                        let _ = AsyncWriteExt::write_all(&mut port, slcan::close_command()).await;
                    }
                    return;
                }
            };
            match r {
                Ok(0) => break format!("{}: the device went away (end of file)", spec.path),
                Ok(n) => {
                    // One stamp for what one read returned: it had all
                    // arrived by now.
                    let t = link.clock.now_ns();
                    split.feed(&buf[..n], |l| events.push(event_of(spec.proto, t, source, l)));
                    if !link.send_all(&mut events).await {
                        return;
                    }
                }
                Err(e) => break format!("{}: {e}", spec.path),
            }
        };
        drop(port);
        if link.wait_to_retry(LinkState::Down, reason, &mut backoff, &mut stop).await {
            return;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::event::Payload;

    #[test]
    fn specs_parse_with_their_defaults() {
        let s: SerialSpec = "/dev/ttyUSB0".parse().unwrap();
        assert_eq!((s.baud, s.proto, s.source_name(0)), (115_200, Proto::Nmea, "gnss0".to_string()));
        let s: SerialSpec = "/dev/ttyACM1,baud=921600,proto=slcan,bitrate=1000000,name=pt".parse().unwrap();
        assert_eq!(
            (s.baud, s.proto, s.can_bitrate, s.source_name(3)),
            (921_600, Proto::Slcan, 1_000_000, "pt".to_string())
        );
        assert!("/dev/x,proto=modbus".parse::<SerialSpec>().unwrap_err().contains("nmea, slcan or lines"));
        assert!("/dev/x,proto=slcan,bitrate=33333".parse::<SerialSpec>().unwrap_err().contains("bitrate"));
        assert!(",baud=1".parse::<SerialSpec>().is_err());
        assert!("/dev/x,speed=1".parse::<SerialSpec>().unwrap_err().contains("found \"speed\""));
    }

    // Issue 13, item 17: `baud=0` ran at "0 baud", an option given twice
    // silently took the last value, and `bitrate=` was accepted (and
    // ignored) on an NMEA port.
    #[test]
    fn specs_refuse_what_cannot_work_and_say_which_option() {
        let e = |s: &str| s.parse::<SerialSpec>().unwrap_err();
        assert_eq!(e("/dev/x,baud=0"), "baud: expected a rate from 50 to 12000000 baud, found 0");
        assert_eq!(e("/dev/x,baud=9600,baud=115200"), "baud: given twice; give each option once");
        assert_eq!(e("/dev/x,proto=slcan,proto=nmea"), "proto: given twice; give each option once");
        assert_eq!(e("/dev/x,name=a,name=b"), "name: given twice; give each option once");
        assert_eq!(
            e("/dev/x,bitrate=500000,proto=nmea"),
            "bitrate: sets a serial CAN adapter's bus rate, so it needs proto=slcan; this input is proto=nmea"
        );
        assert!(e("/dev/x,bitrate=500000").contains("proto=nmea"), "NMEA is the default protocol");
        assert_eq!("/dev/x,baud=50".parse::<SerialSpec>().map(|s| s.baud), Ok(50));
        assert!("/dev/x,bitrate=250000,proto=slcan".parse::<SerialSpec>().is_ok(), "in any order");
    }

    #[test]
    fn lines_split_per_protocol() {
        let mut got: Vec<Vec<u8>> = Vec::new();
        let mut s = LineSplitter::new(Proto::Nmea);
        s.feed(b"$GPRMC,1*00\r\n$GPGGA", |l| got.push(l.to_vec()));
        s.feed(b",2*00\r\n\n", |l| got.push(l.to_vec()));
        assert_eq!(got, vec![b"$GPRMC,1*00".to_vec(), b"$GPGGA,2*00".to_vec()]);
        let mut got: Vec<Vec<u8>> = Vec::new();
        let mut s = LineSplitter::new(Proto::Slcan);
        s.feed(b"t1232AABB\r\x07t12300\r", |l| got.push(l.to_vec()));
        assert_eq!(got, vec![b"t1232AABB".to_vec(), vec![0x07], b"t12300".to_vec()]);
        // Issue 13, item 5: an adapter's acknowledgement (a bare CR) was
        // dropped as an empty line.
        got.clear();
        s.feed(b"\r\rV1013\r", |l| got.push(l.to_vec()));
        assert_eq!(got, vec![b"".to_vec(), b"".to_vec(), b"V1013".to_vec()]);
        // A run without line ends is cut at MAX_LINE.
        let mut n = 0;
        let mut s = LineSplitter::new(Proto::Lines);
        s.feed(&vec![b'x'; MAX_LINE * 3 + 5], |l| {
            assert!(l.len() <= MAX_LINE);
            n += 1;
        });
        assert_eq!(n, 3);
    }

    #[test]
    fn adapter_lines_become_frames_or_bad_lines_decoded_once() {
        let src = SourceId(2);
        assert!(matches!(event_of(Proto::Slcan, 1, src, b"t1232AABB").payload, Payload::Can(_)));
        assert_eq!(event_of(Proto::Slcan, 1, src, b"").payload, Payload::Line(vec![]), "an acknowledgement is kept");
        let bad = event_of(Proto::Slcan, 7, src, b"t12");
        assert_eq!((bad.t_ns, bad.source), (7, src));
        let Payload::BadLine { line, error } = &bad.payload else { panic!("a bad line is kept: {bad:?}") };
        assert_eq!(
            (line.as_slice(), error.as_str()),
            (&b"t12"[..], "CAN adapter: column 4: expected 3 hex digits of a standard id")
        );
        assert!(matches!(event_of(Proto::Nmea, 1, src, b"$GP").payload, Payload::Line(_)));

        // The decoder takes the error it carries, and records it as the
        // line it was; a replay of that line finds the same error.
        let signals = crate::config::ConfigSet::embedded().signals;
        let mut live = decode::Decoder::new(&signals);
        let mut out = Vec::new();
        live.decode(&bad, SourceKind::Can, &mut out);
        assert!(out.is_empty());
        let stats = live.source_stats(src);
        assert_eq!((stats.parse_errors, stats.last_error.as_deref()), (1, Some(error.as_str())));
        let mut recorded = Vec::new();
        crate::record::writer::format_event(&mut recorded, &bad, "slcan0");
        assert!(recorded.ends_with(b" slcan0 line t12\n"), "{}", String::from_utf8_lossy(&recorded));
        let mut replay = decode::Decoder::new(&signals);
        replay.decode(&Event::new(7, src, Payload::Line(line.clone())), SourceKind::Can, &mut out);
        assert_eq!(replay.source_stats(src), stats);
    }
}
