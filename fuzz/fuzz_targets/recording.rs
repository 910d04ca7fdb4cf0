//! The recording reader on arbitrary bytes: `RecordingReader::new`, then
//! `next_event` until `None`. It takes termvel recordings (header, CAN
//! lines, `[time]` event lines, escapes) and plain candump logs. Every event
//! is also decoded as a replay would (`Decoder::decode` with the source's
//! kind and the embedded signal map). Checks: no panic; the statistics add
//! up (events, kept errors); and the events read, written again with
//! `RecordingWriter`, read back with no malformed line as the same events
//! (exactly, unless the times needed repair: see the end).
//! Plus `escape_into`/`unescape` round-trip the first 512 input bytes.

#![no_main]

use std::sync::OnceLock;

use libfuzzer_sys::fuzz_target;
use termvel::config::ConfigSet;
use termvel::decode::Decoder;
use termvel::event::SourceKind;
use termvel::record::{Header, ReadStats, RecordingReader, RecordingWriter, escape_into, unescape};

fn decoder() -> &'static Decoder {
    static D: OnceLock<Decoder> = OnceLock::new();
    D.get_or_init(|| Decoder::new(&ConfigSet::embedded().signals))
}

fuzz_target!(|data: &[u8]| {
    // Escaping round-trips any bytes (the first few hundred are enough).
    let head = &data[..data.len().min(512)];
    let mut escaped = Vec::new();
    escape_into(&mut escaped, head);
    assert!(!escaped.contains(&b'\n') && !escaped.contains(&b'\r'));
    assert_eq!(unescape(&escaped).as_deref(), Some(head));

    let Ok(mut reader) = RecordingReader::new(data, "fuzz") else { return };
    let mut dec = decoder().clone();
    let mut samples = Vec::new();
    let mut events = Vec::new();
    while let Some(ev) = reader.next_event() {
        let kind = reader.header.sources.get(ev.source).map_or(SourceKind::Session, |s| s.kind);
        samples.clear();
        dec.decode(&ev, kind, &mut samples);
        events.push(ev);
    }
    assert!(reader.next_event().is_none(), "the stream stays ended");
    let stats = &reader.stats;
    assert_eq!(stats.events, events.len() as u64);
    assert!(stats.errors.len() as u64 == stats.malformed.min(ReadStats::KEPT_ERRORS as u64));
    assert!(stats.events + stats.malformed <= stats.lines);

    // Write what was read as a recording and read it again.
    let header = Header { sources: reader.header.sources.clone(), ..reader.header.clone() };
    let mut file = Vec::new();
    {
        let mut w = RecordingWriter::new(&mut file, &header).expect("writing to memory");
        for ev in &events {
            w.write_event(ev, &header.sources).expect("writing to memory");
        }
    }
    let mut again = RecordingReader::new(&file[..], "rewritten")
        .unwrap_or_else(|e| panic!("the rewritten recording is unreadable: {e}\n{}", String::from_utf8_lossy(&file)));
    let mut back = Vec::new();
    while let Some(ev) = again.next_event() {
        back.push(ev);
    }
    assert_eq!(again.stats.malformed, 0, "{:?}\n{}", again.stats.errors, String::from_utf8_lossy(&file));
    // Every event comes back: the same count, sources and payloads.
    assert_eq!(back.len(), events.len());
    let content = |v: &[termvel::event::Event]| {
        let mut c: Vec<String> = v.iter().map(|e| format!("{:?} {:?}", e.source, e.payload)).collect();
        c.sort_unstable();
        c
    };
    assert_eq!(content(&back), content(&events), "rewritten:\n{}", String::from_utf8_lossy(&file));
    // Exactly, times and order included, unless reading the copy had to
    // repair its times again: the time-order stage is a repair of damaged
    // clocks, and on a stream it already repaired (jumps re-timed, far
    // reversals left in file order) its windows can fall differently. When
    // the copy reads clean, or the original needed no repair, it is exact.
    if again.stats.time.is_clean() || stats.time.is_clean() {
        assert_eq!(back, events, "rewritten:\n{}", String::from_utf8_lossy(&file));
    }
});
