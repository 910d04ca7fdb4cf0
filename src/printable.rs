//! Text from outside (config keys, file names, marks and notes in a
//! recording, lines from a wire) made safe to print: control characters and
//! bidirectional overrides are shown as escapes, so a file or a recording can
//! never clear, move or recolour the reader's terminal, and very long runs are
//! cut with their length said.

use std::borrow::Cow;
use std::fmt::Write as _;

/// Whether `c` must not reach a terminal as it is: C0 and C1 controls, DEL,
/// and the Unicode bidirectional embeddings, overrides and isolates (which
/// reorder what is shown after them).
fn unsafe_char(c: char) -> bool {
    c.is_control() || matches!(c, '\u{202A}'..='\u{202E}' | '\u{2066}'..='\u{2069}' | '\u{200E}' | '\u{200F}')
}

/// `s` with every unsafe character escaped (`\x1b`, `\u{202e}`); borrowed
/// when there is nothing to escape.
pub fn printable(s: &str) -> Cow<'_, str> {
    if !s.chars().any(unsafe_char) {
        return Cow::Borrowed(s);
    }
    let mut out = String::with_capacity(s.len() + 8);
    for c in s.chars() {
        if !unsafe_char(c) {
            out.push(c);
        } else if (c as u32) < 0x100 {
            let _ = write!(out, "\\x{:02x}", c as u32);
        } else {
            let _ = write!(out, "\\u{{{:x}}}", c as u32);
        }
    }
    Cow::Owned(out)
}

/// [`printable`], cut to at most `max` characters, the rest summarised as
/// `… (N more bytes)`.
pub fn clipped(s: &str, max: usize) -> Cow<'_, str> {
    let p = printable(s);
    match p.char_indices().nth(max) {
        None => p,
        Some((cut, _)) => Cow::Owned(format!("{}… ({} more bytes)", &p[..cut], p.len() - cut)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Issue 13, item 12: a mark holding ESC or NUL was printed raw.
    #[test]
    fn controls_and_overrides_are_escaped() {
        assert_eq!(printable("plain text · 365 km/h"), "plain text · 365 km/h");
        assert!(matches!(printable("plain"), Cow::Borrowed(_)));
        assert_eq!(printable("\u{0}\u{1b}[2J"), "\\x00\\x1b[2J");
        assert_eq!(printable("a\u{202e}b\u{7f}"), "a\\u{202e}b\\x7f");
        assert_eq!(printable("tab\there"), "tab\\x09here");
    }

    #[test]
    fn long_text_is_cut_with_its_length() {
        let long = "k".repeat(1000);
        assert_eq!(clipped(&long, 10), format!("{}… (990 more bytes)", "k".repeat(10)));
        assert_eq!(clipped("short", 10), "short");
    }
}
