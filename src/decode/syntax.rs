//! The error of the column-oriented frame parsers: a candump log line and an
//! slcan adapter message are both read left to right, and both fail the same
//! way, at one column where something else was expected.

/// Why a candump log line or an slcan message is not a valid frame: the
/// 1-based column where parsing stopped and what was expected there.
#[derive(Clone, Copy, Debug, PartialEq, Eq, thiserror::Error)]
#[error("column {column}: expected {expected}")]
pub struct FrameSyntaxError {
    /// 1-based column of the first byte that does not fit.
    pub column: usize,
    /// What the parser expected at that column, in words.
    pub expected: &'static str,
}

impl FrameSyntaxError {
    /// The error at the 0-based byte index `i`.
    #[inline(always)]
    pub fn at(i: usize, expected: &'static str) -> FrameSyntaxError {
        FrameSyntaxError { column: i + 1, expected }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn message_names_the_column_and_what_was_expected() {
        // The text is shown on the feed screen and written in reports: it
        // must stay as both parsers wrote it before they shared this type.
        let e = FrameSyntaxError::at(4, "a DLC digit 0-8");
        assert_eq!(e.column, 5, "columns are 1-based");
        assert_eq!(e.to_string(), "column 5: expected a DLC digit 0-8");
        assert_eq!(
            crate::decode::candump::parse_line(b"x").unwrap_err().to_string(),
            "column 1: expected '(' opening the timestamp"
        );
        assert_eq!(
            crate::decode::slcan::parse(b"t12G0").unwrap_err().to_string(),
            "column 4: expected 3 hex digits of a standard id"
        );
    }
}
