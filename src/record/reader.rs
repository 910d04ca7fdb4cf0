//! Reading recordings and candump logs as a stream of events.
//!
//! The reader never stops at a bad line: a malformed line is counted, its
//! location and reason kept (the first hundred), and skipped. A last line
//! without its newline is a torn tail (power loss, kill): reported, skipped,
//! everything before it delivered. Memory is bounded by the buffer and the
//! longest accepted line, whatever the file holds.

use std::fmt;
use std::fs::File;
use std::io::{self, Read};
use std::path::Path;

use super::{Header, MAGIC, MAX_LINE, VERSION, unescape};
use crate::config::{ConfigKind, ConfigText};
use crate::decode::candump::{self, FrameSyntaxError};
use crate::event::{Event, LinkState, Payload, SourceKind, SourceTable, TimeNs};

/// A recording that cannot be read at all.
#[derive(Debug, thiserror::Error)]
pub enum RecordingError {
    /// The file could not be opened or read.
    #[error("{path}: {source}")]
    Io {
        path: String,
        #[source]
        source: io::Error,
    },
    /// The header is damaged, so nothing in the file can be trusted to
    /// replay as recorded.
    #[error("{path}:{line}: {message}")]
    Header { path: String, line: u64, message: String },
}

/// Why a line of a recording's body (or of a candump log) was skipped.
/// The text of each is what the user sees after `file:line: skipped: `.
#[derive(Debug, thiserror::Error)]
pub enum BodyError {
    /// A line longer than [`MAX_LINE`]: corrupt, and not kept in memory.
    #[error("line longer than {} bytes", MAX_LINE)]
    TooLong,
    /// Reading the file failed mid-way; the stream ends here.
    #[error("read error: {0}")]
    Read(io::Error),
    /// A `(time) iface id#data` line that candump syntax does not accept.
    #[error("CAN line: {0}")]
    Can(FrameSyntaxError),
    /// A CAN line whose interface name is not UTF-8.
    #[error("CAN line: the interface name is not UTF-8")]
    CanInterfaceNotUtf8,
    /// A CAN frame from a source declared with another kind.
    #[error("CAN frame from source {0} which is not a CAN source")]
    NotCanSource(String),
    /// The time of a `[time] source kind …` line does not parse.
    #[error("event line: {0}")]
    EventTime(FrameSyntaxError),
    /// No space between an event line's time and its source.
    #[error("event line: expected a space after the time")]
    NoSpaceAfterTime,
    /// An event line's source name is not UTF-8.
    #[error("event line: source name is not UTF-8")]
    SourceNameNotUtf8,
    /// An event line names a source that no `%source` line declared (the
    /// name, cut to 40 characters).
    #[error("event line: source \"{0}\" is not declared")]
    UndeclaredSource(String),
    /// A `\xNN` escape in an event's text is incomplete or not hex.
    #[error("event line: malformed \\x escape")]
    BadEscape,
    /// A mark, acknowledgement, note or link reason that is not UTF-8.
    #[error("event line: text is not UTF-8")]
    TextNotUtf8,
    /// A `lost` event without a count of frames.
    #[error("event line: expected lost and a count of frames")]
    BadLostCount,
    /// A `link` event whose state is not up, down or retrying.
    #[error("event line: expected link up, down or retrying")]
    BadLinkState,
    /// An event kind this build does not know (cut to 20 characters).
    #[error("event line: unknown event kind \"{0}\"")]
    UnknownKind(String),
    /// A `%source` line in the body that does not parse.
    #[error(transparent)]
    SourceDecl(#[from] SourceDeclError),
    /// Another header line after the header ended (cut to 40 characters).
    #[error("unexpected header line in the body: \"{0}\"")]
    HeaderLineInBody(String),
    /// A line that names a new source when the session already holds as
    /// many as a source id can number: refused, so no id is reused.
    #[error("{0}")]
    TooManySources(#[from] crate::event::SourceTableFull),
    /// A line that is neither a CAN frame nor an event (its start, cut to 30
    /// characters).
    #[error("expected '(' (CAN frame) or '[' (event) at the start, found \"{0}\"")]
    Unrecognised(String),
}

/// A `%source NAME KIND` declaration that does not parse.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub enum SourceDeclError {
    /// Nothing after `%source`.
    #[error("expected a source name after %source")]
    NoName,
    /// A kind this build does not know (the word found).
    #[error("expected a source kind (can, nmea, lines, operator, session), found \"{0}\"")]
    UnknownKind(String),
}

/// A skipped line: where and why.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LineError {
    pub line: u64,
    pub message: String,
}

/// A last line cut short.
#[derive(Clone, Debug, PartialEq, Eq, serde::Serialize)]
pub struct TornTail {
    pub line: u64,
    /// Bytes of the incomplete line.
    pub bytes: usize,
}

/// What reading has found so far.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct ReadStats {
    pub lines: u64,
    pub events: u64,
    pub malformed: u64,
    /// The first [`ReadStats::KEPT_ERRORS`] malformed lines.
    pub errors: Vec<LineError>,
    pub torn_tail: Option<TornTail>,
    /// Times an event's timestamp was earlier than the one before it.
    pub time_reversals: u64,
    /// The first of them: its line, and how far back it went (ns).
    pub first_reversal: Option<(u64, TimeNs)>,
}

impl ReadStats {
    pub const KEPT_ERRORS: usize = 100;
}

/// Streams events from a termvel recording or a candump log.
pub struct RecordingReader<R: Read> {
    src: R,
    name: String,
    buf: Vec<u8>,
    start: usize,
    end: usize,
    eof: bool,
    line_no: u64,
    pub header: Header,
    pub stats: ReadStats,
    prev_t: Option<TimeNs>,
    /// Skipping the rest of an over-long line.
    skipping: bool,
    /// The source of the previous CAN line (logs rarely switch interface).
    last_can_source: Option<(String, crate::event::SourceId)>,
}

impl RecordingReader<File> {
    pub fn open(path: &Path) -> Result<RecordingReader<File>, RecordingError> {
        let f = File::open(path).map_err(|e| RecordingError::Io { path: path.display().to_string(), source: e })?;
        RecordingReader::new(f, &path.display().to_string())
    }
}

enum Next {
    Line(usize, usize),
    TooLong,
    End,
}

impl<R: Read> RecordingReader<R> {
    /// Reads the header, if the input has one.
    pub fn new(src: R, name: &str) -> Result<RecordingReader<R>, RecordingError> {
        let mut r = RecordingReader {
            src,
            name: name.to_string(),
            buf: vec![0; 256 * 1024],
            start: 0,
            end: 0,
            eof: false,
            line_no: 0,
            header: Header::default(),
            stats: ReadStats::default(),
            prev_t: None,
            skipping: false,
            last_can_source: None,
        };
        r.read_header()?;
        Ok(r)
    }

    /// The name the reader reports in messages.
    pub fn name(&self) -> &str {
        &self.name
    }

    fn header_err(&self, line: u64, message: impl Into<String>) -> RecordingError {
        RecordingError::Header { path: self.name.clone(), line, message: message.into() }
    }

    fn io_err(&self, e: io::Error) -> RecordingError {
        RecordingError::Io { path: self.name.clone(), source: e }
    }

    /// Fills the buffer; false at end of input.
    fn fill(&mut self) -> io::Result<bool> {
        if self.eof {
            return Ok(false);
        }
        if self.start > 0 {
            self.buf.copy_within(self.start..self.end, 0);
            self.end -= self.start;
            self.start = 0;
        }
        if self.end == self.buf.len() {
            self.buf.resize(self.buf.len() * 2, 0);
        }
        loop {
            match self.src.read(&mut self.buf[self.end..]) {
                Ok(0) => {
                    self.eof = true;
                    return Ok(false);
                }
                Ok(n) => {
                    self.end += n;
                    return Ok(true);
                }
                Err(e) if e.kind() == io::ErrorKind::Interrupted => continue,
                Err(e) => return Err(e),
            }
        }
    }

    /// The next complete line (range in `buf`, without the newline).
    fn next_raw(&mut self) -> io::Result<Next> {
        loop {
            if let Some(p) = memchr::memchr(b'\n', &self.buf[self.start..self.end]) {
                let (s, e) = (self.start, self.start + p);
                self.start = e + 1;
                self.line_no += 1;
                if self.skipping {
                    self.skipping = false;
                    return Ok(Next::TooLong);
                }
                if e - s > MAX_LINE {
                    return Ok(Next::TooLong);
                }
                return Ok(Next::Line(s, e));
            }
            if self.end - self.start > MAX_LINE {
                // Drop what we have of an over-long line and keep skipping.
                self.skipping = true;
                self.start = self.end;
            }
            if !self.fill()? {
                if self.start < self.end || self.skipping {
                    self.line_no += 1;
                    self.stats.torn_tail = Some(TornTail { line: self.line_no, bytes: self.end - self.start });
                    self.start = self.end;
                    self.skipping = false;
                }
                return Ok(Next::End);
            }
        }
    }

    fn read_header(&mut self) -> Result<(), RecordingError> {
        let (s, e) = match self.next_raw().map_err(|e| self.io_err(e))? {
            Next::Line(s, e) => (s, e),
            Next::TooLong => {
                // Not a termvel header: a candump log whose first line is
                // corrupt. Count it like any other bad line and read on.
                self.header = Header { sources: SourceTable::default(), ..Header::default() };
                self.stats.lines += 1;
                self.malformed(BodyError::TooLong);
                return Ok(());
            }
            Next::End => {
                if self.stats.torn_tail.is_some() {
                    // A file of one torn line: let the torn tail speak for it.
                    self.header = Header { sources: SourceTable::default(), ..Header::default() };
                    return Ok(());
                }
                self.header = Header { sources: SourceTable::default(), ..Header::default() };
                return Ok(());
            }
        };
        let first = self.buf[s..e].to_vec();
        if !first.starts_with(MAGIC.as_bytes()) {
            // A candump log (or garbage, which the body parser will count).
            self.start = s;
            self.line_no -= 1;
            self.header = Header { sources: SourceTable::default(), ..Header::default() };
            return Ok(());
        }
        let version_txt = String::from_utf8_lossy(&first[MAGIC.len()..]).trim().to_string();
        let version: u32 = version_txt.parse().map_err(|_| {
            self.header_err(1, format!("expected a format version number after {MAGIC}, found \"{version_txt}\""))
        })?;
        if version == 0 || version > VERSION {
            return Err(
                self.header_err(1, format!("recording format version {version}; this build reads version {VERSION}"))
            );
        }
        let mut header = Header { version, is_termvel: true, sources: SourceTable::default(), ..Header::default() };
        loop {
            let line_no = self.line_no + 1;
            let (s, e) = match self.next_raw().map_err(|e| self.io_err(e))? {
                Next::Line(s, e) => (s, e),
                Next::TooLong => return Err(self.header_err(line_no, "header line longer than 8192 bytes")),
                Next::End => {
                    return Err(self.header_err(
                        line_no,
                        "the header ends before %end-header: the recording was cut while starting",
                    ));
                }
            };
            let line = String::from_utf8_lossy(&self.buf[s..e]).into_owned();
            if line == "%end-header" {
                break;
            } else if let Some(rest) = line.strip_prefix("%created ") {
                header.created = Some(rest.to_string());
            } else if line.starts_with("%program ") {
            } else if let Some(rest) = line.strip_prefix("%source ") {
                let (name, kind) = parse_source_decl(rest).map_err(|m| self.header_err(line_no, m.to_string()))?;
                header.sources.try_intern(name, kind).map_err(|e| self.header_err(line_no, e.to_string()))?;
            } else if let Some(rest) = line.strip_prefix("%config ") {
                let mut parts = rest.splitn(3, ' ');
                let kind_s = parts.next().unwrap_or("");
                let kind = ConfigKind::parse(kind_s).ok_or_else(|| {
                    self.header_err(line_no, format!("expected a config kind after %config, found \"{kind_s}\""))
                })?;
                let n: usize = parts
                    .next()
                    .and_then(|n| n.parse().ok())
                    .ok_or_else(|| self.header_err(line_no, "expected a line count after the config kind"))?;
                let origin = parts.next().unwrap_or("").to_string();
                let mut text = String::new();
                for k in 0..n {
                    let ln = self.line_no + 1;
                    let (s, e) = match self.next_raw().map_err(|e| self.io_err(e))? {
                        Next::Line(s, e) => (s, e),
                        _ => {
                            return Err(self
                                .header_err(ln, format!("the embedded {kind_s} config ends after {k} of {n} lines")));
                        }
                    };
                    let l = &self.buf[s..e];
                    let Some(body) = l.strip_prefix(b"%|") else {
                        return Err(self.header_err(
                            ln,
                            format!("expected line {} of {n} of the embedded {kind_s} config (\"%|…\")", k + 1),
                        ));
                    };
                    text.push_str(&String::from_utf8_lossy(body));
                    text.push('\n');
                }
                header.configs.push(ConfigText { kind, origin, text });
            } else {
                return Err(self.header_err(
                    line_no,
                    format!(
                        "expected a header line (%source, %config, %end-header), found \"{}\"",
                        truncate(&line, 60)
                    ),
                ));
            }
        }
        self.header = header;
        Ok(())
    }

    fn malformed(&mut self, problem: BodyError) {
        self.stats.malformed += 1;
        if self.stats.errors.len() < ReadStats::KEPT_ERRORS {
            self.stats.errors.push(LineError { line: self.line_no, message: problem.to_string() });
        }
    }

    /// The next event, or `None` at the end. Malformed lines are counted in
    /// [`RecordingReader::stats`] and skipped; an I/O error mid-file ends
    /// the stream and is reported as a malformed line.
    pub fn next_event(&mut self) -> Option<Event> {
        loop {
            let (s, e) = match self.next_raw() {
                Ok(Next::Line(s, e)) => (s, e),
                Ok(Next::TooLong) => {
                    self.stats.lines += 1;
                    self.malformed(BodyError::TooLong);
                    continue;
                }
                Ok(Next::End) => return None,
                Err(err) => {
                    self.malformed(BodyError::Read(err));
                    self.eof = true;
                    self.start = self.end;
                    return None;
                }
            };
            self.stats.lines += 1;
            match self.parse_body(s, e) {
                Ok(Some(ev)) => {
                    if let Some(p) = self.prev_t
                        && ev.t_ns < p
                    {
                        self.stats.time_reversals += 1;
                        if self.stats.first_reversal.is_none() {
                            self.stats.first_reversal = Some((self.line_no, p - ev.t_ns));
                        }
                    }
                    self.prev_t = Some(ev.t_ns);
                    self.stats.events += 1;
                    return Some(ev);
                }
                Ok(None) => continue,
                Err(m) => self.malformed(m),
            }
        }
    }

    fn parse_body(&mut self, s: usize, e: usize) -> Result<Option<Event>, BodyError> {
        let line = &self.buf[s..e];
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        match line.first() {
            None => Ok(None),
            Some(b'(') => {
                let (t_ns, iface, frame) = candump::parse_line_bytes(line).map_err(BodyError::Can)?;
                if let Some((name, id)) = &self.last_can_source
                    && name.as_bytes() == iface
                {
                    return Ok(Some(Event::new(t_ns, *id, Payload::Can(frame))));
                }
                let iface = std::str::from_utf8(iface).map_err(|_| BodyError::CanInterfaceNotUtf8)?;
                let src = match self.header.sources.find(iface) {
                    Some(id) => {
                        let kind = self.header.sources.get(id).map(|i| i.kind);
                        if kind != Some(SourceKind::Can) {
                            return Err(BodyError::NotCanSource(iface.to_string()));
                        }
                        id
                    }
                    None => self.header.sources.try_intern(iface, SourceKind::Can)?,
                };
                self.last_can_source = Some((iface.to_string(), src));
                Ok(Some(Event::new(t_ns, src, Payload::Can(frame))))
            }
            Some(b'[') => {
                let (t_ns, i) = candump::parse_time_between(line, b']').map_err(BodyError::EventTime)?;
                let rest = line.get(i..).unwrap_or(b"");
                let rest = rest.strip_prefix(b" ").ok_or(BodyError::NoSpaceAfterTime)?;
                let (name, rest) = split_word(rest);
                let name = std::str::from_utf8(name).map_err(|_| BodyError::SourceNameNotUtf8)?;
                let Some(src) = self.header.sources.find(name) else {
                    return Err(BodyError::UndeclaredSource(truncate(name, 40)));
                };
                let (verb, arg) = split_word(rest);
                let text = || unescape(arg).ok_or(BodyError::BadEscape);
                let utf8 = |b: Vec<u8>| String::from_utf8(b).map_err(|_| BodyError::TextNotUtf8);
                let payload = match verb {
                    b"line" => Payload::Line(text()?),
                    b"mark" => Payload::Mark(utf8(text()?)?),
                    b"ack" => Payload::Ack(utf8(text()?)?),
                    b"note" => Payload::Note(utf8(text()?)?),
                    b"tick" => Payload::Tick,
                    b"lost" => Payload::Lost(
                        std::str::from_utf8(arg).ok().and_then(|a| a.parse().ok()).ok_or(BodyError::BadLostCount)?,
                    ),
                    b"link" => {
                        let (state, reason) = split_word(arg);
                        let state = std::str::from_utf8(state)
                            .ok()
                            .and_then(LinkState::parse)
                            .ok_or(BodyError::BadLinkState)?;
                        let reason = utf8(unescape(reason).ok_or(BodyError::BadEscape)?)?;
                        Payload::Link(state, reason)
                    }
                    other => return Err(BodyError::UnknownKind(truncate(&String::from_utf8_lossy(other), 20))),
                };
                Ok(Some(Event::new(t_ns, src, payload)))
            }
            Some(b'%') => {
                if let Some(rest) = line.strip_prefix(b"%source ") {
                    let rest = String::from_utf8_lossy(rest).into_owned();
                    let (name, kind) = parse_source_decl(&rest)?;
                    self.header.sources.try_intern(name, kind)?;
                    Ok(None)
                } else {
                    Err(BodyError::HeaderLineInBody(truncate(&String::from_utf8_lossy(line), 40)))
                }
            }
            Some(_) => Err(BodyError::Unrecognised(truncate(&String::from_utf8_lossy(line), 30))),
        }
    }

    /// Reads the rest of the stream, discarding events (for counting).
    pub fn drain(&mut self) {
        while self.next_event().is_some() {}
    }

    /// Formats a line error with the file name: `file:line: message`.
    pub fn describe(&self, e: &LineError) -> String {
        format!("{}:{}: {}", self.name, e.line, e.message)
    }
}

fn split_word(s: &[u8]) -> (&[u8], &[u8]) {
    match s.iter().position(|b| *b == b' ') {
        Some(p) => (&s[..p], &s[p + 1..]),
        None => (s, b""),
    }
}

fn parse_source_decl(rest: &str) -> Result<(&str, SourceKind), SourceDeclError> {
    let mut parts = rest.split(' ');
    let name = parts.next().filter(|n| !n.is_empty()).ok_or(SourceDeclError::NoName)?;
    let kind_s = parts.next().unwrap_or("");
    let kind = SourceKind::parse(kind_s).ok_or_else(|| SourceDeclError::UnknownKind(kind_s.to_string()))?;
    Ok((name, kind))
}

fn truncate(s: &str, n: usize) -> String {
    if s.chars().count() <= n { s.to_string() } else { format!("{}…", s.chars().take(n).collect::<String>()) }
}

impl fmt::Display for LineError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "line {}: {}", self.line, self.message)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Reads `body` after a header declaring `can0` (CAN) and `op`
    /// (operator); returns the events and the skipped lines' messages.
    fn read(body: &str) -> (usize, Vec<String>) {
        let text = format!("{MAGIC} {VERSION}\n%source can0 can\n%source op operator\n%end-header\n{body}");
        let mut r = RecordingReader::new(text.as_bytes(), "t").unwrap();
        let mut n = 0;
        while r.next_event().is_some() {
            n += 1;
        }
        (n, r.stats.errors.iter().map(|e| e.message.clone()).collect())
    }

    #[test]
    fn skipped_lines_say_why_in_the_words_users_know() {
        let (n, msgs) = read(concat!(
            "[1.000000] op mark fine\n",
            "[1.000000] op mark bad \\q1\n",
            "[1.000000] ghost mark x\n",
            "[1.000000] op telegram x\n",
            "[1.000000] op lost many\n",
            "[1.000000] op link sideways why\n",
            "[1.000000] can0 mark x\n",
            "(1.000000) op 123#00\n",
            "%source\n",
            "%source x wobble\n",
            "%created again\n",
            "hello\n",
        ));
        assert_eq!(n, 2, "the good mark and the mark from can0 (any declared source may mark)");
        assert_eq!(
            msgs,
            vec![
                "event line: malformed \\x escape",
                "event line: source \"ghost\" is not declared",
                "event line: unknown event kind \"telegram\"",
                "event line: expected lost and a count of frames",
                "event line: expected link up, down or retrying",
                "CAN frame from source op which is not a CAN source",
                "unexpected header line in the body: \"%source\"",
                "expected a source kind (can, nmea, lines, operator, session), found \"wobble\"",
                "unexpected header line in the body: \"%created again\"",
                "expected '(' (CAN frame) or '[' (event) at the start, found \"hello\"",
            ]
        );
    }
}
