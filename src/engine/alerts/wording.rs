//! An alert's words with its numbers kept as values: each number is a
//! measure and an SI value, so the reader words it in the unit set it
//! shows (the screens in the set the engineer chose; the recording, the
//! headless JSON and the report in metric, as [`AlertText::metric`]). The
//! engine never picks a display unit: it states what the number is.

use crate::units::{self, Measure, UnitSet};

/// One piece of an alert's text.
#[derive(Clone, Debug, PartialEq)]
pub enum Piece {
    /// Words as written (names from the data included: not a template, so
    /// a `{` in a source's name means nothing).
    Words(String),
    /// A number: what it measures and its SI value; `coarse` shows it with
    /// one decimal fewer than the display unit's usual precision (a target
    /// speed in whole km/h).
    Value { measure: Measure, si: f64, coarse: bool },
}

/// An alert's text: words and values in order.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct AlertText {
    pub pieces: Vec<Piece>,
}

impl AlertText {
    /// A text that starts with `words`.
    pub fn new(words: impl Into<String>) -> AlertText {
        AlertText::default().then(words)
    }

    /// Appends words.
    pub fn then(mut self, words: impl Into<String>) -> AlertText {
        let words = words.into();
        if !words.is_empty() {
            self.pieces.push(Piece::Words(words));
        }
        self
    }

    /// Appends a value at its display unit's usual precision.
    pub fn value(mut self, measure: Measure, si: f64) -> AlertText {
        self.pieces.push(Piece::Value { measure, si, coarse: false });
        self
    }

    /// Appends a value with one decimal fewer than usual.
    pub fn rounded(mut self, measure: Measure, si: f64) -> AlertText {
        self.pieces.push(Piece::Value { measure, si, coarse: true });
        self
    }

    /// The text worded in `set`.
    pub fn render(&self, set: UnitSet) -> String {
        let mut out = String::new();
        for p in &self.pieces {
            match p {
                Piece::Words(w) => out.push_str(w),
                Piece::Value { measure, si, coarse } => {
                    out.push_str(&units::show(*measure, set, *si, *coarse).to_string());
                }
            }
        }
        out
    }

    /// The text in metric: what the recording, the headless JSON and the
    /// report carry.
    pub fn metric(&self) -> String {
        self.render(UnitSet::Metric)
    }
}

impl From<String> for AlertText {
    fn from(words: String) -> AlertText {
        AlertText::new(words)
    }
}

impl From<&str> for AlertText {
    fn from(words: &str) -> AlertText {
        AlertText::new(words)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Issue 15, item 12: alert texts stayed in km/h after `u`; a text now
    // keeps its numbers as values and is worded in either set.
    #[test]
    fn one_text_reads_in_either_set() {
        let t = AlertText::new("target ")
            .rounded(Measure::Speed, 365.0 / 3.6)
            .then(" out of reach: projected peak ")
            .rounded(Measure::Speed, 90.0);
        assert_eq!(t.metric(), "target 365 km/h out of reach: projected peak 324 km/h");
        // 365 km/h = 226.8 mph, 90 m/s = 201.3 mph (1 mph = 0.44704 m/s exactly).
        assert_eq!(t.render(UnitSet::Imperial), "target 227 mph out of reach: projected peak 201 mph");
        let b =
            AlertText::new("braking point in ").value(Measure::Time, 3.24).then(" (").value(Measure::Distance, 250.0);
        assert_eq!(b.clone().then(")").metric(), "braking point in 3.2 s (250 m)");
        // 250 m = 820.2 ft.
        assert_eq!(b.then(")").render(UnitSet::Imperial), "braking point in 3.2 s (820 ft)");
    }

    #[test]
    fn words_are_not_a_template() {
        let t: AlertText = format!("{} is down: {}", "can{0}", "no such device").into();
        assert_eq!(t.render(UnitSet::Imperial), "can{0} is down: no such device");
    }
}
