//! The serial-line CAN protocol (slcan) of common USB-CAN adapters: messages
//! from the adapter into [`SlcanMsg`], and the commands that open a channel.
//!
//! Follows the Lawicel CAN232/CANUSB ASCII protocol, the one the Linux
//! `slcan` driver (`drivers/net/can/slcan`) speaks, with the CAN FD
//! extension of adapters that support it (CANable 2.0 firmware and others).
//! Messages end in `\r`; an error reply is a lone BEL (`\x07`) with no `\r`
//! (see [`split_message`]). Frames, with ids and data in hex:
//!
//! ```text
//! t iii L dd..        standard data frame, DLC L 0-8
//! T iiiiiiii L dd..   extended data frame
//! r iii L             standard remote frame
//! R iiiiiiii L        extended remote frame
//! d iii L dd..        CAN FD standard, no bit-rate switch; D: extended
//! b iii L dd..        CAN FD standard, with bit-rate switch; B: extended
//! ```
//!
//! A CAN FD DLC digit 0-F codes 0-8, 12, 16, 20, 24, 32, 48 or 64 bytes. When
//! timestamps are on (`Z1`) the adapter appends 4 hex digits of milliseconds,
//! 0000 to EA5F (59999), after the data; the suffix is told from junk by its
//! length alone: after the data there is nothing or exactly 4 hex digits. So
//! a frame whose data is exactly two bytes longer than its DLC says reads as
//! a frame with a timestamp: the protocol cannot tell them apart.
//!
//! The parser is hand-written and allocates only for [`SlcanMsg::Other`].

pub use super::syntax::FrameSyntaxError;

use super::hex::{HEX, NOT_HEX};
use crate::event::{CanFrame, CanId, DataFrame, FdFrame, RemoteFrame, fd_flags};

/// Longest message accepted, without its `\r`: `B`, 8 id digits, the DLC,
/// 64 data bytes in hex and a 4-digit timestamp.
pub const MAX_MESSAGE: usize = 1 + 8 + 1 + 128 + 4;

/// Largest adapter timestamp: the adapter's millisecond counter wraps at one
/// minute.
pub const MAX_TIMESTAMP_MS: u16 = 0xEA5F;

/// One message from the adapter.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum SlcanMsg {
    /// A received CAN frame, with the adapter's millisecond timestamp when
    /// timestamps are on.
    Frame { frame: CanFrame, adapter_time_ms: Option<u16> },
    /// The command was accepted: an empty message (a bare `\r`).
    Ack,
    /// The command was refused: BEL (`\x07`).
    Nack,
    /// Reply to `F`: the status flags byte (`Fxx`).
    Status(u8),
    /// Any other reply, kept as it came: version `Vhhss` (hardware and
    /// firmware) or `vhhss` (firmware), serial number `Nxxxx`, the `z`/`Z`
    /// acknowledgement of a transmitted frame. A line that begins with any
    /// other letter is not a reply but an error: a line of noise or a
    /// foreign protocol must be counted, not taken for adapter chatter.
    Other(Vec<u8>),
}

const DIGITS: &[u8; 16] = b"0123456789ABCDEF";

/// Bit rates of the `Sn` command, in bit/s, indexed by `n`.
const BITRATES: [u32; 9] = [10_000, 20_000, 50_000, 100_000, 125_000, 250_000, 500_000, 800_000, 1_000_000];

/// What an adapter message may begin with.
const EXPECTED_MESSAGE: &str =
    "a frame letter (t T r R d D b B), a reply (F status, V or v version, N serial, z or Z), BEL or an empty message";

/// An error at the 0-based index `i`.
#[inline(always)]
fn err(i: usize, expected: &'static str) -> FrameSyntaxError {
    FrameSyntaxError::at(i, expected)
}

/// Splits the first complete message off `buf`: returns it without its
/// terminator, and the number of bytes it took. A `\r` ends a message; a BEL
/// is a message by itself (the adapter sends no `\r` after it), and ends any
/// text before it. `None` when `buf` holds no complete message yet.
pub fn split_message(buf: &[u8]) -> Option<(&[u8], usize)> {
    let i = buf.iter().position(|&b| b == b'\r' || b == 0x07)?;
    Some(match buf[i] {
        b'\r' => (&buf[..i], i + 1),
        _ if i == 0 => (&buf[..1], 1),
        _ => (&buf[..i], i),
    })
}

/// Parses one message from the adapter, without its `\r` (a trailing `\r`
/// is tolerated).
pub fn parse(line: &[u8]) -> Result<SlcanMsg, FrameSyntaxError> {
    let line = line.strip_suffix(b"\r").unwrap_or(line);
    if line.len() > MAX_MESSAGE {
        return Err(err(MAX_MESSAGE, "a message of at most 142 bytes"));
    }
    let Some(&first) = line.first() else {
        return Ok(SlcanMsg::Ack);
    };
    match first {
        0x07 if line.len() == 1 => Ok(SlcanMsg::Nack),
        0x07 => Err(err(1, "nothing after BEL")),
        b't' | b'T' | b'r' | b'R' | b'd' | b'D' | b'b' | b'B' => parse_frame(line),
        b'F' => {
            let (hi, lo) = (hex_at(line, 1), hex_at(line, 2));
            if hi == NOT_HEX {
                return Err(err(1, "two hex digits of status flags"));
            }
            if lo == NOT_HEX {
                return Err(err(2, "two hex digits of status flags"));
            }
            if line.len() > 3 {
                return Err(err(3, "the end of the status message"));
            }
            Ok(SlcanMsg::Status((hi << 4) | lo))
        }
        b'z' | b'Z' if line.len() > 1 => Err(err(1, "the end of a transmit acknowledgement (z or Z alone)")),
        b'V' | b'v' | b'N' | b'z' | b'Z' => {
            if let Some(i) = line.iter().position(|b| !(0x20..=0x7E).contains(b)) {
                return Err(err(i, "printable ASCII"));
            }
            Ok(SlcanMsg::Other(line.to_vec()))
        }
        _ => Err(err(0, EXPECTED_MESSAGE)),
    }
}

/// The hex value of `line[i]`, or `NOT_HEX` when it is missing or not hex.
#[inline]
fn hex_at(line: &[u8], i: usize) -> u8 {
    line.get(i).map_or(NOT_HEX, |&c| HEX[c as usize])
}

fn parse_frame(line: &[u8]) -> Result<SlcanMsg, FrameSyntaxError> {
    let letter = line[0];
    let extended = letter.is_ascii_uppercase();
    let remote = matches!(letter, b'r' | b'R');
    let fd = matches!(letter, b'd' | b'D' | b'b' | b'B');
    let brs = matches!(letter, b'b' | b'B');

    let id_digits = if extended { 8 } else { 3 };
    let mut id: u32 = 0;
    for i in 1..=id_digits {
        let v = hex_at(line, i);
        if v == NOT_HEX {
            return Err(err(
                i,
                if extended { "8 hex digits of an extended id" } else { "3 hex digits of a standard id" },
            ));
        }
        id = (id << 4) | u32::from(v);
    }
    let can_id = if extended {
        CanId::extended(id).ok_or(err(1, "an extended id up to 1FFFFFFF"))?
    } else {
        CanId::standard(id).ok_or(err(1, "a standard id up to 7FF"))?
    };

    let mut i = 1 + id_digits;
    let dlc = hex_at(line, i);
    if dlc == NOT_HEX {
        return Err(err(i, if fd { "a DLC digit 0-F" } else { "a DLC digit 0-8" }));
    }
    if !fd && dlc > 8 {
        return Err(err(i, "a DLC digit 0-8"));
    }
    i += 1;

    let len = if remote { 0 } else { FdFrame::LENGTHS[usize::from(dlc)] };
    let mut data = [0u8; 64];
    for byte in data.iter_mut().take(len) {
        let (hi, lo) = (hex_at(line, i), hex_at(line, i + 1));
        if hi == NOT_HEX {
            return Err(err(i, "two hex digits per data byte, as many bytes as the DLC says"));
        }
        if lo == NOT_HEX {
            return Err(err(i + 1, "two hex digits per data byte, as many bytes as the DLC says"));
        }
        *byte = (hi << 4) | lo;
        i += 2;
    }

    let adapter_time_ms = match &line[i..] {
        [] => None,
        rest if rest.len() == 4 => {
            let mut t: u16 = 0;
            for k in 0..4 {
                let v = hex_at(line, i + k);
                if v == NOT_HEX {
                    return Err(err(i + k, "a hex digit of the 4-digit timestamp"));
                }
                t = (t << 4) | u16::from(v);
            }
            if t > MAX_TIMESTAMP_MS {
                return Err(err(i, "a timestamp up to EA5F (59999 ms)"));
            }
            Some(t)
        }
        _ => {
            return Err(err(i, "the end of the message or a 4-digit timestamp after the DLC's data bytes"));
        }
    };

    let data = &data[..len];
    // The shapes were checked above, so the constructors cannot refuse;
    // the error is kept rather than a panic all the same.
    let shape = || err(0, "a frame the DLC can describe");
    let frame = if fd {
        let flags = fd_flags::FDF | if brs { fd_flags::BRS } else { 0 };
        CanFrame::Fd(FdFrame::new(can_id, flags, data).ok_or_else(shape)?)
    } else if remote {
        CanFrame::Remote(RemoteFrame::new(can_id, dlc).ok_or_else(shape)?)
    } else {
        CanFrame::Data(DataFrame::new(can_id, data).ok_or_else(shape)?)
    };
    Ok(SlcanMsg::Frame { frame, adapter_time_ms })
}

/// A bit rate the slcan protocol has no command for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, thiserror::Error)]
#[error(
    "slcan cannot set a bit rate of {0} bit/s; it offers 10000, 20000, 50000, 100000, 125000, 250000, 500000, \
     800000 and 1000000"
)]
pub struct UnknownBitrate(pub u32);

/// The commands that open the channel at `bitrate` bit/s: `C\r` (close, in
/// case it was left open), `Sn\r` with `n` from the standard table (10k=0,
/// 20k=1, 50k=2, 100k=3, 125k=4, 250k=5, 500k=6, 800k=7, 1M=8), then `O\r`.
/// `Err` for a bit rate not in the table.
pub fn open_commands(bitrate: u32) -> Result<Vec<u8>, UnknownBitrate> {
    let n = BITRATES.iter().position(|&b| b == bitrate).ok_or(UnknownBitrate(bitrate))?;
    let mut out = b"C\rS".to_vec();
    out.push(DIGITS[n]);
    out.extend_from_slice(b"\rO\r");
    Ok(out)
}

/// The command that closes the channel: `C\r`.
pub fn close_command() -> &'static [u8] {
    b"C\r"
}

/// Encodes `frame` as the adapter sends it (upper-case hex, no `\r`), with an
/// optional timestamp. For tests and the simulator. `None` for what slcan
/// cannot carry: error frames, remote frames with a DLC above 8, CAN FD
/// frames with the error state indicator (ESI) set, and timestamps above
/// [`MAX_TIMESTAMP_MS`]. An FD frame is written as `b`/`B` when its BRS flag
/// is set, else `d`/`D`; parsing it back sets the FDF flag.
pub fn encode(frame: &CanFrame, adapter_time_ms: Option<u16>) -> Option<String> {
    if adapter_time_ms.is_some_and(|t| t > MAX_TIMESTAMP_MS) {
        return None;
    }
    let (letters, id, dlc, data): (&[u8; 2], CanId, u8, &[u8]) = match frame {
        CanFrame::Data(f) => (b"tT", f.id(), f.data().len() as u8, f.data()),
        CanFrame::Remote(f) if f.dlc() <= 8 => (b"rR", f.id(), f.dlc(), &[]),
        CanFrame::Fd(f) if f.flags() & fd_flags::ESI == 0 => {
            let dlc = FdFrame::LENGTHS.iter().position(|&l| l == f.data().len())? as u8;
            let letters = if f.flags() & fd_flags::BRS != 0 { b"bB" } else { b"dD" };
            (letters, f.id(), dlc, f.data())
        }
        _ => return None,
    };
    let mut s = String::with_capacity(1 + 8 + 1 + 2 * data.len() + 4);
    s.push(char::from(letters[usize::from(id.is_extended())]));
    let push_hex = |s: &mut String, value: u32, digits: u32| {
        for k in (0..digits).rev() {
            s.push(char::from(DIGITS[((value >> (4 * k)) & 0xF) as usize]));
        }
    };
    push_hex(&mut s, id.raw(), if id.is_extended() { 8 } else { 3 });
    push_hex(&mut s, u32::from(dlc), 1);
    for &b in data {
        push_hex(&mut s, u32::from(b), 2);
    }
    if let Some(t) = adapter_time_ms {
        push_hex(&mut s, u32::from(t), 4);
    }
    Some(s)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::event::{ErrorFrame, err_class};

    fn frame(s: &str) -> (CanFrame, Option<u16>) {
        match parse(s.as_bytes()) {
            Ok(SlcanMsg::Frame { frame, adapter_time_ms }) => (frame, adapter_time_ms),
            other => panic!("{s}: {other:?}"),
        }
    }

    fn data(id: CanId, bytes: &[u8]) -> CanFrame {
        CanFrame::Data(DataFrame::new(id, bytes).expect("test frame"))
    }

    fn e(s: &[u8]) -> FrameSyntaxError {
        match parse(s) {
            Err(e) => e,
            other => panic!("{}: expected an error, got {other:?}", String::from_utf8_lossy(s)),
        }
    }

    // Hand-worked from the Lawicel CAN232 manual's frame syntax (t iii L dd..).

    #[test]
    fn classic_frames() {
        assert_eq!(frame("t1230"), (data(CanId::Standard(0x123), &[]), None));
        assert_eq!(frame("t4563112233"), (data(CanId::Standard(0x456), &[0x11, 0x22, 0x33]), None));
        assert_eq!(frame("T12ABCDEF2AA55"), (data(CanId::Extended(0x12AB_CDEF), &[0xAA, 0x55]), None));
        assert_eq!(frame("t7FF8aabbccddeeff0011").0.data(), &[0xAA, 0xBB, 0xCC, 0xDD, 0xEE, 0xFF, 0x00, 0x11]);
        assert_eq!(frame("T1FFFFFFF0").0.id(), Some(CanId::Extended(0x1FFF_FFFF)));
        assert_eq!(frame("T000001230").0.id(), Some(CanId::Extended(0x123)), "8 digits make an extended id");
        match frame("r1230") {
            (CanFrame::Remote(r), None) => assert_eq!((r.id(), r.dlc()), (CanId::Standard(0x123), 0)),
            f => panic!("{f:?}"),
        }
        match frame("R12ABCDEF8") {
            (CanFrame::Remote(r), None) => assert_eq!((r.id(), r.dlc()), (CanId::Extended(0x12AB_CDEF), 8)),
            f => panic!("{f:?}"),
        }
        // A trailing '\r' is tolerated.
        assert_eq!(frame("t1230\r"), frame("t1230"));
    }

    #[test]
    fn timestamps() {
        // 0x1F40 = 8000 ms.
        assert_eq!(frame("t1232AABB1F40"), (data(CanId::Standard(0x123), &[0xAA, 0xBB]), Some(8000)));
        assert_eq!(frame("t12300000").1, Some(0));
        assert_eq!(frame("t1230EA5F").1, Some(59_999));
        assert_eq!(frame("r1234ea5f").1, Some(0xEA5F));
        assert_eq!(frame("R12ABCDEF81234").1, Some(0x1234));
    }

    #[test]
    fn fd_frames() {
        // DLC digit to length: 9 → 12, D → 32, F → 64 (ISO 11898-1 CAN FD table).
        match frame("d1239000102030405060708090A0B") {
            (CanFrame::Fd(f), None) => {
                assert_eq!(f.id(), CanId::Standard(0x123));
                assert_eq!(f.flags(), fd_flags::FDF);
                assert_eq!(f.data(), &[0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11]);
            }
            f => panic!("{f:?}"),
        }
        let f64s = format!("B1ABCDEF0F{}0102", "5A".repeat(64));
        match frame(&f64s) {
            (CanFrame::Fd(f), Some(0x0102)) => {
                assert_eq!(f.id(), CanId::Extended(0x1ABC_DEF0));
                assert_eq!(f.flags(), fd_flags::FDF | fd_flags::BRS);
                assert_eq!(f.data(), &[0x5A; 64]);
            }
            f => panic!("{f:?}"),
        }
        match frame(&format!("D00000001D{}", "00".repeat(32))) {
            (CanFrame::Fd(f), None) => assert_eq!((f.data().len(), f.flags()), (32, fd_flags::FDF)),
            f => panic!("{f:?}"),
        }
        match frame("b7FF0") {
            (CanFrame::Fd(f), None) => assert_eq!((f.data().len(), f.flags() & fd_flags::BRS), (0, fd_flags::BRS)),
            f => panic!("{f:?}"),
        }
    }

    #[test]
    fn replies() {
        assert_eq!(parse(b""), Ok(SlcanMsg::Ack));
        assert_eq!(parse(b"\r"), Ok(SlcanMsg::Ack));
        assert_eq!(parse(b"\x07"), Ok(SlcanMsg::Nack));
        assert_eq!(parse(b"F00"), Ok(SlcanMsg::Status(0)));
        assert_eq!(parse(b"Fa5"), Ok(SlcanMsg::Status(0xA5)));
        assert_eq!(parse(b"V1013"), Ok(SlcanMsg::Other(b"V1013".to_vec())));
        assert_eq!(parse(b"NA123"), Ok(SlcanMsg::Other(b"NA123".to_vec())));
        assert_eq!(parse(b"z"), Ok(SlcanMsg::Other(b"z".to_vec())));
        assert_eq!(parse(b"Z"), Ok(SlcanMsg::Other(b"Z".to_vec())));
        assert_eq!(parse(b"v0101"), Ok(SlcanMsg::Other(b"v0101".to_vec())));
    }

    // Issue 13, item 5: any line that began with a letter was taken for a
    // reply and dropped, so noise on an adapter's port vanished uncounted.
    #[test]
    fn a_line_of_another_letter_is_an_error_not_a_reply() {
        for line in [&b"hello world"[..], b"Q", b"OK", b"xyz", b"ERROR"] {
            assert_eq!(parse(line), Err(FrameSyntaxError { column: 1, expected: EXPECTED_MESSAGE }));
        }
        let transmit = "the end of a transmit acknowledgement (z or Z alone)";
        assert_eq!(parse(b"ZZZZ"), Err(FrameSyntaxError { column: 2, expected: transmit }));
    }

    #[test]
    fn split_messages() {
        let buf = b"t1230\r\x07z\rt45";
        let (m, n) = split_message(buf).unwrap();
        assert_eq!((m, n), (&b"t1230"[..], 6));
        let (m, n2) = split_message(&buf[n..]).unwrap();
        assert_eq!((m, n2), (&b"\x07"[..], 1));
        let (m, n3) = split_message(&buf[n + n2..]).unwrap();
        assert_eq!((m, n3), (&b"z"[..], 2));
        assert_eq!(split_message(&buf[n + n2 + n3..]), None);
        assert_eq!(split_message(b"\r"), Some((&b""[..], 1)));
        // Text cut short by a BEL is a message of its own.
        assert_eq!(split_message(b"t12\x07"), Some((&b"t12"[..], 3)));
    }

    #[test]
    fn errors_say_where_and_what() {
        assert_eq!(e(b"t1239"), FrameSyntaxError { column: 5, expected: "a DLC digit 0-8" });
        assert_eq!(e(b"r123A"), FrameSyntaxError { column: 5, expected: "a DLC digit 0-8" });
        assert_eq!(e(b"T1234567890"), FrameSyntaxError { column: 10, expected: "a DLC digit 0-8" });
        assert_eq!(e(b"t123"), FrameSyntaxError { column: 5, expected: "a DLC digit 0-8" });
        assert_eq!(e(b"d123"), FrameSyntaxError { column: 5, expected: "a DLC digit 0-F" });
        assert_eq!(e(b"t12G0"), FrameSyntaxError { column: 4, expected: "3 hex digits of a standard id" });
        assert_eq!(e(b"T1230"), FrameSyntaxError { column: 6, expected: "8 hex digits of an extended id" });
        assert_eq!(e(b"t8000"), FrameSyntaxError { column: 2, expected: "a standard id up to 7FF" });
        assert_eq!(e(b"T200000000"), FrameSyntaxError { column: 2, expected: "an extended id up to 1FFFFFFF" });
        // Odd hex: the last byte has one digit.
        let odd =
            FrameSyntaxError { column: 9, expected: "two hex digits per data byte, as many bytes as the DLC says" };
        assert_eq!(e(b"t1232"), FrameSyntaxError { column: 6, ..odd });
        assert_eq!(e(b"t12321"), FrameSyntaxError { column: 7, ..odd });
        assert_eq!(e(b"t1232112"), odd);
        assert_eq!(e(b"t123211X2"), FrameSyntaxError { column: 8, ..odd });
        // Data longer than the DLC says (by one byte, or three).
        let long = "the end of the message or a 4-digit timestamp after the DLC's data bytes";
        assert_eq!(e(b"t12311122"), FrameSyntaxError { column: 8, expected: long });
        assert_eq!(e(b"t12321122334455"), FrameSyntaxError { column: 10, expected: long });
        // Trailing junk.
        assert_eq!(e(b"t1230 "), FrameSyntaxError { column: 6, expected: long });
        assert_eq!(e(b"t1230xyzw"), FrameSyntaxError { column: 6, expected: "a hex digit of the 4-digit timestamp" });
        assert_eq!(e(b"t1230EA60"), FrameSyntaxError { column: 6, expected: "a timestamp up to EA5F (59999 ms)" });
        assert_eq!(e(b"F0"), FrameSyntaxError { column: 3, expected: "two hex digits of status flags" });
        assert_eq!(e(b"F000"), FrameSyntaxError { column: 4, expected: "the end of the status message" });
        assert_eq!(e(b"\x07t"), FrameSyntaxError { column: 2, expected: "nothing after BEL" });
        assert_eq!(e(b"V10\x0013").column, 4);
        assert_eq!(e(b"\xFFt1230").column, 1);
        assert_eq!(e(&[b'B'; 200]).column, 143);
        assert_eq!(e(b"t8000").to_string(), "column 2: expected a standard id up to 7FF");
    }

    #[test]
    fn open_and_close_commands() {
        assert_eq!(open_commands(500_000).unwrap(), b"C\rS6\rO\r");
        assert_eq!(open_commands(10_000).unwrap(), b"C\rS0\rO\r");
        assert_eq!(open_commands(1_000_000).unwrap(), b"C\rS8\rO\r");
        assert!(open_commands(83_333).unwrap_err().to_string().contains("83333"));
        assert!(open_commands(0).is_err());
        assert_eq!(close_command(), b"C\r");
    }

    #[test]
    fn encode_examples() {
        assert_eq!(encode(&data(CanId::Standard(0x456), &[0x11, 0x22, 0x33]), None).unwrap(), "t4563112233");
        assert_eq!(encode(&data(CanId::Standard(0x123), &[0xAA, 0xBB]), Some(8000)).unwrap(), "t1232AABB1F40");
        assert_eq!(encode(&data(CanId::Extended(0x12AB_CDEF), &[0xAA, 0x55]), None).unwrap(), "T12ABCDEF2AA55");
        let remote = CanFrame::Remote(RemoteFrame::new(CanId::Extended(0x12AB_CDEF), 8).unwrap());
        assert_eq!(encode(&remote, None).unwrap(), "R12ABCDEF8");
        let fd = CanFrame::Fd(FdFrame::new(CanId::Standard(0x7FF), fd_flags::BRS, &[0; 12]).unwrap());
        assert_eq!(encode(&fd, None).unwrap(), format!("b7FF9{}", "00".repeat(12)));
        // What slcan cannot carry.
        let error = CanFrame::Error(ErrorFrame::new(err_class::BUS_OFF, &[0; 8]).unwrap());
        assert_eq!(encode(&error, None), None);
        let esi = CanFrame::Fd(FdFrame::new(CanId::Standard(1), fd_flags::FDF | fd_flags::ESI, &[]).unwrap());
        assert_eq!(encode(&esi, None), None);
        let remote15 = CanFrame::Remote(RemoteFrame::new(CanId::Standard(1), 15).unwrap());
        assert_eq!(encode(&remote15, None), None);
        assert_eq!(encode(&data(CanId::Standard(1), &[]), Some(0xEA60)), None);
    }

    /// A small xorshift generator for reproducible random tests.
    fn xorshift(state: &mut u64) -> u64 {
        *state ^= *state << 13;
        *state ^= *state >> 7;
        *state ^= *state << 17;
        *state
    }

    fn random_frame(rng: &mut u64) -> CanFrame {
        let r = xorshift(rng);
        let id = if r & 1 == 0 {
            CanId::Standard((xorshift(rng) % 0x800) as u16)
        } else {
            CanId::Extended((xorshift(rng) % 0x2000_0000) as u32)
        };
        let mut bytes = [0u8; 64];
        for b in bytes.iter_mut() {
            *b = xorshift(rng) as u8;
        }
        match (r >> 1) % 3 {
            0 => data(id, &bytes[..(xorshift(rng) % 9) as usize]),
            1 => CanFrame::Remote(RemoteFrame::new(id, (xorshift(rng) % 9) as u8).unwrap()),
            _ => {
                let len = FdFrame::LENGTHS[(xorshift(rng) % 16) as usize];
                let flags = fd_flags::FDF | if xorshift(rng) & 1 == 0 { fd_flags::BRS } else { 0 };
                CanFrame::Fd(FdFrame::new(id, flags, &bytes[..len]).unwrap())
            }
        }
    }

    #[test]
    fn encode_parse_round_trip() {
        let mut rng = 0x2545_F491_4F6C_DD1Du64;
        for _ in 0..20_000 {
            let f = random_frame(&mut rng);
            let t = match xorshift(&mut rng) % 3 {
                0 => None,
                _ => Some((xorshift(&mut rng) % (u64::from(MAX_TIMESTAMP_MS) + 1)) as u16),
            };
            let s = encode(&f, t).expect("encodable");
            assert_eq!(parse(s.as_bytes()), Ok(SlcanMsg::Frame { frame: f, adapter_time_ms: t }), "{s}");
            // Lower-case hex parses the same (some adapters send it).
            let lower = format!("{}{}", &s[..1], s[1..].to_ascii_lowercase());
            assert_eq!(parse(lower.as_bytes()), Ok(SlcanMsg::Frame { frame: f, adapter_time_ms: t }), "{lower}");
        }
    }

    #[test]
    fn never_panics() {
        let mut samples: Vec<String> =
            ["t1230", "t4563112233", "T12ABCDEF2AA55", "r1230", "R12ABCDEF8", "t1232AABB1F40"]
                .iter()
                .map(|s| s.to_string())
                .collect();
        samples.push(format!("B1ABCDEF0F{}0102", "5A".repeat(64)));
        samples.extend(["F0A", "V1013", "\x07", ""].iter().map(|s| s.to_string()));
        let mut rng = 0x9E37_79B9_7F4A_7C15u64;
        for s in &samples {
            let b = s.as_bytes();
            for end in 0..=b.len() {
                let _ = parse(&b[..end]);
                let _ = split_message(&b[..end]);
            }
            for _ in 0..2000 {
                let mut m = b.to_vec();
                if m.is_empty() {
                    break;
                }
                let i = (xorshift(&mut rng) % m.len() as u64) as usize;
                m[i] = xorshift(&mut rng) as u8;
                let _ = parse(&m);
            }
        }
        for _ in 0..20_000 {
            let len = (xorshift(&mut rng) % 160) as usize;
            let mut m: Vec<u8> = (0..len).map(|_| xorshift(&mut rng) as u8).collect();
            if let Some(c) = m.first_mut() {
                *c = b"tTrRdDbBFV"[(*c % 10) as usize];
            }
            let _ = parse(&m);
            let _ = split_message(&m);
        }
    }
}
