//! Writing recordings: append-only, flushed at least every 100 ms of stream
//! time and on every operator mark.
//!
//! The writer formats into a reused buffer and hands whole lines to the
//! underlying writer, so a crash can only tear the last line. The owner
//! (the pipeline) also calls [`RecordingWriter::flush`] on a wall-clock timer
//! so a quiet stream is flushed too.
//!
//! Whatever the writer accepts reads back identically (a property test
//! below): names and texts are escaped, long config lines are cut into
//! chunks, and no line is longer than the reader's limit. A source name it
//! cannot write (empty, or longer than [`MAX_NAME`]) is refused with
//! `InvalidInput`; a text longer than [`MAX_TEXT`] is cut and says so.

use std::io::{self, Write};

use super::{CONFIG_CHUNK_CHARS, Header, MAGIC, MAX_NAME, MAX_TEXT, VERSION, escape_into};
use crate::config::ConfigText;
use crate::decode::candump;
use crate::event::{Event, NS_PER_S, Payload, SourceTable, TimeNs};

/// Stream time between flushes, ns.
pub const FLUSH_INTERVAL_NS: TimeNs = NS_PER_S / 10;

/// Appends events to a recording.
pub struct RecordingWriter<W: Write> {
    out: W,
    line: Vec<u8>,
    pending: Vec<u8>,
    /// Sources already declared in the file, by id: the name as written.
    declared: Vec<Option<String>>,
    last_flush_ns: Option<TimeNs>,
    events: u64,
    /// Events whose lines are in `pending` (not yet known to be on disk).
    pending_events: u64,
    /// Bytes known to be in the file as whole lines: the header and every
    /// flush that completed. A failed flush may have left part of
    /// `pending` after them; the owner truncates back to this length before
    /// the next attempt writes `pending` again, so no line is torn or
    /// written twice.
    committed_bytes: u64,
}

impl<W: Write> RecordingWriter<W> {
    /// Writes the header (format version, creation time, sources, configs).
    pub fn new(mut out: W, header: &Header) -> io::Result<RecordingWriter<W>> {
        let mut h = Vec::new();
        writeln!(h, "{MAGIC} {VERSION}")?;
        if let Some(c) = &header.created {
            writeln!(h, "%created {c}")?;
        }
        writeln!(h, "%program termvel {}", env!("CARGO_PKG_VERSION"))?;
        let mut declared = Vec::new();
        for (id, s) in header.sources.iter() {
            let name = writable_name(&s.name)?;
            writeln!(h, "%source {name} {}", s.kind.as_str())?;
            declared.resize(id.0 as usize + 1, None);
            declared[id.0 as usize] = Some(name);
        }
        for c in &header.configs {
            write_config(&mut h, c);
        }
        writeln!(h, "%end-header")?;
        out.write_all(&h)?;
        out.flush()?;
        Ok(RecordingWriter {
            out,
            line: Vec::with_capacity(256),
            pending: Vec::with_capacity(64 * 1024),
            declared,
            last_flush_ns: None,
            events: 0,
            pending_events: 0,
            committed_bytes: h.len() as u64,
        })
    }

    /// Events accepted so far (on disk, or pending: see
    /// [`RecordingWriter::pending_events`]).
    pub fn events(&self) -> u64 {
        self.events
    }

    /// Events accepted but not yet flushed to the file whole.
    pub fn pending_events(&self) -> u64 {
        self.pending_events
    }

    /// Length of the file's whole lines known to be written (see the field).
    pub fn committed_bytes(&self) -> u64 {
        self.committed_bytes
    }

    /// Forgets the pending lines (the owner gave up on writing them and
    /// counts them as lost), so dropping the writer does not try again;
    /// how many events they held.
    pub fn discard_pending(&mut self) -> u64 {
        self.pending.clear();
        std::mem::take(&mut self.pending_events)
    }

    /// The underlying writer (to truncate a file back to its whole lines
    /// after a failed flush).
    pub fn get_mut(&mut self) -> &mut W {
        &mut self.out
    }

    /// Appends one event. Flushes when a mark arrives or 100 ms of stream
    /// time have passed since the last flush.
    pub fn write_event(&mut self, ev: &Event, sources: &SourceTable) -> io::Result<()> {
        self.line.clear();
        let idx = ev.source.0 as usize;
        if self.declared.get(idx).is_none_or(Option::is_none) {
            // Every source up to this one, in id order, so a reader numbers
            // them as the session did.
            if self.declared.len() <= idx {
                self.declared.resize(idx + 1, None);
            }
            for i in 0..=idx {
                if self.declared[i].is_some() {
                    continue;
                }
                let name = match sources.get(crate::event::SourceId(i as u16)) {
                    Some(info) => {
                        let name = writable_name(&info.name)?;
                        self.pending.extend_from_slice(format!("%source {name} {}\n", info.kind.as_str()).as_bytes());
                        name
                    }
                    None => "?".to_string(),
                };
                self.declared[i] = Some(name);
            }
        }
        let name = self.declared[idx].as_deref().expect("declared above");
        format_event_escaped(&mut self.line, ev, name);
        self.pending.extend_from_slice(&self.line);
        self.events += 1;
        self.pending_events += 1;
        let due = match self.last_flush_ns {
            None => true,
            Some(t) => ev.t_ns - t >= FLUSH_INTERVAL_NS || ev.t_ns < t,
        };
        if matches!(ev.payload, Payload::Mark(_)) || due || self.pending.len() > 60 * 1024 {
            self.flush_at(ev.t_ns)?;
        }
        Ok(())
    }

    fn flush_at(&mut self, t_ns: TimeNs) -> io::Result<()> {
        self.flush()?;
        self.last_flush_ns = Some(t_ns);
        Ok(())
    }

    /// Writes everything pending through to the file. On an error the
    /// pending lines are kept (a retry writes them all again, after the
    /// owner truncated the file to [`RecordingWriter::committed_bytes`]).
    pub fn flush(&mut self) -> io::Result<()> {
        if !self.pending.is_empty() {
            self.out.write_all(&self.pending)?;
            self.out.flush()?;
            self.committed_bytes += self.pending.len() as u64;
            self.pending.clear();
            self.pending_events = 0;
        }
        self.out.flush()
    }
}

impl<W: Write> Drop for RecordingWriter<W> {
    fn drop(&mut self) {
        let _ = self.flush();
    }
}

/// The name as written, or `InvalidInput` when the format cannot hold it.
fn writable_name(name: &str) -> io::Result<String> {
    if name.is_empty() || name.len() > MAX_NAME {
        return Err(io::Error::new(
            io::ErrorKind::InvalidInput,
            format!(
                "a source name must be 1 to {MAX_NAME} bytes, found {} bytes ({})",
                name.len(),
                crate::printable::clipped(name, 40)
            ),
        ));
    }
    Ok(super::escaped_name(name))
}

/// Appends one embedded config file: `%config KIND N[-] ORIGIN`, then each
/// line as it is (`%|`) or escaped (`%\`), long lines continued on `%+`.
pub fn write_config(h: &mut Vec<u8>, c: &ConfigText) {
    let text = c.text.strip_suffix('\n');
    let ends_in_newline = text.is_some() || c.text.is_empty();
    let text = text.unwrap_or(&c.text);
    let lines: Vec<&str> = if c.text.is_empty() { Vec::new() } else { text.split('\n').collect() };
    let mut origin = Vec::new();
    escape_into(&mut origin, c.origin.as_bytes());
    h.extend_from_slice(
        format!("%config {} {}{} ", c.kind.as_str(), lines.len(), if ends_in_newline { "" } else { "-" }).as_bytes(),
    );
    h.extend_from_slice(&origin);
    h.push(b'\n');
    for l in lines {
        let plain = !l.chars().any(|c| c.is_control() && c != '\t');
        let mut rest = l;
        let mut first = true;
        loop {
            let cut = rest.char_indices().nth(CONFIG_CHUNK_CHARS).map_or(rest.len(), |(i, _)| i);
            let (chunk, tail) = rest.split_at(cut);
            h.extend_from_slice(match (first, plain) {
                (true, true) => b"%|",
                (true, false) => b"%\\",
                (false, _) => b"%+",
            });
            if plain {
                h.extend_from_slice(chunk.as_bytes());
            } else {
                escape_into(h, chunk.as_bytes());
            }
            h.push(b'\n');
            first = false;
            rest = tail;
            if rest.is_empty() {
                break;
            }
        }
    }
}

/// Appends a text payload, cut at [`MAX_TEXT`] bytes (with a note of how
/// much) so its line fits the reader's limit.
fn text_into(out: &mut Vec<u8>, bytes: &[u8]) {
    if bytes.len() <= MAX_TEXT {
        escape_into(out, bytes);
        return;
    }
    let mut cut = MAX_TEXT;
    if let Ok(s) = std::str::from_utf8(bytes) {
        while !s.is_char_boundary(cut) {
            cut -= 1;
        }
    }
    escape_into(out, &bytes[..cut]);
    escape_into(out, format!(" … [cut by the recorder: {} more bytes]", bytes.len() - cut).as_bytes());
}

/// Formats one event as a recording line, newline included. `source_name`
/// is the name as it is, escaped here.
pub fn format_event(out: &mut Vec<u8>, ev: &Event, source_name: &str) {
    format_event_escaped(out, ev, &super::escaped_name(source_name))
}

/// [`format_event`] with the name already escaped.
fn format_event_escaped(out: &mut Vec<u8>, ev: &Event, source_name: &str) {
    if let Payload::Can(frame) = &ev.payload {
        candump::write_line(out, ev.t_ns, source_name, frame);
        return;
    }
    candump::write_time(out, ev.t_ns);
    let n = out.len();
    // `[time]` for everything that is not a CAN frame.
    out[n - 1] = b']';
    let open = out.iter().rposition(|b| *b == b'(').expect("write_time opens with (");
    out[open] = b'[';
    out.push(b' ');
    out.extend_from_slice(source_name.as_bytes());
    match &ev.payload {
        Payload::Can(_) => unreachable!("handled above"),
        // A bad line is recorded as the line it was: a replay finds its
        // error again.
        Payload::Line(bytes) | Payload::BadLine { line: bytes, .. } => {
            out.extend_from_slice(b" line ");
            text_into(out, bytes);
        }
        Payload::Mark(text) => {
            out.extend_from_slice(b" mark ");
            text_into(out, text.as_bytes());
        }
        Payload::Ack(key) => {
            out.extend_from_slice(b" ack ");
            text_into(out, key.as_bytes());
        }
        Payload::Link(state, reason) => {
            out.extend_from_slice(b" link ");
            out.extend_from_slice(state.as_str().as_bytes());
            out.push(b' ');
            text_into(out, reason.as_bytes());
        }
        Payload::Tick => out.extend_from_slice(b" tick"),
        Payload::Lost(n) => {
            out.extend_from_slice(b" lost ");
            out.extend_from_slice(n.to_string().as_bytes());
        }
        Payload::Note(text) => {
            out.extend_from_slice(b" note ");
            text_into(out, text.as_bytes());
        }
    }
    out.push(b'\n');
}

#[cfg(test)]
mod tests {
    use proptest::prelude::*;

    use super::*;
    use crate::config::ConfigKind;
    use crate::event::{CanFrame, CanId, DataFrame, LinkState, SourceId, SourceKind};
    use crate::record::{MAX_LINE, MAX_NAME, RecordingReader};

    fn text(max: usize) -> impl Strategy<Value = String> {
        prop::collection::vec(any::<char>(), 0..max).prop_map(String::from_iter)
    }

    /// A name the writer takes: 1 to 15 characters (at most 60 bytes).
    fn name() -> impl Strategy<Value = String> {
        prop::collection::vec(any::<char>(), 1..16).prop_map(String::from_iter)
    }

    /// Config text: lines of any characters and length (some far longer
    /// than a recording line), with or without a last line end.
    fn config_text() -> impl Strategy<Value = String> {
        (prop::collection::vec(prop_oneof![text(40), text(3000), "[ -~]{5000,9000}"], 0..5), any::<bool>()).prop_map(
            |(lines, end)| {
                let mut t = lines.join("\n");
                if end {
                    t.push('\n');
                }
                t
            },
        )
    }

    fn payload(can: bool) -> BoxedStrategy<Payload> {
        let texts = prop_oneof![
            prop::collection::vec(any::<u8>(), 0..600).prop_map(Payload::Line),
            text(300).prop_map(Payload::Mark),
            text(100).prop_map(Payload::Ack),
            text(300).prop_map(Payload::Note),
            (prop_oneof![Just(LinkState::Up), Just(LinkState::Down), Just(LinkState::Retrying)], text(100))
                .prop_map(|(s, r)| Payload::Link(s, r)),
            Just(Payload::Tick),
            any::<u64>().prop_map(Payload::Lost),
        ];
        if can {
            prop_oneof![
                texts,
                (0u16..0x800, prop::collection::vec(any::<u8>(), 0..9)).prop_map(|(id, d)| Payload::Can(
                    CanFrame::Data(DataFrame::new(CanId::Standard(id), &d).expect("at most 8"))
                ))
            ]
            .boxed()
        } else {
            texts.boxed()
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]

        // Issue 13, item 6: the writer wrote what the reader could not read
        // (a 12 KB config line, a name with a space or a newline).
        #[test]
        fn whatever_the_writer_takes_reads_back_identically(
            declared in prop::collection::vec((name(), any::<bool>()), 0..4),
            later in prop::collection::vec((name(), any::<bool>()), 0..3),
            configs in prop::collection::vec(
                (config_text(), text(30)),
                0..3,
            ),
            events in prop::collection::vec((0i64..1_500_000_000, any::<prop::sample::Index>(), payload(true), payload(false)), 0..40),
        ) {
            let kind = |can: bool| if can { SourceKind::Can } else { SourceKind::Lines };
            let mut header_sources = SourceTable::default();
            for (n, can) in &declared {
                header_sources.intern(n, kind(*can));
            }
            let mut all = header_sources.clone();
            for (n, can) in &later {
                all.intern(n, kind(*can));
            }
            let header = Header {
                version: VERSION,
                created: Some("2026-12-02T10:11:12Z".into()),
                sources: header_sources,
                configs: configs
                    .into_iter()
                    .map(|(text, origin)| ConfigText { kind: ConfigKind::Vehicle, origin, text })
                    .collect(),
                is_termvel: true,
            };
            // Steps shorter than the time-order stage questions (it is
            // tested on its own): what comes out is what went in.
            let mut t_ns = 1_764_670_272_000_000_000i64;
            let ids: Vec<(SourceId, SourceKind)> = all.iter().map(|(id, s)| (id, s.kind)).collect();
            let evs: Vec<Event> = events
                .into_iter()
                .map(|(dt, pick, can_payload, other)| {
                    t_ns += dt;
                    let (id, k) = ids[pick.index(ids.len())];
                    Event::new(t_ns, id, if k == SourceKind::Can { can_payload } else { other })
                })
                .collect();
            let mut file = Vec::new();
            {
                let mut w = RecordingWriter::new(&mut file, &header).unwrap();
                for ev in &evs {
                    w.write_event(ev, &all).unwrap();
                }
            }
            for l in file.split(|b| *b == b'\n') {
                prop_assert!(l.len() <= MAX_LINE, "a line of {} bytes", l.len());
            }
            let mut r = RecordingReader::new(file.as_slice(), "t").unwrap();
            prop_assert_eq!(&r.header.configs, &header.configs);
            prop_assert_eq!(&r.header.created, &header.created);
            let mut got = Vec::new();
            while let Some(ev) = r.next_event() {
                got.push(ev);
            }
            prop_assert_eq!(&r.stats.errors, &Vec::new());
            prop_assert_eq!(r.stats.malformed, 0);
            prop_assert_eq!(got, evs);
            // Sources declared in the body join the table in the same order.
            for (id, s) in r.header.sources.iter() {
                prop_assert_eq!(all.get(id), Some(s));
            }
        }
    }

    #[test]
    fn the_widest_can_line_the_writer_makes_reads_back() {
        // The longest name the format holds, every byte escaped (4 bytes
        // each), a 64-byte FD frame and a time with nanoseconds: the CAN
        // line parser's name bound (decode::candump::MAX_IFACE) must take it.
        let name = "\u{1}".repeat(MAX_NAME);
        let mut sources = SourceTable::default();
        let id = sources.intern(&name, SourceKind::Can);
        let frame = CanFrame::Fd(crate::event::FdFrame::new(CanId::Extended(0x1FFF_FFFF), 15, &[0xAB; 64]).unwrap());
        let ev = Event::new(9_223_372_035_999_999_999, id, Payload::Can(frame));
        let mut file = Vec::new();
        {
            let mut w =
                RecordingWriter::new(&mut file, &Header { sources: sources.clone(), ..Header::default() }).unwrap();
            w.write_event(&ev, &sources).unwrap();
        }
        let mut r = RecordingReader::new(file.as_slice(), "t").unwrap();
        assert_eq!(r.next_event(), Some(ev));
        assert_eq!((r.stats.malformed, r.stats.errors.len()), (0, 0), "{:?}", r.stats.errors);
    }

    #[test]
    fn names_the_format_cannot_hold_are_refused_and_long_texts_cut_visibly() {
        let mut t = SourceTable::default();
        t.intern("", SourceKind::Can);
        let e = RecordingWriter::new(Vec::new(), &Header { sources: t, ..Header::default() }).err().unwrap();
        assert_eq!(e.kind(), io::ErrorKind::InvalidInput);

        let mut file = Vec::new();
        {
            let mut w = RecordingWriter::new(&mut file, &Header::default()).unwrap();
            let long = "\u{1b}".repeat(MAX_TEXT + 10);
            w.write_event(&Event::new(0, SourceId(0), Payload::Mark(long)), &SourceTable::default()).unwrap();
        }
        let mut r = RecordingReader::new(file.as_slice(), "t").unwrap();
        match r.next_event().map(|e| e.payload) {
            Some(Payload::Mark(m)) => {
                assert!(m.starts_with(&"\u{1b}".repeat(MAX_TEXT)));
                assert!(m.ends_with(" … [cut by the recorder: 10 more bytes]"), "{}", &m[m.len() - 60..]);
            }
            other => panic!("{other:?}"),
        }
    }
}
