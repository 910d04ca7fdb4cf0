//! candump `-L` log lines: `parse_line_bytes` and `parse_line` on arbitrary
//! bytes. Checks: no panic; the two entry points agree; an accepted line
//! agrees with a slow reference parser written from the format's
//! description (it checks the SWAR fast paths of the timestamp and data
//! bytes); an accepted frame written back with `write_frame` / `write_line`
//! parses to the same frame, time and interface.

#![no_main]

use libfuzzer_sys::fuzz_target;
use termvel::decode::candump::{self, MAX_LINE};
use termvel::event::{CanFrame, CanId, DataFrame, ErrorFrame, FdFrame, RemoteFrame};

fn hex(c: u8) -> Option<u8> {
    (c as char).to_digit(16).map(|d| d as u8)
}

/// The reference: `(SECS.FRAC) IFACE FRAME[ R| T| trailing blanks]`,
/// written for clarity, not speed.
fn reference(line: &[u8]) -> Option<(i64, &[u8], CanFrame)> {
    if line.len() > MAX_LINE {
        return None;
    }
    let close = line.iter().position(|&c| c == b')')?;
    let stamp = line.strip_prefix(b"(")?.get(..close - 1)?;
    let dot = stamp.iter().position(|&c| c == b'.')?;
    let (secs, frac) = (&stamp[..dot], &stamp[dot + 1..]);
    let digits = |s: &[u8]| !s.is_empty() && s.iter().all(u8::is_ascii_digit);
    if !digits(secs) || !digits(frac) || secs.len() > 10 || frac.len() > 9 {
        return None;
    }
    let secs: i64 = std::str::from_utf8(secs).ok()?.parse().ok()?;
    if secs > i64::MAX / 1_000_000_000 - 1 {
        return None;
    }
    let mut frac_ns: i64 = std::str::from_utf8(frac).ok()?.parse().ok()?;
    for _ in frac.len()..9 {
        frac_ns *= 10;
    }
    let t = secs * 1_000_000_000 + frac_ns;

    let rest = line[close + 1..].strip_prefix(b" ")?;
    let sp = rest.iter().position(|&c| c == b' ')?;
    let (iface, rest) = (&rest[..sp], &rest[sp + 1..]);
    if iface.is_empty() || iface.len() > candump::MAX_IFACE {
        return None;
    }

    // The frame ends where the trailer starts: the last part that is
    // " R", " T" or only blanks.
    let hash = rest.iter().position(|&c| c == b'#')?;
    let id_txt = &rest[..hash];
    if !(id_txt.len() == 3 || id_txt.len() == 8) || !id_txt.iter().all(|&c| hex(c).is_some()) {
        return None;
    }
    let raw = u32::from_str_radix(std::str::from_utf8(id_txt).ok()?, 16).ok()?;
    let extended = id_txt.len() == 8;
    let is_error = extended && raw & 0x2000_0000 != 0;
    let id = if extended {
        if raw & !0x3FFF_FFFF != 0 {
            return None;
        }
        CanId::Extended(raw & CanId::EXTENDED_MAX)
    } else {
        CanId::standard(raw)?
    };
    let body = &rest[hash + 1..];

    // Split `body` into the frame part and the trailer.
    let trailer_ok =
        |t: &[u8]| t.is_empty() || t == b" R" || t == b" T" || t.iter().all(|c| matches!(c, b' ' | b'\t' | b'\r'));
    // Frame characters never include blanks, so the frame part ends at the
    // first blank.
    let end = body.iter().position(|c| matches!(c, b' ' | b'\t' | b'\r')).unwrap_or(body.len());
    let (frame_txt, trailer) = body.split_at(end);
    if !trailer_ok(trailer) {
        return None;
    }

    // Data bytes: pairs of hex digits, with single dots allowed between
    // bytes (not before the first byte, not after the last).
    fn data(txt: &[u8], max: usize) -> Option<Vec<u8>> {
        let mut out = Vec::new();
        if txt.is_empty() {
            return Some(out);
        }
        for group in txt.split(|&c| c == b'.') {
            if group.is_empty() || group.len() % 2 != 0 {
                return None;
            }
            for pair in group.chunks(2) {
                out.push(hex(pair[0])? << 4 | hex(pair[1])?);
            }
        }
        (out.len() <= max).then_some(out)
    }

    let frame = match frame_txt.first() {
        Some(b'R' | b'r') => {
            if is_error {
                return None;
            }
            let dlc = match &frame_txt[1..] {
                [] => 0,
                [d] => hex(*d)?,
                [b'8', b'_', d] => {
                    hex(*d)?;
                    8
                }
                _ => return None,
            };
            if dlc > 8 {
                return None;
            }
            CanFrame::Remote(RemoteFrame::new(id, dlc)?)
        }
        Some(b'#') => {
            if is_error {
                return None;
            }
            let flags = hex(*frame_txt.get(1)?)?;
            let d = data(&frame_txt[2..], 64)?;
            CanFrame::Fd(FdFrame::new(id, flags, &d)?)
        }
        _ => {
            // `_<dlc>` after exactly eight bytes.
            let (txt, dlc) = match frame_txt.len().checked_sub(2).map(|i| frame_txt.split_at(i)) {
                Some((d, [b'_', c])) => (d, Some(*c)),
                _ => (frame_txt, None),
            };
            let d = data(txt, 8)?;
            if let Some(c) = dlc {
                hex(c)?;
                if d.len() != 8 {
                    return None;
                }
            }
            if is_error {
                CanFrame::Error(ErrorFrame::new(raw & CanId::EXTENDED_MAX, &d)?)
            } else {
                CanFrame::Data(DataFrame::new(id, &d)?)
            }
        }
    };
    Some((t, iface, frame))
}

fuzz_target!(|data: &[u8]| {
    let bytes = candump::parse_line_bytes(data);
    let line = candump::parse_line(data);
    let _ = candump::parse_time(data);
    let _ = candump::parse_time_between(data, b']');
    let _ = candump::parse_frame_at(data, 0);

    match (&bytes, &line) {
        (Ok((t, iface, frame)), Ok(l)) => {
            assert_eq!((*t, *iface, *frame), (l.t_ns, l.iface.as_bytes(), l.frame));
        }
        (Ok((_, iface, _)), Err(e)) => {
            assert!(std::str::from_utf8(iface).is_err(), "parse_line refused what parse_line_bytes took: {e}");
        }
        (Err(a), Err(b)) => assert_eq!(a, b),
        (Err(e), Ok(l)) => panic!("parse_line took {l:?} that parse_line_bytes refused: {e}"),
    }
    if let Err(e) = &bytes {
        assert!(e.column >= 1 && e.column <= data.len() + 1, "column {} in a line of {}", e.column, data.len());
        let _ = e.to_string();
    }

    // The reference parser agrees on what is a valid line and what it says.
    let want = reference(data);
    match (&bytes, &want) {
        (Ok(got), Some(want)) => assert_eq!(got, want, "parser vs reference"),
        (Ok(got), None) => panic!("the parser took a line the reference refuses: {got:?}"),
        (Err(e), Some(want)) => panic!("the parser refused ({e}) a line the reference takes: {want:?}"),
        (Err(_), None) => {}
    }

    // Written back, the line parses to the same values.
    if let Ok(l) = line {
        let mut out = Vec::new();
        candump::write_line(&mut out, l.t_ns, l.iface, &l.frame);
        let written = out.strip_suffix(b"\n").expect("write_line ends with a newline");
        let back = candump::parse_line(written)
            .unwrap_or_else(|e| panic!("{:?} does not parse back: {e}", String::from_utf8_lossy(written)));
        assert_eq!(back, l);

        let mut f = Vec::new();
        candump::write_frame(&mut f, &l.frame);
        let (frame, end) = candump::parse_frame_at(&f, 0).expect("a written frame parses");
        assert_eq!((frame, end), (l.frame, f.len()));
    }
});
