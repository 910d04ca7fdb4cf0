//! The decoding entry point, `Decoder::decode(event, kind, &mut samples)`,
//! with the embedded demo signal map: a sequence of events, each a serial
//! line (`Payload::Line`) or a CAN frame (`Payload::Can`) from a source of
//! any `SourceKind`. Lines may get a correct NMEA or line-telemetry checksum
//! appended so that mutations reach the sentence and field decoders.
//! Checks: no panic; samples are only appended; every sample names a known
//! channel, and a sample marked valid has a finite value; a line counts a
//! parse error exactly when its protocol's parser refuses it (NMEA, slcan
//! on a CAN source) or, for line telemetry, when the parser refuses it or
//! a unit is unknown or of the wrong dimension.

#![no_main]

mod common;

use std::sync::OnceLock;

use libfuzzer_sys::fuzz_target;
use termvel::config::ConfigSet;
use termvel::decode::{Decoder, lines, nmea, slcan};
use termvel::event::{CanId, Event, Payload, SourceId, SourceKind};

struct Fixture {
    decoder: Decoder,
    ids: Vec<CanId>,
}

fn fixture() -> &'static Fixture {
    static F: OnceLock<Fixture> = OnceLock::new();
    F.get_or_init(|| {
        let signals = ConfigSet::embedded().signals;
        let ids = signals.messages.iter().map(|m| m.id).collect();
        Fixture { decoder: Decoder::new(&signals), ids }
    })
}

const KINDS: [SourceKind; 5] =
    [SourceKind::Can, SourceKind::Nmea, SourceKind::Lines, SourceKind::Operator, SourceKind::Session];

fuzz_target!(|data: &[u8]| {
    let fx = fixture();
    let mut dec = fx.decoder.clone();
    let mut cur = common::Cursor::new(data);
    let mut out = Vec::new();
    let mut t_ns = 0i64;
    while !cur.is_empty() {
        let sel = cur.u8();
        let kind = KINDS[(sel % 5) as usize];
        let source = SourceId(u16::from(sel >> 6));
        t_ns += i64::from(cur.u8());
        let payload = if sel & 0x20 == 0 {
            let len = cur.u8() as usize;
            let mut line = cur.take(len).to_vec();
            if sel & 0x08 != 0 {
                // Append a correct checksum for the kind's protocol.
                match kind {
                    SourceKind::Nmea if line.first() == Some(&b'$') => {
                        let c = nmea::checksum(&line[1..]);
                        line.extend_from_slice(format!("*{c:02X}").as_bytes());
                    }
                    SourceKind::Lines => {
                        let c = lines::crc8(&line);
                        line.extend_from_slice(format!(" #{c:02X}").as_bytes());
                    }
                    _ => {}
                }
            }
            Payload::Line(line)
        } else {
            Payload::Can(cur.frame(&fx.ids))
        };
        let ev = Event::new(t_ns, source, payload);

        let errors_before = dec.source_stats(source).parse_errors;
        let start = out.len();
        dec.decode(&ev, kind, &mut out);
        let errors = dec.source_stats(source).parse_errors - errors_before;
        assert!(out.len() >= start);
        for s in &out[start..] {
            assert_eq!(s.t_ns, t_ns);
            assert!((s.channel.0 as usize) < dec.channels.len(), "unknown channel {:?}", s.channel);
            assert!(!s.valid || s.value.is_finite(), "{s:?}");
        }

        if let Payload::Line(line) = &ev.payload {
            let refused = match kind {
                SourceKind::Nmea => nmea::parse_sentence(line).is_err(),
                SourceKind::Can => slcan::parse(line).is_err(),
                SourceKind::Lines => {
                    let mut fields = Vec::new();
                    let refused = lines::parse(line, &mut fields).is_err();
                    assert!(refused || errors == 1 || out.len() - start == fields.len());
                    if errors == 0 {
                        assert!(!refused);
                    }
                    refused
                }
                SourceKind::Operator | SourceKind::Session => false,
            };
            if kind == SourceKind::Lines {
                assert!(errors <= 1);
                if refused {
                    assert_eq!(errors, 1);
                    assert_eq!(out.len(), start, "no samples from a refused line");
                } else if errors == 1 {
                    assert_eq!(out.len(), start, "no samples from a line with a bad unit");
                }
            } else {
                assert_eq!(errors, u64::from(refused), "parse errors for {kind:?} line {line:?}");
            }
        } else {
            assert_eq!(errors, 0, "a CAN frame is not a parse error");
        }
    }
    assert!(dec.parse_errors() <= data.len() as u64);
});
