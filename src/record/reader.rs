//! Reading recordings and candump logs as a stream of events.
//!
//! The reader never stops at a bad line: a malformed line is counted, its
//! location and reason kept (the first hundred), and skipped. A last line
//! without its newline is a torn tail (power loss, kill): reported, skipped,
//! everything before it delivered. Memory is bounded by the buffer and the
//! longest accepted line, whatever the file holds. Events then pass through
//! [`super::time_order`], which puts isolated time jumps right and small
//! reversals in order, and counts what it did.
//!
//! Only regular files and pipes are read (a device such as `/dev/zero`
//! never ends), and a file with no line end in its first
//! [`NO_LINES_AFTER`] bytes is refused at once rather than skipped forever.

use std::fmt;
use std::fs::File;
use std::io::{self, Read, Seek, SeekFrom};
use std::path::Path;

use super::time_order::{TimeOrder, TimeOrderStats};
use super::{Header, MAGIC, MAX_LINE, MAX_NAME, VERSION, unescape, unescape_name};
use crate::config::{ConfigKind, ConfigText};
use crate::decode::candump::{self, FrameSyntaxError};
use crate::event::{Event, LinkState, Payload, SourceKind, SourceTable};
use crate::printable::{clipped, printable};

/// Bytes read without a single line end before a file is refused as
/// holding no lines.
pub const NO_LINES_AFTER: usize = 4 << 20;

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
    /// Not a regular file or a pipe (a device such as `/dev/zero`, a
    /// directory): it would be read forever or not at all.
    #[error("{path}: not a regular file ({what}); give a recording or a candump log")]
    NotAFile { path: String, what: &'static str },
    /// No line end in the first [`NO_LINES_AFTER`] bytes (a file of NULs,
    /// binary data).
    #[error("{path}: no line end in the first {} MiB: this file holds no lines, so it is not a recording or a candump log", NO_LINES_AFTER >> 20)]
    NoLines { path: String },
}

/// Refuses what cannot be a recording: a device, a directory, a socket.
/// Regular files and pipes (`<(…)`, a FIFO) are read.
pub fn check_readable(file: &File, path: &Path) -> Result<(), RecordingError> {
    use std::os::unix::fs::FileTypeExt;
    let path_s = || printable(&path.display().to_string()).into_owned();
    let t = file.metadata().map_err(|e| RecordingError::Io { path: path_s(), source: e })?.file_type();
    let what = if t.is_file() || t.is_fifo() {
        return Ok(());
    } else if t.is_dir() {
        "a directory"
    } else if t.is_char_device() {
        "a character device"
    } else if t.is_block_device() {
        "a block device"
    } else if t.is_socket() {
        "a socket"
    } else {
        "not a file"
    };
    Err(RecordingError::NotAFile { path: path_s(), what })
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
    /// A source name longer than the format allows ([`MAX_NAME`] bytes).
    #[error("source name of {0} bytes: at most {max} allowed", max = MAX_NAME)]
    NameTooLong(usize),
    /// A `%source` line in the body naming a source already declared with
    /// another kind (the name, its kind, the kind now).
    #[error("source \"{0}\" is already declared as {1}, here as {2}")]
    SourceKindClash(String, &'static str, &'static str),
    /// A CAN frame from a source declared with another kind.
    #[error("CAN frame from source {0} which is not a CAN source")]
    NotCanSource(String),
    /// The time of a `[time] source kind …` line does not parse.
    #[error("event line: {0}")]
    EventTime(FrameSyntaxError),
    /// No space between an event line's time and its source.
    #[error("event line: expected a space after the time")]
    NoSpaceAfterTime,
    /// An event line's source name is not UTF-8 or its escape is malformed.
    #[error("event line: source name is not UTF-8 (or a malformed \\x escape)")]
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
    /// A name whose `\xNN` escape is malformed or that is not UTF-8.
    #[error("a malformed source name \"{0}\"")]
    BadName(String),
    /// A name longer than the format allows.
    #[error("source name of {0} bytes: at most {max} allowed", max = MAX_NAME)]
    NameTooLong(usize),
}

/// Which first word of a `%config` chunk line: a new line written as it is
/// (`%|`), a new line escaped (`%\`), or a continuation (`%+`).
fn config_chunk(l: &[u8]) -> Option<(u8, &[u8])> {
    match l {
        [b'%', b'|', rest @ ..] => Some((b'|', rest)),
        [b'%', b'\\', rest @ ..] => Some((b'\\', rest)),
        [b'%', b'+', rest @ ..] => Some((b'+', rest)),
        _ => None,
    }
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
    /// Isolated jumps, gaps and reversals of time, and what was done.
    pub time: TimeOrderStats,
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
    /// Events parsed, on their way out in time order.
    order: TimeOrder,
    /// The file has ended and the order stage has been flushed.
    done: bool,
    /// Skipping the rest of an over-long line.
    skipping: bool,
    /// No line end seen yet, anywhere in the input.
    no_line_yet: bool,
    /// The line of the event last handed out (events may leave the
    /// time-order stage some lines after they were read).
    last_event_line: u64,
    /// The source of the previous CAN line as written (logs rarely switch
    /// interface).
    last_can_source: Option<(Vec<u8>, crate::event::SourceId)>,
    /// Bytes taken from `src` so far (the no-lines check, and
    /// [`RecordingReader::position`]).
    read_bytes: u64,
}

/// Where a reader stands between two events: everything it needs to go on
/// from there in a fresh pass over the same file (a player's checkpoint),
/// the events the time-order stage still holds included.
#[derive(Clone, Debug)]
pub struct ReaderPosition {
    /// Byte offset of the next line.
    offset: u64,
    line_no: u64,
    /// The sources declared up to here (a log's interfaces are added as met).
    sources: SourceTable,
    stats: ReadStats,
    order: TimeOrder,
    done: bool,
    last_can_source: Option<(Vec<u8>, crate::event::SourceId)>,
}

impl RecordingReader<File> {
    pub fn open(path: &Path) -> Result<RecordingReader<File>, RecordingError> {
        let name = printable(&path.display().to_string()).into_owned();
        let f = File::open(path).map_err(|e| RecordingError::Io { path: name.clone(), source: e })?;
        check_readable(&f, path)?;
        RecordingReader::new(f, &name)
    }
}

enum Next {
    Line(usize, usize),
    TooLong,
    End,
    /// [`NO_LINES_AFTER`] bytes without a line end from the start.
    NoLines,
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
            order: TimeOrder::default(),
            done: false,
            skipping: false,
            no_line_yet: true,
            last_event_line: 0,
            last_can_source: None,
            read_bytes: 0,
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
                    self.read_bytes += n as u64;
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
                self.no_line_yet = false;
                if self.skipping {
                    self.skipping = false;
                    return Ok(Next::TooLong);
                }
                if e - s > MAX_LINE {
                    return Ok(Next::TooLong);
                }
                return Ok(Next::Line(s, e));
            }
            if self.no_line_yet && self.read_bytes > NO_LINES_AFTER as u64 {
                return Ok(Next::NoLines);
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

    fn no_lines(&self) -> RecordingError {
        RecordingError::NoLines { path: self.name.clone() }
    }

    /// The next header line without a CR before its line end (CRLF files).
    fn header_line(&mut self) -> Result<Next, RecordingError> {
        match self.next_raw().map_err(|e| self.io_err(e))? {
            Next::Line(s, e) if e > s && self.buf[e - 1] == b'\r' => Ok(Next::Line(s, e - 1)),
            Next::NoLines => Err(self.no_lines()),
            n => Ok(n),
        }
    }

    fn read_header(&mut self) -> Result<(), RecordingError> {
        let (s, e) = match self.next_raw().map_err(|e| self.io_err(e))? {
            Next::NoLines => return Err(self.no_lines()),
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
            self.header_err(
                1,
                format!("expected a format version number after {MAGIC}, found \"{}\"", clipped(&version_txt, 40)),
            )
        })?;
        if version == 0 || version > VERSION {
            return Err(
                self.header_err(1, format!("recording format version {version}; this build reads version {VERSION}"))
            );
        }
        let mut header = Header { version, is_termvel: true, sources: SourceTable::default(), ..Header::default() };
        loop {
            let line_no = self.line_no + 1;
            let (s, e) = match self.header_line()? {
                Next::Line(s, e) => (s, e),
                Next::TooLong | Next::NoLines => {
                    return Err(self.header_err(line_no, format!("header line longer than {MAX_LINE} bytes")));
                }
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
                if let Some(id) = header.sources.find(&name)
                    && let Some(had) = header.sources.get(id).map(|i| i.kind)
                    && had != kind
                {
                    // Two sources cannot share a name: which one would a
                    // line from it belong to?
                    return Err(self.header_err(
                        line_no,
                        format!(
                            "source \"{}\" is declared again with another kind ({}, before: {})",
                            clipped(&name, 40),
                            kind.as_str(),
                            had.as_str()
                        ),
                    ));
                }
                header.sources.try_intern(&name, kind).map_err(|e| self.header_err(line_no, e.to_string()))?;
            } else if let Some(rest) = line.strip_prefix("%config ") {
                let config = self.read_config(rest, line_no)?;
                header.configs.push(config);
            } else {
                return Err(self.header_err(
                    line_no,
                    format!("expected a header line (%source, %config, %end-header), found \"{}\"", clipped(&line, 60)),
                ));
            }
        }
        self.header = header;
        Ok(())
    }

    /// Reads one embedded config after its `%config ` line (`rest`, at
    /// `line_no`): its lines as written (`%|`), escaped (`%\`), each
    /// continued on `%+` lines.
    fn read_config(&mut self, rest: &str, line_no: u64) -> Result<ConfigText, RecordingError> {
        let mut parts = rest.splitn(3, ' ');
        let kind_s = parts.next().unwrap_or("").to_string();
        let kind = ConfigKind::parse(&kind_s).ok_or_else(|| {
            self.header_err(
                line_no,
                format!("expected a config kind after %config, found \"{}\"", clipped(&kind_s, 40)),
            )
        })?;
        let count = parts.next().unwrap_or("");
        let (count, no_final_newline) = match count.strip_suffix('-') {
            Some(c) => (c, true),
            None => (count, false),
        };
        let n: usize =
            count.parse().map_err(|_| self.header_err(line_no, "expected a line count after the config kind"))?;
        let origin_raw = parts.next().unwrap_or("");
        // Recordings before names were escaped wrote the origin as it was.
        let origin = unescape(origin_raw.as_bytes())
            .and_then(|b| String::from_utf8(b).ok())
            .unwrap_or_else(|| origin_raw.to_string());
        let mut text = String::new();
        let mut k = 0;
        // The form of the line being read: b'|' as written, b'\\' escaped.
        let mut form = None;
        loop {
            let ln = self.line_no + 1;
            let (s, e) = match self.header_line()? {
                Next::Line(s, e) => (s, e),
                Next::TooLong | Next::NoLines => {
                    return Err(self.header_err(ln, format!("header line longer than {MAX_LINE} bytes")));
                }
                Next::End if k == n => break,
                Next::End => {
                    return Err(
                        self.header_err(ln, format!("the embedded {kind_s} config ends after {k} of {n} lines"))
                    );
                }
            };
            let chunk = config_chunk(&self.buf[s..e]).map(|(f, b)| (f, b.to_vec()));
            let (f, body) = match chunk {
                Some((b'+', body)) if form.is_some() => (form.expect("checked"), body),
                Some((f @ (b'|' | b'\\'), body)) if k < n => {
                    if form.is_some() {
                        text.push('\n');
                    }
                    form = Some(f);
                    k += 1;
                    (f, body)
                }
                _ if k == n => {
                    // The next header line: not ours.
                    self.start = s;
                    self.line_no -= 1;
                    break;
                }
                _ => {
                    return Err(self.header_err(
                        ln,
                        format!("expected line {} of {n} of the embedded {kind_s} config (\"%|…\")", k + 1),
                    ));
                }
            };
            if f == b'\\' {
                let bytes = unescape(&body).ok_or_else(|| {
                    self.header_err(ln, format!("a malformed \\x escape in line {k} of the embedded {kind_s} config"))
                })?;
                text.push_str(&String::from_utf8_lossy(&bytes));
            } else {
                text.push_str(&String::from_utf8_lossy(&body));
            }
        }
        if n > 0 && !no_final_newline {
            text.push('\n');
        }
        Ok(ConfigText { kind, origin, text })
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
            if let Some((ev, line)) = self.order.pop_with_line() {
                self.stats.events += 1;
                self.last_event_line = line;
                return Some(ev);
            }
            if self.done {
                return None;
            }
            match self.next_parsed() {
                Some(ev) => self.order.push(ev, self.line_no),
                None => {
                    self.order.finish();
                    self.done = true;
                }
            }
            self.stats.time = self.order.stats;
        }
    }

    /// The next event in file order, as its line says.
    fn next_parsed(&mut self) -> Option<Event> {
        loop {
            let (s, e) = match self.next_raw() {
                Ok(Next::Line(s, e)) => (s, e),
                Ok(Next::TooLong) => {
                    self.stats.lines += 1;
                    self.malformed(BodyError::TooLong);
                    continue;
                }
                Ok(Next::End) => return None,
                Ok(Next::NoLines) => {
                    // Only before the first line end, which the header
                    // reading has passed: not reached.
                    self.no_line_yet = false;
                    continue;
                }
                Err(err) => {
                    self.malformed(BodyError::Read(err));
                    self.eof = true;
                    self.start = self.end;
                    return None;
                }
            };
            self.stats.lines += 1;
            match self.parse_body(s, e) {
                Ok(Some(ev)) => return Some(ev),
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
                let (t_ns, raw, frame) = candump::parse_line_bytes(line).map_err(BodyError::Can)?;
                if let Some((name, id)) = &self.last_can_source
                    && name.as_slice() == raw
                {
                    return Ok(Some(Event::new(t_ns, *id, Payload::Can(frame))));
                }
                let iface = unescape_name(raw).ok_or(BodyError::CanInterfaceNotUtf8)?;
                if iface.len() > MAX_NAME {
                    return Err(BodyError::NameTooLong(iface.len()));
                }
                let src = match self.header.sources.find(&iface) {
                    Some(id) => {
                        let kind = self.header.sources.get(id).map(|i| i.kind);
                        if kind != Some(SourceKind::Can) {
                            return Err(BodyError::NotCanSource(clipped(&iface, 40).into_owned()));
                        }
                        id
                    }
                    None => self.header.sources.try_intern(&iface, SourceKind::Can)?,
                };
                self.last_can_source = Some((raw.to_vec(), src));
                Ok(Some(Event::new(t_ns, src, Payload::Can(frame))))
            }
            Some(b'[') => {
                let (t_ns, i) = candump::parse_time_between(line, b']').map_err(BodyError::EventTime)?;
                let rest = line.get(i..).unwrap_or(b"");
                let rest = rest.strip_prefix(b" ").ok_or(BodyError::NoSpaceAfterTime)?;
                let (name, rest) = split_word(rest);
                let name = unescape_name(name).ok_or(BodyError::SourceNameNotUtf8)?;
                let Some(src) = self.header.sources.find(&name) else {
                    return Err(BodyError::UndeclaredSource(clipped(&name, 40).into_owned()));
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
                    other => {
                        return Err(BodyError::UnknownKind(clipped(&String::from_utf8_lossy(other), 20).into_owned()));
                    }
                };
                Ok(Some(Event::new(t_ns, src, payload)))
            }
            Some(b'%') => {
                if let Some(rest) = line.strip_prefix(b"%source ") {
                    let rest = String::from_utf8_lossy(rest).into_owned();
                    let (name, kind) = parse_source_decl(&rest)?;
                    if let Some(id) = self.header.sources.find(&name)
                        && let Some(had) = self.header.sources.get(id).map(|i| i.kind)
                        && had != kind
                    {
                        return Err(BodyError::SourceKindClash(
                            clipped(&name, 40).into_owned(),
                            had.as_str(),
                            kind.as_str(),
                        ));
                    }
                    self.header.sources.try_intern(&name, kind)?;
                    Ok(None)
                } else {
                    Err(BodyError::HeaderLineInBody(clipped(&String::from_utf8_lossy(line), 40).into_owned()))
                }
            }
            Some(_) => Err(BodyError::Unrecognised(clipped(&String::from_utf8_lossy(line), 30).into_owned())),
        }
    }

    /// The line the event last handed out came from (1-based, counting
    /// every line of the file).
    pub fn last_event_line(&self) -> u64 {
        self.last_event_line
    }

    /// Events parsed so far: those handed out and those the time-order
    /// stage still holds.
    pub fn events_parsed(&self) -> u64 {
        self.stats.events + self.order.held() as u64
    }

    /// Reads the rest of the stream, discarding events (for counting).
    pub fn drain(&mut self) {
        while self.next_event().is_some() {}
    }

    /// Where the reader stands: after the last event returned, before the
    /// next line. `None` in the middle of skipping an over-long line.
    pub fn position(&self) -> Option<ReaderPosition> {
        if self.skipping {
            return None;
        }
        Some(ReaderPosition {
            offset: self.read_bytes - (self.end - self.start) as u64,
            line_no: self.line_no,
            sources: self.header.sources.clone(),
            stats: self.stats.clone(),
            order: self.order.clone(),
            done: self.done,
            last_can_source: self.last_can_source.clone(),
        })
    }

    /// Formats a line error with the file name: `file:line: message`.
    pub fn describe(&self, e: &LineError) -> String {
        format!("{}:{}: {}", self.name, e.line, e.message)
    }
}

impl<R: Read + Seek> RecordingReader<R> {
    /// Goes on from `pos` (taken by [`RecordingReader::position`] on a
    /// reader of the same file): the events that follow are those that
    /// followed it then, and the statistics are those it had.
    pub fn resume(&mut self, pos: &ReaderPosition) -> Result<(), RecordingError> {
        self.src.seek(SeekFrom::Start(pos.offset)).map_err(|e| self.io_err(e))?;
        self.read_bytes = pos.offset;
        self.start = 0;
        self.end = 0;
        self.eof = false;
        self.skipping = false;
        self.line_no = pos.line_no;
        self.header.sources = pos.sources.clone();
        self.stats = pos.stats.clone();
        self.order = pos.order.clone();
        self.done = pos.done;
        self.no_line_yet = false;
        self.last_can_source = pos.last_can_source.clone();
        Ok(())
    }
}

/// Bytes at the end of a file [`last_event_time`] reads.
const TAIL_BYTES: u64 = 64 << 10;

/// The stream time of a file's last event, read from its last lines only
/// (a replay's status shows its total length without reading the whole
/// file first): the latest time among the last lines that start with one,
/// so a small reversal at the end (which the time-order stage puts right)
/// does not shorten it. `None` when the file cannot be read or its tail
/// holds no timed line; a time that differs from the others by more than
/// [`TAIL_JUMP_NS`] (an isolated jump, which the reader corrects) is left
/// out.
pub fn last_event_time(path: &Path) -> Option<crate::event::TimeNs> {
    let mut f = File::open(path).ok()?;
    if !f.metadata().ok()?.is_file() {
        return None;
    }
    let len = f.seek(SeekFrom::End(0)).ok()?;
    let from = len.saturating_sub(TAIL_BYTES);
    f.seek(SeekFrom::Start(from)).ok()?;
    let mut tail = Vec::with_capacity((len - from) as usize);
    f.take(TAIL_BYTES).read_to_end(&mut tail).ok()?;
    let mut lines: Vec<&[u8]> = tail.split(|b| *b == b'\n').collect();
    if from > 0 {
        // The first piece may be the end of a line cut by the window.
        lines.remove(0);
    }
    let times: Vec<crate::event::TimeNs> = lines
        .iter()
        .rev()
        .filter_map(|l| match l.first() {
            Some(b'(') => candump::parse_time_between(l, b')').ok().map(|t| t.0),
            Some(b'[') => candump::parse_time_between(l, b']').ok().map(|t| t.0),
            _ => None,
        })
        .take(64)
        .collect();
    let mut sorted = times.clone();
    sorted.sort_unstable();
    let median = *sorted.get(sorted.len() / 2)?;
    times.into_iter().filter(|t| (t - median).abs() <= TAIL_JUMP_NS).max()
}

/// How far a time at the end of a file may lie from its neighbours' and
/// still count as the last event's (beyond: an isolated jump).
const TAIL_JUMP_NS: crate::event::TimeNs = 10 * crate::event::NS_PER_S;

fn split_word(s: &[u8]) -> (&[u8], &[u8]) {
    match s.iter().position(|b| *b == b' ') {
        Some(p) => (&s[..p], &s[p + 1..]),
        None => (s, b""),
    }
}

fn parse_source_decl(rest: &str) -> Result<(String, SourceKind), SourceDeclError> {
    let mut parts = rest.split(' ');
    let name = parts.next().filter(|n| !n.is_empty()).ok_or(SourceDeclError::NoName)?;
    let name =
        unescape_name(name.as_bytes()).ok_or_else(|| SourceDeclError::BadName(clipped(name, 40).into_owned()))?;
    if name.len() > MAX_NAME {
        return Err(SourceDeclError::NameTooLong(name.len()));
    }
    let kind_s = parts.next().unwrap_or("");
    let kind =
        SourceKind::parse(kind_s).ok_or_else(|| SourceDeclError::UnknownKind(clipped(kind_s, 20).into_owned()))?;
    Ok((name, kind))
}

impl fmt::Display for LineError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "line {}: {}", self.line, self.message)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Issue 15, item 17: a replay's status had no total length; the last
    // event's time comes from the file's tail, the same as reading it all.
    #[test]
    fn the_last_event_time_is_read_from_the_tail() {
        let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("replays/demo.tvrec");
        let mut r = RecordingReader::open(&demo).unwrap();
        let mut last = None;
        while let Some(ev) = r.next_event() {
            last = Some(ev.t_ns);
        }
        assert_eq!(last_event_time(&demo), last);
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.log");
        // A small reversal at the end, an isolated jump, a torn last line.
        std::fs::write(
            &p,
            "(100.000000) can0 123#00\n(101.500000) can0 123#00\n(101.400000) can0 123#00\n\
             (9999.0) can0 123#00\n(101.600000) can0 123#00\n(101.7000",
        )
        .unwrap();
        assert_eq!(last_event_time(&p), Some(101_600_000_000));
        std::fs::write(&p, "not a log\n").unwrap();
        assert_eq!(last_event_time(&p), None);
    }

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

    // Issue 15, item 23: seeking back re-read the file from its start; a
    // reader now goes on from a position taken earlier, exactly as it went
    // on then (events, line numbers, statistics, a log's interfaces).
    #[test]
    fn a_reader_resumes_at_a_position_as_it_went_on_then() {
        let text = format!(
            "{MAGIC} {VERSION}\n%source can0 can\n%source op operator\n%end-header\n{}",
            "(1.000000) can0 123#00\nbad\n(2.000000) vcan1 124#01\n[3.000000] op mark m\n(2.500000) vcan1 125#02\n"
        );
        let mut r = RecordingReader::new(std::io::Cursor::new(text.as_bytes().to_vec()), "t").unwrap();
        r.next_event().unwrap();
        r.next_event().unwrap();
        let pos = r.position().unwrap();
        let rest: Vec<Event> = std::iter::from_fn(|| r.next_event()).collect();
        let end_stats = r.stats.clone();
        let mut again = RecordingReader::new(std::io::Cursor::new(text.as_bytes().to_vec()), "t").unwrap();
        again.resume(&pos).unwrap();
        let rest_again: Vec<Event> = std::iter::from_fn(|| again.next_event()).collect();
        assert_eq!(rest.len(), 2);
        assert_eq!(rest, rest_again);
        assert_eq!(end_stats, again.stats, "line numbers, the bad line and the time reversal as before");
        assert!(again.header.sources.find("vcan1").is_some());
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
