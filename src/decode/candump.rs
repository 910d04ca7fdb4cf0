//! The Linux can-utils `candump -L` log line: `(SECONDS.FRACTION) IFACE FRAME`.
//!
//! Frame syntax (can-utils `lib.c`, confirmed against logs in
//! notes/crates.md): the id's width decides its type (3 hex digits standard,
//! 8 extended; an 8-digit id with 0x20000000 set is an error frame); `#`
//! then 0 to 8 data bytes; `#R` or `#R<len>` a remote frame; `##<flags>`
//! then 0 to 64 bytes for CAN FD. Data bytes may be separated by `.`; an
//! optional ` R`/` T` direction follows the frame.
//!
//! The parser is hand-written and allocation-free: it is the hot path of a
//! replay and of a report on an hour-long log.

pub use super::syntax::FrameSyntaxError;

use super::hex::{HEX, NOT_HEX};
use crate::event::{CanFrame, CanId, DataFrame, ErrorFrame, FdFrame, RemoteFrame, TimeNs, err_class};

/// Longest line accepted: a 64-byte FD frame with dots and a long interface
/// name fits easily; anything longer is corrupt.
pub const MAX_LINE: usize = 512;

/// Longest interface name accepted, in bytes. Linux names are at most 15
/// bytes; a recording's source names are at most 64 before escaping, 256
/// after. The bound keeps the reader able to read whatever the writer makes
/// of an accepted line: [`write_line`] may lengthen the time (`(1.5)` is
/// written `(1.500000)`), and the longest line it can write, the widest time
/// and an FD frame of 64 bytes after this name, still fits in [`MAX_LINE`].
pub const MAX_IFACE: usize = 256;

/// The longest line [`write_line`] writes (newline not counted): the widest
/// time `(SSSSSSSSSS.NNNNNNNNN)`, a space, the name, a space, and an FD frame
/// `IIIIIIII##F` with 64 data bytes in hex.
pub const MAX_WRITTEN_LINE: usize = 22 + 1 + MAX_IFACE + 1 + (8 + 3 + 2 * 64);
const _: () = assert!(MAX_WRITTEN_LINE <= MAX_LINE);

/// A parsed log line; the interface borrows from the input.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CandumpLine<'a> {
    pub t_ns: TimeNs,
    pub iface: &'a str,
    pub frame: CanFrame,
}

/// Eight ASCII decimal digits at `b[..8]` as a number, or `None` if any byte
/// is not a digit (SWAR: the classic multiply-and-fold, Lemire's "fast
/// integer parsing" technique).
#[inline(always)]
fn eight_digits(b: &[u8]) -> Option<u64> {
    let c = u64::from_le_bytes(b.get(..8)?.try_into().ok()?);
    let d = c.wrapping_sub(0x3030_3030_3030_3030);
    // Every byte must be 0..=9: no borrow (high bit clear) and d + 6 < 16.
    if (d | d.wrapping_add(0x0606_0606_0606_0606)) & 0xF0F0_F0F0_F0F0_F0F0 != 0 || c & 0x8080_8080_8080_8080 != 0 {
        return None;
    }
    let d = (d.wrapping_mul(10) + (d >> 8)) & 0x00FF_00FF_00FF_00FF;
    let d = (d.wrapping_mul(100) + (d >> 16)) & 0x0000_FFFF_0000_FFFF;
    Some((d.wrapping_mul(10_000) + (d >> 32)) & 0xFFFF_FFFF)
}

/// Per-byte "in [lo, hi]" for bytes below 0x80: the high bit of each byte
/// of the result says so.
#[inline(always)]
fn in_range(x: u64, lo: u8, hi: u8) -> u64 {
    let ones = 0x0101_0101_0101_0101u64;
    let ge = x.wrapping_add(ones * (0x80 - lo) as u64);
    let gt = x.wrapping_add(ones * (0x80 - hi - 1) as u64);
    ge & !gt & 0x8080_8080_8080_8080
}

/// Eight ASCII hex digits at `b[..8]` as four bytes, or `None` if any is
/// not a hex digit (SWAR).
#[inline(always)]
fn eight_hex(b: &[u8]) -> Option<[u8; 4]> {
    let c = u64::from_le_bytes(b.get(..8)?.try_into().ok()?);
    if c & 0x8080_8080_8080_8080 != 0 {
        return None;
    }
    // Digits are checked on the bytes as they are; letters after folding
    // A-F to a-f (folding first would also turn 0x10..0x19 into digits).
    let x = c | 0x2020_2020_2020_2020;
    if in_range(c, b'0', b'9') | in_range(x, b'a', b'f') != 0x8080_8080_8080_8080 {
        return None;
    }
    // Nibble = low four bits, plus 9 for letters (bit 6 set).
    let n = (x & 0x0F0F_0F0F_0F0F_0F0F) + ((x >> 6) & 0x0101_0101_0101_0101) * 9;
    let m = ((n << 4) | (n >> 8)) & 0x00FF_00FF_00FF_00FF;
    let m = (m | (m >> 8)) & 0x0000_FFFF_0000_FFFF;
    let m = (m | (m >> 16)) & 0xFFFF_FFFF;
    Some((m as u32).to_le_bytes())
}

#[inline(always)]
fn err(column: usize, expected: &'static str) -> FrameSyntaxError {
    FrameSyntaxError::at(column, expected)
}

/// Parses the timestamp of `(SECONDS.FRACTION)` starting at `line[0] == '('`.
/// Returns the time and the index after `)`.
#[inline]
pub fn parse_time(line: &[u8]) -> Result<(TimeNs, usize), FrameSyntaxError> {
    if line.first() != Some(&b'(') {
        return Err(err(0, "'(' opening the timestamp"));
    }
    parse_time_between(line, b')')
}

/// Parses `?SECONDS.FRACTION<close>` where `line[0]` is any opening byte
/// (the recording format uses `[...]` for events that are not CAN frames).
#[inline]
pub fn parse_time_between(line: &[u8], close: u8) -> Result<(TimeNs, usize), FrameSyntaxError> {
    // Fast path for the common `(SSSSSSSSSS.UUUUUU)`: 10 digits of seconds,
    // 6 of microseconds, read eight at a time.
    if line.len() >= 19 && line[11] == b'.' && line[18] == close {
        let frac = [b'0', b'0', line[12], line[13], line[14], line[15], line[16], line[17]];
        if let (Some(hi), Some(us)) = (eight_digits(&line[1..9]), eight_digits(&frac))
            && line[9].is_ascii_digit()
            && line[10].is_ascii_digit()
        {
            let secs = hi * 100 + (line[9] - b'0') as u64 * 10 + (line[10] - b'0') as u64;
            if secs <= (i64::MAX / 1_000_000_000 - 1) as u64 {
                return Ok((secs as i64 * 1_000_000_000 + us as i64 * 1000, 19));
            }
        }
    }
    let mut i = 1;
    let mut secs: i64 = 0;
    let start = i;
    while i < line.len() && line[i].is_ascii_digit() {
        if i - start >= 10 {
            return Err(err(i, "at most 10 digits of seconds"));
        }
        secs = secs * 10 + (line[i] - b'0') as i64;
        i += 1;
    }
    if i == start {
        return Err(err(i, "digits of seconds"));
    }
    if line.get(i) != Some(&b'.') {
        return Err(err(i, "'.' between seconds and fraction"));
    }
    i += 1;
    let fstart = i;
    let mut frac: i64 = 0;
    while i < line.len() && line[i].is_ascii_digit() {
        if i - fstart >= 9 {
            return Err(err(i, "at most 9 digits of fraction"));
        }
        frac = frac * 10 + (line[i] - b'0') as i64;
        i += 1;
    }
    let digits = i - fstart;
    if digits == 0 {
        return Err(err(i, "digits of fraction"));
    }
    if line.get(i) != Some(&close) {
        return Err(err(i, if close == b')' { "')' closing the timestamp" } else { "']' closing the timestamp" }));
    }
    const POW: [i64; 10] = [1_000_000_000, 100_000_000, 10_000_000, 1_000_000, 100_000, 10_000, 1000, 100, 10, 1];
    if secs > i64::MAX / 1_000_000_000 - 1 {
        return Err(err(1, "seconds within the year 2262"));
    }
    Ok((secs * 1_000_000_000 + frac * POW[digits], i + 1))
}

/// Parses one log line (without its line ending).
pub fn parse_line(line: &[u8]) -> Result<CandumpLine<'_>, FrameSyntaxError> {
    let (t_ns, iface, frame) = parse_line_bytes(line)?;
    let iface = std::str::from_utf8(iface)
        .map_err(|_| err(line.iter().position(|b| *b == b' ').unwrap_or(0) + 1, "an interface name in UTF-8"))?;
    Ok(CandumpLine { t_ns, iface, frame })
}

/// [`parse_line`] with the interface name left as bytes (the reader
/// compares them with the previous line's before paying for validation).
pub fn parse_line_bytes(line: &[u8]) -> Result<(TimeNs, &[u8], CanFrame), FrameSyntaxError> {
    if line.len() > MAX_LINE {
        return Err(err(MAX_LINE, "a line of at most 512 bytes"));
    }
    let (t_ns, mut i) = parse_time(line)?;
    if line.get(i) != Some(&b' ') {
        return Err(err(i, "a space after the timestamp"));
    }
    i += 1;
    let istart = i;
    while i < line.len() && line[i] != b' ' {
        i += 1;
    }
    if i == istart {
        return Err(err(i, "an interface name"));
    }
    if i - istart > MAX_IFACE {
        return Err(err(istart + MAX_IFACE, "an interface name of at most 256 bytes"));
    }
    let iface = &line[istart..i];
    if line.get(i) != Some(&b' ') {
        return Err(err(i, "a space after the interface name"));
    }
    i += 1;
    let (frame, end) = parse_frame_at(line, i)?;
    // Optional direction flag, then nothing.
    let rest = &line[end..];
    match rest {
        [] | [b' ', b'R'] | [b' ', b'T'] => {}
        _ if rest.iter().all(|b| *b == b' ' || *b == b'\t' || *b == b'\r') => {}
        _ => return Err(err(end, "the end of the line (or ' R' / ' T') after the frame")),
    }
    Ok((t_ns, iface, frame))
}

/// Parses a frame in candump syntax starting at `line[i]`; returns the frame
/// and the index after it.
#[inline]
pub fn parse_frame_at(line: &[u8], mut i: usize) -> Result<(CanFrame, usize), FrameSyntaxError> {
    let id_start = i;
    let mut id: u32 = 0;
    while i < line.len() {
        let v = HEX[line[i] as usize];
        if v == NOT_HEX {
            break;
        }
        id = (id << 4) | v as u32;
        i += 1;
        if i - id_start > 8 {
            return Err(err(i, "an id of 3 or 8 hex digits"));
        }
    }
    let id_len = i - id_start;
    if line.get(i) != Some(&b'#') {
        return Err(err(i, if id_len == 0 { "a hex CAN id" } else { "'#' after the id" }));
    }
    i += 1;
    let extended = match id_len {
        3 => false,
        8 => true,
        _ => return Err(err(id_start, "an id of 3 hex digits (standard) or 8 (extended)")),
    };
    if !extended && id > CanId::STANDARD_MAX {
        return Err(err(id_start, "a standard id up to 7FF"));
    }
    let is_error = extended && id & err_class::ERR_FLAG != 0;
    if extended && id & !(CanId::EXTENDED_MAX | err_class::ERR_FLAG) != 0 {
        return Err(err(id_start, "an extended id up to 1FFFFFFF (or an error frame with bit 20000000)"));
    }
    let can_id = if extended { CanId::Extended(id & CanId::EXTENDED_MAX) } else { CanId::Standard(id as u16) };

    match line.get(i) {
        Some(b'R') | Some(b'r') => {
            i += 1;
            let mut dlc = 0u8;
            if let Some(&c) = line.get(i)
                && HEX[c as usize] != NOT_HEX
            {
                dlc = HEX[c as usize];
                if dlc > 8 {
                    return Err(err(i, "a remote length from 0 to 8"));
                }
                i += 1;
                // Linux `len8_dlc` on a remote frame: `R8_<dlc>`.
                if dlc == 8 && line.get(i) == Some(&b'_') {
                    match line.get(i + 1).map(|c| HEX[*c as usize]) {
                        Some(d) if d != NOT_HEX => i += 2,
                        _ => return Err(err(i + 1, "a hex DLC digit after '_'")),
                    }
                }
            }
            if is_error {
                return Err(err(id_start, "an error frame with data, not a remote request"));
            }
            Ok((CanFrame::Remote(RemoteFrame::new(can_id, dlc).expect("at most 8")), i))
        }
        Some(b'#') => {
            i += 1;
            let flags = match line.get(i).map(|c| HEX[*c as usize]) {
                Some(v) if v != NOT_HEX => v,
                _ => return Err(err(i, "a hex flags digit after '##'")),
            };
            i += 1;
            let mut data = [0u8; 64];
            let (n, end) = parse_data(line, i, &mut data, 64)?;
            if is_error {
                return Err(err(id_start, "an error frame in classic syntax"));
            }
            match FdFrame::new(can_id, flags, &data[..n]) {
                Some(f) => Ok((CanFrame::Fd(f), end)),
                None => Err(err(i, "a CAN FD length: 0-8, 12, 16, 20, 24, 32, 48 or 64 bytes")),
            }
        }
        _ => {
            let mut data = [0u8; 8];
            let (n, mut end) = parse_data(line, i, &mut data, 8)?;
            // Linux `len8_dlc`: `_<dlc>` after 8 bytes; the payload is what counts.
            if line.get(end) == Some(&b'_') && n == 8 {
                if line.get(end + 1).is_some_and(|c| HEX[*c as usize] != NOT_HEX) {
                    end += 2;
                } else {
                    return Err(err(end + 1, "a hex DLC digit after '_'"));
                }
            }
            let frame = if is_error {
                CanFrame::Error(ErrorFrame::new(id & CanId::EXTENDED_MAX, &data[..n]).expect("checked"))
            } else {
                CanFrame::Data(DataFrame::new(can_id, &data[..n]).expect("at most 8"))
            };
            Ok((frame, end))
        }
    }
}

/// Hex byte pairs, optionally separated by '.', into `out`; at most `max`.
#[inline(always)]
fn parse_data<const N: usize>(
    line: &[u8],
    mut i: usize,
    out: &mut [u8; N],
    max: usize,
) -> Result<(usize, usize), FrameSyntaxError> {
    let mut n = 0;
    // Fast path: eight hex digits at a time while they last.
    while n + 4 <= max
        && let Some(b) = line.get(i..i + 8).and_then(eight_hex)
    {
        out[n..n + 4].copy_from_slice(&b);
        n += 4;
        i += 8;
    }
    while i < line.len() {
        let c = line[i];
        // One '.' may separate two bytes (can-utils' own rule).
        if c == b'.' && n > 0 && line.get(i + 1).is_some_and(|d| HEX[*d as usize] != NOT_HEX) {
            i += 1;
            continue;
        }
        let hi = HEX[c as usize];
        if hi == NOT_HEX {
            break;
        }
        let lo = match line.get(i + 1) {
            Some(&d) if HEX[d as usize] != NOT_HEX => HEX[d as usize],
            _ => return Err(err(i + 1, "two hex digits per data byte")),
        };
        if n == max {
            return Err(err(
                i,
                if max == 8 { "at most 8 data bytes in a classic frame" } else { "at most 64 data bytes" },
            ));
        }
        out[n] = hi << 4 | lo;
        n += 1;
        i += 2;
    }
    Ok((n, i))
}

/// Appends `(SECONDS.FRACTION)`: six fraction digits when the time is whole
/// microseconds (as candump writes), nine otherwise, so no time is rounded.
pub fn write_time(out: &mut Vec<u8>, t_ns: TimeNs) {
    use std::io::Write;
    let secs = t_ns.div_euclid(1_000_000_000);
    let ns = t_ns.rem_euclid(1_000_000_000);
    if ns % 1000 == 0 {
        let _ = write!(out, "({}.{:06})", secs, ns / 1000);
    } else {
        let _ = write!(out, "({secs}.{ns:09})");
    }
}

/// Appends the frame in candump syntax (no line ending).
pub fn write_frame(out: &mut Vec<u8>, frame: &CanFrame) {
    use std::io::Write;
    const DIGITS: &[u8; 16] = b"0123456789ABCDEF";
    let hex = |out: &mut Vec<u8>, data: &[u8]| {
        for b in data {
            out.push(DIGITS[(b >> 4) as usize]);
            out.push(DIGITS[(b & 15) as usize]);
        }
    };
    match frame {
        CanFrame::Data(f) => {
            let _ = write!(out, "{}#", f.id());
            hex(out, f.data());
        }
        CanFrame::Remote(f) => {
            let _ = write!(out, "{}#R", f.id());
            if f.dlc() > 0 {
                out.push(DIGITS[f.dlc() as usize]);
            }
        }
        CanFrame::Error(f) => {
            let _ = write!(out, "{:08X}#", f.class() | err_class::ERR_FLAG);
            hex(out, f.data());
        }
        CanFrame::Fd(f) => {
            let _ = write!(out, "{}##{:X}", f.id(), f.flags());
            hex(out, f.data());
        }
    }
}

/// Appends a whole log line: time, interface, frame, newline.
pub fn write_line(out: &mut Vec<u8>, t_ns: TimeNs, iface: &str, frame: &CanFrame) {
    write_time(out, t_ns);
    out.push(b' ');
    out.extend_from_slice(iface.as_bytes());
    out.push(b' ');
    write_frame(out, frame);
    out.push(b'\n');
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ok(s: &str) -> CandumpLine<'_> {
        parse_line(s.as_bytes()).unwrap_or_else(|e| panic!("{s}: {e}"))
    }

    #[test]
    fn a_line_read_is_a_line_written_that_reads_back() {
        // Found by the candump fuzz target in CI: a line of 511 bytes with a
        // short time `(1.0)` and a 500-byte interface name was accepted, and
        // written back as `(1.000000) ...` it was 516 bytes, which the
        // reader refuses. Long names are now refused where they are read.
        let long = format!("(1.0) {} 123#", "a".repeat(500));
        assert!(long.len() <= MAX_LINE);
        let e = parse_line(long.as_bytes()).unwrap_err();
        // Column of the first byte past the bound (the name starts at 7).
        assert_eq!(e.column, 7 + MAX_IFACE, "{e}");
        assert!(e.to_string().contains("interface name of at most 256 bytes"), "{e}");

        // The longest accepted name with the shortest time and the widest
        // frame: written back, it is read back the same.
        let name = "n".repeat(MAX_IFACE);
        let fd = "AB".repeat(64);
        for frame in ["123#", &format!("1FFFFFFF##F{fd}"), "1FFFFFFF#R8"] {
            let src = format!("(1.1) {name} {frame}");
            let l = ok(&src);
            let mut out = Vec::new();
            write_line(&mut out, 9_223_372_035_123_456_789, l.iface, &l.frame);
            let written = out.strip_suffix(b"\n").unwrap();
            assert!(written.len() <= MAX_WRITTEN_LINE, "{}", written.len());
            let back = parse_line(written).unwrap_or_else(|e| panic!("{frame}: {e}"));
            assert_eq!((back.iface, back.frame), (l.iface, l.frame));
        }
    }

    #[test]
    fn reference_line() {
        // REFERENCES.md, the candump log format example.
        let l = ok("(1436509052.249713) can0 044#2A366C2BBA");
        assert_eq!(l.t_ns, 1_436_509_052_249_713_000);
        assert_eq!(l.iface, "can0");
        assert_eq!(l.frame.id(), Some(CanId::Standard(0x44)));
        assert_eq!(l.frame.data(), &[0x2A, 0x36, 0x6C, 0x2B, 0xBA]);
    }

    #[test]
    fn every_frame_kind() {
        // Id width decides the type (notes/crates.md): 00000123 is extended.
        assert_eq!(ok("(1.0) can0 00000123#").frame.id(), Some(CanId::Extended(0x123)));
        match ok("(1.5) can0 123#R").frame {
            CanFrame::Remote(r) => assert_eq!((r.id(), r.dlc()), (CanId::Standard(0x123), 0)),
            f => panic!("{f:?}"),
        }
        match ok("(1.5) can0 123#R4").frame {
            CanFrame::Remote(r) => assert_eq!(r.dlc(), 4),
            f => panic!("{f:?}"),
        }
        match ok("(1.5) can0 123##1112233").frame {
            CanFrame::Fd(f) => assert_eq!((f.flags(), f.data()), (1, &[0x11u8, 0x22, 0x33][..])),
            f => panic!("{f:?}"),
        }
        match ok("(1.5) can0 20000040#0000000000000000").frame {
            CanFrame::Error(e) => assert!(e.is_bus_off()),
            f => panic!("{f:?}"),
        }
        assert_eq!(ok("(1.5) can0 123#11.22.33").frame.data(), &[0x11, 0x22, 0x33]);
        assert_eq!(ok("(1.5) can0 123#11 R").frame.data(), &[0x11]);
        assert_eq!(ok("(1.5) can0 123#1122334455667788_C").frame.data().len(), 8);
        match ok("(1.5) can0 123#R8_C").frame {
            CanFrame::Remote(r) => assert_eq!(r.dlc(), 8),
            f => panic!("{f:?}"),
        }
        assert!(matches!(ok("(1.5) can0 123#r").frame, CanFrame::Remote(_)));
    }

    #[test]
    fn fraction_digits_scale() {
        assert_eq!(ok("(5.1) c 123#").t_ns, 5_100_000_000);
        assert_eq!(ok("(5.000000001) c 123#").t_ns, 5_000_000_001);
    }

    #[test]
    fn errors_say_where_and_what() {
        let e = |s: &str| parse_line(s.as_bytes()).unwrap_err();
        assert_eq!(
            e("1436509052.249713) can0 044#00"),
            FrameSyntaxError { column: 1, expected: "'(' opening the timestamp" }
        );
        assert_eq!(e("(1.0) can0 0444#00").column, 12);
        assert_eq!(e("(1.0) can0 800#00").expected, "a standard id up to 7FF");
        assert_eq!(e("(1.0) can0 123#112233445566778899").expected, "at most 8 data bytes in a classic frame");
        assert_eq!(e("(1.0) can0 123#1").expected, "two hex digits per data byte");
        assert_eq!(
            e("(1.0) can0 123##0112233445566778899").expected,
            "a CAN FD length: 0-8, 12, 16, 20, 24, 32, 48 or 64 bytes"
        );
        assert_eq!(e("(1.0) can0 123#00 junk").expected, "the end of the line (or ' R' / ' T') after the frame");
        assert_eq!(e("(99999999999.0) c 123#").expected, "at most 10 digits of seconds");
        assert_eq!(e("(1.0)").expected, "a space after the timestamp");
        assert_eq!(e("(1.0) c 123#R9").expected, "a remote length from 0 to 8");
        assert_eq!(e("(1.0) c 123#11..22").column, 15, "one separator between bytes");
        assert_eq!(e("(1.0) c 123#.11").column, 13);
    }

    #[test]
    fn swar_helpers_agree_with_bytewise_parsing() {
        assert_eq!(eight_digits(b"12345678"), Some(12_345_678));
        assert_eq!(eight_digits(b"00000009"), Some(9));
        for bad in [b"1234567a", b"1234/678", b"12:45678", b" 2345678"] {
            assert_eq!(eight_digits(bad), None, "{}", String::from_utf8_lossy(bad));
        }
        assert_eq!(eight_hex(b"0123ABef"), Some([0x01, 0x23, 0xAB, 0xEF]));
        assert_eq!(eight_hex(b"ffFF0000"), Some([0xFF, 0xFF, 0, 0]));
        for bad in [b"0123ABeg", b"0123AB:F", b"0123AB@F", b"0123AB`F", b"0123AB/F", b"0123AB\xC3F"] {
            assert_eq!(eight_hex(bad), None, "{}", String::from_utf8_lossy(bad));
        }
        // Every byte value in every position: the SWAR check agrees with the table.
        for pos in 0..8 {
            for b in 0..=255u8 {
                let mut s = *b"00000000";
                s[pos] = b;
                assert_eq!(eight_hex(&s).is_some(), HEX[b as usize] != NOT_HEX, "byte {b:#x} at {pos}");
                assert_eq!(eight_digits(&s).is_some(), b.is_ascii_digit(), "byte {b:#x} at {pos}");
            }
        }
    }

    #[test]
    fn write_then_parse_round_trips() {
        let frames = [
            "(1436509052.249713) can0 044#2A366C2BBA",
            "(1.000000) vcan1 1FFFFFFF#",
            "(2.123456789) can0 7FF#R8",
            "(3.000000) can0 12345678##5000102030405060708090A0B",
            "(4.000000) can0 20000004#0010000000000000",
        ];
        for s in frames {
            let l = ok(s);
            let mut out = Vec::new();
            write_line(&mut out, l.t_ns, l.iface, &l.frame);
            assert_eq!(std::str::from_utf8(&out).unwrap().trim_end(), s);
        }
    }
}
