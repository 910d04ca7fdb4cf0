//! termvel's own `key=value` line telemetry protocol, for small loggers and
//! microcontrollers that send a few channels over a serial line.
//!
//! The format is termvel's design; the checksum is CRC-8/SMBUS (poly 0x07,
//! init 0x00, no reflection, no final XOR; check value 0xF4 for ASCII
//! `123456789`, Greg Cook's "Catalogue of parametrised CRC algorithms").
//!
//! ```text
//! line   := field (' ' field)* ' #' CC ['\r']
//! field  := key '=' number | key '[' unit ']' '=' number
//! key    := channel name: dot-separated parts of ASCII letters, digits and '_'
//!           (vehicle.speed, battery.temp, tyre.fl.pressure), at most 64 bytes
//! number := a decimal float as Rust's f64 parser accepts (42, -0.5, 1e-3),
//!           but not nan or inf
//! unit   := a unit string (km/h, kPa, %), passed through unchanged for the
//!           caller to resolve: any UTF-8 text without spaces, control
//!           characters, '[', ']', '=' or '#'
//! CC     := two hex digits (either case): CRC-8/SMBUS of every byte before
//!           the " #", that is of the fields and the single spaces between
//!           them, not of the space before '#'
//! ```
//!
//! Fields are separated by single spaces. A line is at most 256 bytes (not
//! counting its `\r`); the checksum is required. The same key may appear
//! twice: the caller decides what that means. Example:
//!
//! ```text
//! vehicle.speed=83.21 battery.temp=41.5 #A5
//! ```
//!
//! A sender in Python:
//!
//! ```python
//! def crc8(data: bytes) -> int:  # CRC-8/SMBUS: poly 0x07, init 0, no reflection
//!     crc = 0
//!     for b in data:
//!         crc ^= b
//!         for _ in range(8):
//!             crc = ((crc << 1) ^ 0x07) & 0xFF if crc & 0x80 else (crc << 1) & 0xFF
//!     return crc
//!
//! fields = "vehicle.speed[km/h]=83.21 battery.temp=41.5"
//! print(f"{fields} #{crc8(fields.encode()):02X}")
//! ```
//!
//! The parser is hand-written and allocation-free: fields borrow from the
//! line and go into a vector the caller reuses.

use std::fmt;
use std::fmt::Write as _;

use super::hex::{HEX, NOT_HEX};

/// Longest line accepted, not counting a trailing `\r`.
pub const MAX_LINE: usize = 256;

/// Longest channel name.
pub const MAX_KEY: usize = 64;

/// One `key=value` field; key and unit borrow from the line.
#[derive(Clone, Debug, PartialEq)]
pub struct Field<'a> {
    /// Channel name, e.g. `vehicle.speed`.
    pub key: &'a str,
    /// The unit in brackets as written, e.g. `km/h`; `None` without brackets.
    pub unit: Option<&'a str>,
    /// The value, always finite.
    pub value: f64,
}

/// Why a line is not valid. Columns are 1-based byte positions in the line.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum LinesError {
    /// The line is longer than [`MAX_LINE`] bytes.
    TooLong { len: usize },
    /// No `#` introducing the checksum: the line cannot be verified.
    NoChecksum,
    /// The checksum is not exactly two hex digits at the end of the line;
    /// the column of the first wrong (or missing, or extra) character.
    BadChecksumDigits { column: usize },
    /// The checksum does not match the line.
    ChecksumMismatch { calculated: u8, found: u8 },
    /// A field (or the space before `#`) is malformed.
    Field { column: usize, expected: &'static str },
    /// The line has no fields (it is blank, or only a checksum).
    Empty,
}

impl fmt::Display for LinesError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            LinesError::TooLong { len } => write!(f, "line of {len} bytes is longer than the {MAX_LINE} accepted"),
            LinesError::NoChecksum => write!(f, "no ' #' checksum: the line cannot be verified"),
            LinesError::BadChecksumDigits { column } => {
                write!(f, "column {column}: expected two hex checksum digits ending the line")
            }
            LinesError::ChecksumMismatch { calculated, found } => {
                write!(f, "checksum mismatch: calculated 0x{calculated:02X}, found 0x{found:02X}")
            }
            LinesError::Field { column, expected } => write!(f, "column {column}: expected {expected}"),
            LinesError::Empty => write!(f, "no fields in the line"),
        }
    }
}

impl std::error::Error for LinesError {}

/// CRC-8/SMBUS lookup table: the CRC of each single byte.
const CRC8_TABLE: [u8; 256] = {
    let mut t = [0u8; 256];
    let mut i = 0;
    while i < 256 {
        let mut crc = i as u8;
        let mut k = 0;
        while k < 8 {
            crc = if crc & 0x80 != 0 { (crc << 1) ^ 0x07 } else { crc << 1 };
            k += 1;
        }
        t[i] = crc;
        i += 1;
    }
    t
};

/// CRC-8/SMBUS of `data`: poly 0x07, init 0x00, no reflection, no final XOR.
pub fn crc8(data: &[u8]) -> u8 {
    data.iter().fold(0, |crc, &b| CRC8_TABLE[usize::from(crc ^ b)])
}

/// An error at the 0-based index `i`.
#[inline(always)]
fn field_err(i: usize, expected: &'static str) -> LinesError {
    LinesError::Field { column: i + 1, expected }
}

/// Parses a line into `out`, which is cleared first. Fields are appended
/// only when the whole line is valid: on an error `out` is left empty.
pub fn parse<'a>(line: &'a [u8], out: &mut Vec<Field<'a>>) -> Result<(), LinesError> {
    out.clear();
    let result = parse_into(line, out);
    if result.is_err() {
        out.clear();
    }
    result
}

fn parse_into<'a>(line: &'a [u8], out: &mut Vec<Field<'a>>) -> Result<(), LinesError> {
    let given = line.len();
    let line = line.strip_suffix(b"\r").unwrap_or(line);
    if line.len() > MAX_LINE {
        return Err(LinesError::TooLong { len: given });
    }
    if line.is_empty() {
        return Err(LinesError::Empty);
    }
    // '#' cannot appear in a field, so the first one starts the checksum.
    let Some(hash) = line.iter().position(|&b| b == b'#') else {
        return Err(LinesError::NoChecksum);
    };
    let mut found = 0u8;
    for k in 1..=2 {
        let v = line.get(hash + k).map_or(NOT_HEX, |&c| HEX[usize::from(c)]);
        if v == NOT_HEX {
            return Err(LinesError::BadChecksumDigits { column: hash + k + 1 });
        }
        found = (found << 4) | v;
    }
    if line.len() > hash + 3 {
        return Err(LinesError::BadChecksumDigits { column: hash + 4 });
    }
    if hash == 0 {
        return Err(LinesError::Empty);
    }
    if line[hash - 1] != b' ' {
        return Err(field_err(hash, "a space before '#'"));
    }
    let body = &line[..hash - 1];
    if body.is_empty() {
        return Err(LinesError::Empty);
    }
    let calculated = crc8(body);
    if calculated != found {
        return Err(LinesError::ChecksumMismatch { calculated, found });
    }

    let mut i = 0;
    loop {
        let (field, end) = parse_field(body, i)?;
        out.push(field);
        if end == body.len() {
            return Ok(());
        }
        // parse_field stops only at the end or at a space.
        i = end + 1;
    }
}

/// Parses the field starting at `body[start]`; returns it and the index of
/// the space or end after it.
fn parse_field(body: &[u8], start: usize) -> Result<(Field<'_>, usize), LinesError> {
    // Key: parts of [A-Za-z0-9_] separated by single dots.
    let mut i = start;
    let mut part_len = 0;
    loop {
        match body.get(i) {
            Some(&c) if c.is_ascii_alphanumeric() || c == b'_' => part_len += 1,
            Some(b'.') if part_len > 0 => part_len = 0,
            Some(b'.') => return Err(field_err(i, "a letter, digit or '_' (a name part cannot be empty)")),
            Some(b'=' | b'[') if i > start && part_len == 0 => {
                return Err(field_err(i, "a name part after '.'"));
            }
            Some(b'=' | b'[') if i > start => break,
            None | Some(b' ' | b'=' | b'[') if i == start => {
                return Err(field_err(i, "a channel name (fields are separated by single spaces)"));
            }
            None | Some(b' ') => return Err(field_err(i, "'=' or '[unit]' after the channel name")),
            Some(_) => return Err(field_err(i, "a letter, digit, '_' or '.' in the channel name")),
        }
        i += 1;
        if i - start > MAX_KEY {
            return Err(field_err(i - 1, "a channel name of at most 64 bytes"));
        }
    }
    let key = std::str::from_utf8(&body[start..i]).map_err(|_| field_err(start, "an ASCII channel name"))?;

    let mut unit = None;
    if body.get(i) == Some(&b'[') {
        i += 1;
        let ustart = i;
        loop {
            match body.get(i) {
                Some(b']') if i > ustart => break,
                Some(b']') => return Err(field_err(i, "a unit inside '[' ']'")),
                None | Some(b' ') => return Err(field_err(i, "']' closing the unit")),
                Some(&c) if c < 0x20 || c == 0x7F || matches!(c, b'[' | b'=' | b'#') => {
                    return Err(field_err(i, "a unit without control characters, '[', '=' or '#'"));
                }
                Some(_) => i += 1,
            }
        }
        unit = Some(std::str::from_utf8(&body[ustart..i]).map_err(|_| field_err(ustart, "a unit in UTF-8"))?);
        i += 1;
    }
    if body.get(i) != Some(&b'=') {
        return Err(field_err(i, "'=' before the value"));
    }
    i += 1;

    let vstart = i;
    while i < body.len() && body[i] != b' ' {
        i += 1;
    }
    if i == vstart {
        return Err(field_err(vstart, "a number after '='"));
    }
    let value: f64 = std::str::from_utf8(&body[vstart..i])
        .ok()
        .and_then(|s| s.parse().ok())
        .ok_or(field_err(vstart, "a decimal number"))?;
    if !value.is_finite() {
        return Err(field_err(vstart, "a finite number (not nan or inf)"));
    }
    Ok((Field { key, unit, value }, i))
}

/// Formats fields into a line with its checksum (no line ending), for tests
/// and the simulator: `format(&[("vehicle.speed", None, 83.21)])` gives
/// `vehicle.speed=83.21 #..`. Values are written so that they parse back to
/// the same `f64` (shortest form, exponent notation for very large or small
/// magnitudes). Nothing is checked: the line parses only when the keys and
/// units are valid, the values finite, there is at least one field and the
/// line fits in [`MAX_LINE`].
pub fn format(fields: &[(&str, Option<&str>, f64)]) -> String {
    let mut s = String::new();
    for (k, (key, unit, value)) in fields.iter().enumerate() {
        if k > 0 {
            s.push(' ');
        }
        s.push_str(key);
        if let Some(unit) = unit {
            s.push('[');
            s.push_str(unit);
            s.push(']');
        }
        s.push('=');
        let a = value.abs();
        // `{}` never uses an exponent: 1e300 would take 301 digits.
        let _ = if a == 0.0 || (1e-4..1e16).contains(&a) || !a.is_finite() {
            write!(s, "{value}")
        } else {
            write!(s, "{value:e}")
        };
    }
    let crc = crc8(s.as_bytes());
    let _ = write!(s, " #{crc:02X}");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ok(s: &str) -> Vec<Field<'_>> {
        let mut out = Vec::new();
        parse(s.as_bytes(), &mut out).unwrap_or_else(|e| panic!("{s}: {e}"));
        out
    }

    fn err(s: &[u8]) -> LinesError {
        let mut out = vec![Field { key: "stale", unit: None, value: 1.0 }];
        let e = parse(s, &mut out).expect_err(&String::from_utf8_lossy(s));
        assert!(out.is_empty(), "fields left after an error");
        e
    }

    /// `body` with its checksum, computed by [`crc8`].
    fn line(body: &str) -> String {
        format!("{body} #{:02X}", crc8(body.as_bytes()))
    }

    fn field(key: &'static str, unit: Option<&'static str>, value: f64) -> Field<'static> {
        Field { key, unit, value }
    }

    /// Bit-at-a-time CRC-8/SMBUS, written from the definition as a second
    /// implementation to check the table against.
    fn crc8_bitwise(data: &[u8]) -> u8 {
        let mut crc = 0u8;
        for &b in data {
            for bit in (0..8).rev() {
                let top = (crc >> 7) ^ ((b >> bit) & 1);
                crc <<= 1;
                if top != 0 {
                    crc ^= 0x07;
                }
            }
        }
        crc
    }

    #[test]
    fn crc8_check_value() {
        // Greg Cook, "Catalogue of parametrised CRC algorithms", CRC-8/SMBUS: check=0xf4.
        assert_eq!(crc8(b"123456789"), 0xF4);
        assert_eq!(crc8_bitwise(b"123456789"), 0xF4);
        assert_eq!(crc8(b""), 0);
        let all: Vec<u8> = (0..=255).collect();
        for n in 0..all.len() {
            assert_eq!(crc8(&all[..n]), crc8_bitwise(&all[..n]));
        }
    }

    #[test]
    fn python_sender_output() {
        // Printed by running the Python sender of the module doc with python3.
        assert_eq!(
            ok("vehicle.speed[km/h]=83.21 battery.temp=41.5 #71"),
            [field("vehicle.speed", Some("km/h"), 83.21), field("battery.temp", None, 41.5)]
        );
        // The module doc's example; 0xA5 also computed with the Python crc8.
        assert_eq!(line("vehicle.speed=83.21 battery.temp=41.5"), "vehicle.speed=83.21 battery.temp=41.5 #A5");
        assert_eq!(ok("vehicle.speed=83.21 battery.temp=41.5 #a5").len(), 2, "lower-case digits");
    }

    #[test]
    fn units_and_numbers() {
        let s = line("tyre.fl.pressure[kPa]=245 soc[%]=87.5 coolant.temp[°C]=-3.25e1 x_1=+1 y=.5 z=5.");
        assert_eq!(
            ok(&s),
            [
                field("tyre.fl.pressure", Some("kPa"), 245.0),
                field("soc", Some("%"), 87.5),
                field("coolant.temp", Some("°C"), -32.5),
                field("x_1", None, 1.0),
                field("y", None, 0.5),
                field("z", None, 5.0),
            ]
        );
        assert_eq!(ok(&format!("{}\r", line("a=1"))), [field("a", None, 1.0)], "trailing CR");
        // Duplicate keys are kept; the caller decides.
        assert_eq!(ok(&line("a=1 a=2")), [field("a", None, 1.0), field("a", None, 2.0)]);
        let key64 = "k".repeat(64);
        assert_eq!(ok(&line(&format!("{key64}=0")))[0].key, key64);
    }

    #[test]
    fn nan_and_inf_rejected() {
        let finite = LinesError::Field { column: 3, expected: "a finite number (not nan or inf)" };
        for v in ["nan", "NaN", "inf", "-inf", "infinity", "1e999"] {
            assert_eq!(err(line(&format!("a={v}")).as_bytes()), finite, "{v}");
        }
    }

    #[test]
    fn format_round_trips() {
        let fields = [("vehicle.speed", None, 83.21)];
        assert_eq!(format(&fields), "vehicle.speed=83.21 #98");
        assert_eq!(format(&fields), line("vehicle.speed=83.21"));
        assert_eq!(
            format(&[("vehicle.speed", Some("km/h"), 83.21), ("battery.temp", None, 41.5)]),
            "vehicle.speed[km/h]=83.21 battery.temp=41.5 #71",
            "the same line as the Python sender"
        );
        let mut rng = 0x2545_F491_4F6C_DD1Du64;
        for _ in 0..20_000 {
            let v = f64::from_bits(xorshift(&mut rng));
            if !v.is_finite() {
                continue;
            }
            let s = format(&[("a.b", Some("u"), v), ("c", None, -v)]);
            let mut out = Vec::new();
            parse(s.as_bytes(), &mut out).unwrap_or_else(|e| panic!("{s}: {e}"));
            assert_eq!(out[0].value.to_bits(), v.to_bits(), "{s}");
            assert_eq!(out[1].value.to_bits(), (-v).to_bits(), "{s}");
            assert!(s.len() <= 64, "{s}");
        }
        assert_eq!(format(&[("a", None, 1e300)]), line("a=1e300"));
        assert_eq!(format(&[("a", None, -0.0)]), line("a=-0"));
    }

    #[test]
    fn every_error_with_its_column() {
        let f = |column, expected| LinesError::Field { column, expected };
        assert_eq!(err(b""), LinesError::Empty);
        assert_eq!(err(b"\r"), LinesError::Empty);
        assert_eq!(err(b"#00"), LinesError::Empty);
        assert_eq!(err(b" #00"), LinesError::Empty);
        assert_eq!(err(b"a=1"), LinesError::NoChecksum);
        assert_eq!(err(b"a=1 #"), LinesError::BadChecksumDigits { column: 6 });
        assert_eq!(err(b"a=1 #3"), LinesError::BadChecksumDigits { column: 7 });
        assert_eq!(err(b"a=1 #3G"), LinesError::BadChecksumDigits { column: 7 });
        assert_eq!(err(b"a=1 #3F0"), LinesError::BadChecksumDigits { column: 8 });
        assert_eq!(err(b"a=1 #3F\n"), LinesError::BadChecksumDigits { column: 8 });
        assert_eq!(err(b"a=1#00"), f(4, "a space before '#'"));
        let good = line("vehicle.speed=83.21");
        let bad = good.replace("83.21", "83.22");
        let e = err(bad.as_bytes());
        assert_eq!(e, LinesError::ChecksumMismatch { calculated: crc8(b"vehicle.speed=83.22"), found: 0x98 });
        assert_eq!(
            e.to_string(),
            format!("checksum mismatch: calculated 0x{:02X}, found 0x98", crc8(b"vehicle.speed=83.22"))
        );
        // Field syntax, each with a correct checksum so the syntax is what fails.
        let fe = |body: &str| err(line(body).as_bytes());
        assert_eq!(fe("a=1  b=2"), f(5, "a channel name (fields are separated by single spaces)"));
        assert_eq!(fe(" a=1"), f(1, "a channel name (fields are separated by single spaces)"));
        assert_eq!(fe("a=1 "), f(5, "a channel name (fields are separated by single spaces)"));
        assert_eq!(fe("=1"), f(1, "a channel name (fields are separated by single spaces)"));
        assert_eq!(fe("a.=1"), f(3, "a name part after '.'"));
        assert_eq!(fe(".a=1"), f(1, "a letter, digit or '_' (a name part cannot be empty)"));
        assert_eq!(fe("a..b=1"), f(3, "a letter, digit or '_' (a name part cannot be empty)"));
        assert_eq!(fe("a-b=1"), f(2, "a letter, digit, '_' or '.' in the channel name"));
        assert_eq!(fe("ab 1"), f(3, "'=' or '[unit]' after the channel name"));
        assert_eq!(fe("ab"), f(3, "'=' or '[unit]' after the channel name"));
        assert_eq!(fe(&format!("{}=1", "k".repeat(65))), f(65, "a channel name of at most 64 bytes"));
        assert_eq!(fe("a[]=1"), f(3, "a unit inside '[' ']'"));
        assert_eq!(fe("a[km/h=1"), f(7, "a unit without control characters, '[', '=' or '#'"));
        assert_eq!(fe("a[km h]=1"), f(5, "']' closing the unit"));
        assert_eq!(fe("a[km/h"), f(7, "']' closing the unit"));
        assert_eq!(fe("a[km]1"), f(6, "'=' before the value"));
        assert_eq!(fe("a=1 b="), f(7, "a number after '='"));
        assert_eq!(fe("a=1,5"), f(3, "a decimal number"));
        assert_eq!(fe("a=0x10"), f(3, "a decimal number"));
        assert_eq!(fe("a=1=2"), f(3, "a decimal number"));
        let mut latin1 = b"a[\xB0C]=1".to_vec();
        let crc = crc8(&latin1);
        latin1.extend_from_slice(format!(" #{crc:02X}").as_bytes());
        assert_eq!(err(&latin1), f(3, "a unit in UTF-8"));
        assert_eq!(f(5, "'=' before the value").to_string(), "column 5: expected '=' before the value");
    }

    #[test]
    fn long_lines_rejected() {
        let body = (0..40).map(|k| format!("ch{k:02}=1.5")).collect::<Vec<_>>().join(" ");
        let l = line(&body[..296]);
        assert_eq!(l.len(), 300);
        assert_eq!(err(l.as_bytes()), LinesError::TooLong { len: 300 });
        assert_eq!(LinesError::TooLong { len: 300 }.to_string(), "line of 300 bytes is longer than the 256 accepted");
        // 256 bytes is the limit, not counting a '\r'.
        let fits = line(&format!("v={}", "1".repeat(MAX_LINE - 6)));
        assert_eq!(fits.len(), MAX_LINE);
        assert_eq!(ok(&fits).len(), 1);
        assert_eq!(ok(&format!("{fits}\r")).len(), 1);
        let over = line(&format!("v={}", "1".repeat(MAX_LINE - 5)));
        assert_eq!(err(over.as_bytes()), LinesError::TooLong { len: MAX_LINE + 1 });
    }

    /// A small xorshift generator for reproducible random tests.
    fn xorshift(state: &mut u64) -> u64 {
        *state ^= *state << 13;
        *state ^= *state >> 7;
        *state ^= *state << 17;
        *state
    }

    #[test]
    fn never_panics() {
        let samples = [
            "vehicle.speed[km/h]=83.21 battery.temp=41.5 #71".to_string(),
            "vehicle.speed=83.21 battery.temp=41.5 #A5".to_string(),
            line("tyre.fl.pressure[kPa]=245 soc[%]=87.5 coolant.temp[°C]=-3.25e1"),
        ];
        let mut rng = 0x9E37_79B9_7F4A_7C15u64;
        let check = |b: &[u8]| {
            let mut out = Vec::new();
            let _ = parse(b, &mut out);
        };
        for s in &samples {
            let b = s.as_bytes();
            for end in 0..=b.len() {
                check(&b[..end]);
            }
            for _ in 0..3000 {
                let mut m = b.to_vec();
                let i = (xorshift(&mut rng) % m.len() as u64) as usize;
                m[i] = xorshift(&mut rng) as u8;
                check(&m);
                // Re-checksummed, so that the field parser sees the change.
                if let Some(h) = m.iter().position(|&c| c == b'#')
                    && h > 0
                {
                    let mut fixed = m[..h - 1].to_vec();
                    let crc = crc8(&fixed);
                    fixed.extend_from_slice(format!(" #{crc:02X}").as_bytes());
                    check(&fixed);
                }
            }
        }
        for _ in 0..20_000 {
            let len = (xorshift(&mut rng) % 300) as usize;
            let mut m: Vec<u8> = (0..len).map(|_| b"ab.=[]# 1e-\r\xB0"[(xorshift(&mut rng) % 13) as usize]).collect();
            check(&m);
            m.iter_mut().for_each(|b| *b = xorshift(&mut rng) as u8);
            check(&m);
        }
    }
}
