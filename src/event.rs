//! Events: what arrived, raw, with a timestamp.
//!
//! Sources produce events and nothing else; everything downstream (decode,
//! engine, recorder) is a function of the ordered event stream. Time is an
//! `i64` count of nanoseconds since the Unix epoch, taken by the source at
//! arrival (or read from a log). Live sources quantise to whole microseconds,
//! the resolution of SocketCAN and of `candump -L` logs, so a recording keeps
//! every timestamp exactly.

use std::fmt;

/// Nanoseconds since the Unix epoch.
pub type TimeNs = i64;

/// Nanoseconds in one second.
pub const NS_PER_S: i64 = 1_000_000_000;

/// Converts a nanosecond time or duration to seconds.
pub fn ns_to_s(t_ns: TimeNs) -> f64 {
    t_ns as f64 * 1e-9
}

/// Index of a source in the session's source table.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct SourceId(pub u16);

/// What kind of input a source is; decides how its lines are decoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum SourceKind {
    /// CAN frames (SocketCAN, a serial CAN adapter, a candump log, the simulator).
    Can,
    /// NMEA 0183 sentences from a GNSS receiver.
    Nmea,
    /// termvel's `key=value` line telemetry.
    Lines,
    /// The operator at the keyboard (marks, acknowledgements).
    Operator,
    /// The session itself: clock ticks, engine annotations.
    Session,
}

impl SourceKind {
    /// The word used for this kind in recordings and on screen.
    pub fn as_str(self) -> &'static str {
        match self {
            SourceKind::Can => "can",
            SourceKind::Nmea => "nmea",
            SourceKind::Lines => "lines",
            SourceKind::Operator => "operator",
            SourceKind::Session => "session",
        }
    }

    /// Parses the word written by [`SourceKind::as_str`].
    pub fn parse(s: &str) -> Option<SourceKind> {
        Some(match s {
            "can" => SourceKind::Can,
            "nmea" => SourceKind::Nmea,
            "lines" => SourceKind::Lines,
            "operator" => SourceKind::Operator,
            "session" => SourceKind::Session,
            _ => return None,
        })
    }
}

/// One entry of the source table.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SourceInfo {
    /// Short name, unique in a session (`can0`, `gnss0`, `op`).
    pub name: String,
    pub kind: SourceKind,
}

/// Most sources a session holds: every id a [`SourceId`] can carry. A
/// candump log names its interfaces itself, so a hostile one reaches it;
/// past it a new name is refused (the reader counts the line as bad), never
/// given an id already in use.
pub const MAX_SOURCES: usize = u16::MAX as usize + 1;

/// The source table is full: a new name would need an id past
/// [`MAX_SOURCES`].
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
#[error("the source table is full ({MAX_SOURCES} sources); \"{name}\" gets no source")]
pub struct SourceTableFull {
    /// The name that was refused (cut to 40 characters).
    pub name: String,
}

/// The sources of a session, indexed by [`SourceId`]. Ids 0 and 1 are
/// always the operator and the session itself.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SourceTable {
    sources: Vec<SourceInfo>,
    /// Name to id, so a log naming 40 000 interfaces interns each in
    /// constant time.
    by_name: std::collections::HashMap<String, SourceId>,
}

/// Id of the operator source in every session.
pub const OPERATOR: SourceId = SourceId(0);
/// Id of the session source (clock ticks, engine annotations).
pub const SESSION: SourceId = SourceId(1);

impl Default for SourceTable {
    fn default() -> Self {
        SourceTable {
            sources: vec![
                SourceInfo { name: "op".into(), kind: SourceKind::Operator },
                SourceInfo { name: "session".into(), kind: SourceKind::Session },
            ],
            by_name: [("op".to_string(), OPERATOR), ("session".to_string(), SESSION)].into_iter().collect(),
        }
    }
}

impl SourceTable {
    /// Returns the id of `name`, adding it with `kind` if it is new: for a
    /// table built from a short fixed list (the simulator, tests).
    ///
    /// # Panics
    /// When the table is full. Names that come from input (a log, a
    /// recording, the command line) go through [`SourceTable::try_intern`].
    pub fn intern(&mut self, name: &str, kind: SourceKind) -> SourceId {
        self.try_intern(name, kind).expect("a fixed list of sources fits the table")
    }

    /// Returns the id of `name`, adding it with `kind` if it is new; an
    /// error when it is new and the table already holds [`MAX_SOURCES`].
    pub fn try_intern(&mut self, name: &str, kind: SourceKind) -> Result<SourceId, SourceTableFull> {
        if let Some(id) = self.find(name) {
            return Ok(id);
        }
        let id =
            u16::try_from(self.sources.len()).map_err(|_| SourceTableFull { name: name.chars().take(40).collect() })?;
        self.sources.push(SourceInfo { name: name.to_string(), kind });
        self.by_name.insert(name.to_string(), SourceId(id));
        Ok(SourceId(id))
    }

    /// The id of the source called `name`, if any.
    pub fn find(&self, name: &str) -> Option<SourceId> {
        self.by_name.get(name).copied()
    }

    pub fn get(&self, id: SourceId) -> Option<&SourceInfo> {
        self.sources.get(id.0 as usize)
    }

    /// Name of a source, or `?` for an id not in the table.
    pub fn name(&self, id: SourceId) -> &str {
        self.get(id).map(|s| s.name.as_str()).unwrap_or("?")
    }

    pub fn len(&self) -> usize {
        self.sources.len()
    }

    pub fn is_empty(&self) -> bool {
        self.sources.is_empty()
    }

    pub fn iter(&self) -> impl Iterator<Item = (SourceId, &SourceInfo)> {
        self.sources.iter().enumerate().map(|(i, s)| (SourceId(i as u16), s))
    }
}

/// A CAN identifier: 11-bit standard or 29-bit extended. Constructed only
/// through [`CanId::standard`] and [`CanId::extended`], so it is always in range.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum CanId {
    Standard(u16),
    Extended(u32),
}

impl CanId {
    pub const STANDARD_MAX: u32 = 0x7FF;
    pub const EXTENDED_MAX: u32 = 0x1FFF_FFFF;

    pub fn standard(id: u32) -> Option<CanId> {
        (id <= Self::STANDARD_MAX).then_some(CanId::Standard(id as u16))
    }

    pub fn extended(id: u32) -> Option<CanId> {
        (id <= Self::EXTENDED_MAX).then_some(CanId::Extended(id))
    }

    /// The numeric identifier.
    pub fn raw(self) -> u32 {
        match self {
            CanId::Standard(id) => id as u32,
            CanId::Extended(id) => id,
        }
    }

    pub fn is_extended(self) -> bool {
        matches!(self, CanId::Extended(_))
    }
}

impl fmt::Display for CanId {
    /// candump style: 3 hex digits for standard ids, 8 for extended.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CanId::Standard(id) => write!(f, "{id:03X}"),
            CanId::Extended(id) => write!(f, "{id:08X}"),
        }
    }
}

/// A classic CAN data frame (0 to 8 bytes).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct DataFrame {
    id: CanId,
    len: u8,
    data: [u8; 8],
}

impl DataFrame {
    /// `None` when `data` is longer than 8 bytes.
    pub fn new(id: CanId, data: &[u8]) -> Option<DataFrame> {
        if data.len() > 8 {
            return None;
        }
        let mut d = [0u8; 8];
        d[..data.len()].copy_from_slice(data);
        Some(DataFrame { id, len: data.len() as u8, data: d })
    }
    pub fn id(&self) -> CanId {
        self.id
    }
    pub fn data(&self) -> &[u8] {
        &self.data[..self.len as usize]
    }
}

/// A classic CAN remote frame: an id and a requested length, no data.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct RemoteFrame {
    id: CanId,
    dlc: u8,
}

impl RemoteFrame {
    /// `None` when `dlc` is above 15 (the field is four bits).
    pub fn new(id: CanId, dlc: u8) -> Option<RemoteFrame> {
        (dlc <= 15).then_some(RemoteFrame { id, dlc })
    }
    pub fn id(&self) -> CanId {
        self.id
    }
    pub fn dlc(&self) -> u8 {
        self.dlc
    }
}

/// Error-class bits of a SocketCAN error frame (linux/can/error.h). The
/// class lives in the identifier; details in the data bytes.
pub mod err_class {
    pub const TX_TIMEOUT: u32 = 0x0000_0001;
    pub const LOST_ARBITRATION: u32 = 0x0000_0002;
    pub const CONTROLLER: u32 = 0x0000_0004;
    pub const PROTOCOL: u32 = 0x0000_0008;
    pub const TRANSCEIVER: u32 = 0x0000_0010;
    pub const NO_ACK: u32 = 0x0000_0020;
    pub const BUS_OFF: u32 = 0x0000_0040;
    pub const BUS_ERROR: u32 = 0x0000_0080;
    pub const RESTARTED: u32 = 0x0000_0100;
    pub const COUNTERS: u32 = 0x0000_0200;
    /// The flag in a candump identifier that marks an error frame.
    pub const ERR_FLAG: u32 = 0x2000_0000;
    /// data[1] bits for `CONTROLLER`: error-passive states.
    pub const CTRL_RX_PASSIVE: u8 = 0x10;
    pub const CTRL_TX_PASSIVE: u8 = 0x20;
}

/// A SocketCAN error frame: the error class (identifier bits without the
/// error flag) and eight bytes of detail.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ErrorFrame {
    class: u32,
    len: u8,
    data: [u8; 8],
}

impl ErrorFrame {
    /// `None` when `class` does not fit in 29 bits or `data` exceeds 8 bytes.
    pub fn new(class: u32, data: &[u8]) -> Option<ErrorFrame> {
        if class > CanId::EXTENDED_MAX || data.len() > 8 {
            return None;
        }
        let mut d = [0u8; 8];
        d[..data.len()].copy_from_slice(data);
        Some(ErrorFrame { class, len: data.len() as u8, data: d })
    }
    pub fn class(&self) -> u32 {
        self.class
    }
    pub fn data(&self) -> &[u8] {
        &self.data[..self.len as usize]
    }
    pub fn is_bus_off(&self) -> bool {
        self.class & err_class::BUS_OFF != 0
    }
    pub fn is_error_passive(&self) -> bool {
        self.class & err_class::CONTROLLER != 0
            && self.len >= 2
            && self.data[1] & (err_class::CTRL_RX_PASSIVE | err_class::CTRL_TX_PASSIVE) != 0
    }
    pub fn is_lost_arbitration(&self) -> bool {
        self.class & err_class::LOST_ARBITRATION != 0
    }
}

/// CAN FD flags as written in a candump log's flags nibble.
pub mod fd_flags {
    /// Bit rate switch.
    pub const BRS: u8 = 0x01;
    /// Error state indicator.
    pub const ESI: u8 = 0x02;
    /// FD frame format (set on every FD frame by Linux).
    pub const FDF: u8 = 0x04;
}

/// A CAN FD data frame: 0 to 64 bytes, in one of the lengths a DLC can code.
#[derive(Clone, Copy, PartialEq, Eq)]
pub struct FdFrame {
    id: CanId,
    flags: u8,
    len: u8,
    data: [u8; 64],
}

impl fmt::Debug for FdFrame {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("FdFrame").field("id", &self.id).field("flags", &self.flags).field("data", &self.data()).finish()
    }
}

impl FdFrame {
    /// Payload lengths a CAN FD DLC can express.
    pub const LENGTHS: [usize; 16] = [0, 1, 2, 3, 4, 5, 6, 7, 8, 12, 16, 20, 24, 32, 48, 64];

    /// `None` when the length is not one of [`FdFrame::LENGTHS`] or `flags`
    /// has bits above the nibble.
    pub fn new(id: CanId, flags: u8, data: &[u8]) -> Option<FdFrame> {
        if !Self::LENGTHS.contains(&data.len()) || flags > 0x0F {
            return None;
        }
        let mut d = [0u8; 64];
        d[..data.len()].copy_from_slice(data);
        Some(FdFrame { id, flags, len: data.len() as u8, data: d })
    }
    pub fn id(&self) -> CanId {
        self.id
    }
    pub fn flags(&self) -> u8 {
        self.flags
    }
    pub fn data(&self) -> &[u8] {
        &self.data[..self.len as usize]
    }
}

/// Any CAN frame. The kinds are distinct types so an invalid frame (a
/// 12-byte classic frame, a remote frame with data) cannot be built.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CanFrame {
    Data(DataFrame),
    Remote(RemoteFrame),
    Error(ErrorFrame),
    Fd(FdFrame),
}

impl CanFrame {
    /// The identifier, for data, remote and FD frames.
    pub fn id(&self) -> Option<CanId> {
        match self {
            CanFrame::Data(f) => Some(f.id()),
            CanFrame::Remote(f) => Some(f.id()),
            CanFrame::Fd(f) => Some(f.id()),
            CanFrame::Error(_) => None,
        }
    }

    /// The payload bytes (empty for remote frames).
    pub fn data(&self) -> &[u8] {
        match self {
            CanFrame::Data(f) => f.data(),
            CanFrame::Fd(f) => f.data(),
            CanFrame::Error(f) => f.data(),
            CanFrame::Remote(_) => &[],
        }
    }
}

/// State of a source's link, as reported by the source itself.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum LinkState {
    /// Opened and delivering.
    Up,
    /// Lost (device gone, interface down, end of file on a serial port).
    Down,
    /// Trying to reopen after a loss.
    Retrying,
}

impl LinkState {
    pub fn as_str(self) -> &'static str {
        match self {
            LinkState::Up => "up",
            LinkState::Down => "down",
            LinkState::Retrying => "retrying",
        }
    }
    pub fn parse(s: &str) -> Option<LinkState> {
        Some(match s {
            "up" => LinkState::Up,
            "down" => LinkState::Down,
            "retrying" => LinkState::Retrying,
            _ => return None,
        })
    }
}

/// What an event carries.
#[derive(Clone, Debug, PartialEq)]
pub enum Payload {
    /// A CAN frame.
    Can(CanFrame),
    /// One line of text from a serial source, without its line ending. Bytes,
    /// not `String`: serial garbage is kept as it came.
    Line(Vec<u8>),
    /// A serial line that its protocol's parser refused where it was read
    /// (a serial CAN adapter's message that is not valid), with the error,
    /// so the decoder counts it without parsing the bytes again. Recorded as
    /// a [`Payload::Line`] (the bytes are what arrived); a replay parses the
    /// line once and finds the same error.
    BadLine {
        /// The line as it came, without its line ending.
        line: Vec<u8>,
        /// The parse error, as the decoder counts and shows it.
        error: String,
    },
    /// An operator mark with its text.
    Mark(String),
    /// The operator acknowledged an alert (its key), or all (`*`).
    Ack(String),
    /// A source's link changed state, with a reason.
    Link(LinkState, String),
    /// Frames a source lost before termvel could read them (a SocketCAN
    /// socket's receive queue overflowed), counted by the kernel since the
    /// previous report.
    Lost(u64),
    /// A clock heartbeat from a live session, so that staleness is judged
    /// the same way live and in replay.
    Tick,
    /// An annotation written by the engine (alert raised or cleared). It is
    /// recorded for people and tools; the engine recomputes it on replay and
    /// ignores it as input.
    Note(String),
}

/// One thing that arrived.
#[derive(Clone, Debug, PartialEq)]
pub struct Event {
    pub t_ns: TimeNs,
    pub source: SourceId,
    pub payload: Payload,
}

impl Event {
    pub fn new(t_ns: TimeNs, source: SourceId, payload: Payload) -> Event {
        Event { t_ns, source, payload }
    }

    /// Whether the engine takes this event as input (annotations it wrote
    /// itself are not input).
    pub fn is_input(&self) -> bool {
        !matches!(self.payload, Payload::Note(_))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn can_id_ranges() {
        assert_eq!(CanId::standard(0x7FF), Some(CanId::Standard(0x7FF)));
        assert_eq!(CanId::standard(0x800), None);
        assert_eq!(CanId::extended(0x1FFF_FFFF).map(CanId::raw), Some(0x1FFF_FFFF));
        assert_eq!(CanId::extended(0x2000_0000), None);
        assert_eq!(CanId::Standard(0x44).to_string(), "044");
        assert_eq!(CanId::Extended(0x123).to_string(), "00000123");
    }

    #[test]
    fn frames_reject_impossible_shapes() {
        let id = CanId::Standard(1);
        assert!(DataFrame::new(id, &[0; 9]).is_none());
        assert!(FdFrame::new(id, 0, &[0; 9]).is_none(), "9 is not an FD length");
        assert!(FdFrame::new(id, 0, &[0; 12]).is_some());
        assert!(FdFrame::new(id, 0x10, &[0; 12]).is_none());
        assert!(RemoteFrame::new(id, 16).is_none());
    }

    #[test]
    fn error_frame_states() {
        let bus_off = ErrorFrame::new(err_class::BUS_OFF, &[0; 8]).unwrap();
        assert!(bus_off.is_bus_off() && !bus_off.is_error_passive());
        let passive =
            ErrorFrame::new(err_class::CONTROLLER, &[0, err_class::CTRL_TX_PASSIVE, 0, 0, 0, 0, 0, 0]).unwrap();
        assert!(passive.is_error_passive());
    }

    #[test]
    fn source_table_interns() {
        let mut t = SourceTable::default();
        let a = t.intern("can0", SourceKind::Can);
        let b = t.intern("gnss0", SourceKind::Nmea);
        assert_eq!(t.try_intern("can0", SourceKind::Can), Ok(a));
        assert_ne!(a, b);
        assert_eq!(t.name(OPERATOR), "op");
        assert_eq!(t.name(b), "gnss0");
        assert_eq!(t.find("session"), Some(SESSION));
    }

    // Issue 13, item 7: the 65 537th source name got id 0 (`as u16`
    // wrapped), the operator's.
    #[test]
    fn a_full_source_table_refuses_a_new_name_and_reuses_no_id() {
        let mut t = SourceTable::default();
        for i in t.len()..MAX_SOURCES {
            assert_eq!(t.try_intern(&format!("c{i}"), SourceKind::Can), Ok(SourceId(i as u16)));
        }
        let e = t.try_intern("one_more", SourceKind::Can).unwrap_err();
        assert!(e.to_string().contains("65536 sources"), "{e}");
        assert_eq!((t.len(), t.find("one_more"), t.name(OPERATOR)), (MAX_SOURCES, None, "op"));
    }
}
