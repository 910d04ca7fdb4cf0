//! Large figures: digits three cells tall drawn with half blocks from a
//! 3×5 pixel font, for the one number that must read from across a pit box.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::widgets::Widget;

/// 3×5 glyphs, one string of five rows per character ('#' lit).
fn glyph(c: char) -> Option<[&'static str; 5]> {
    Some(match c {
        '0' => ["###", "#.#", "#.#", "#.#", "###"],
        '1' => [".#.", "##.", ".#.", ".#.", "###"],
        '2' => ["###", "..#", "###", "#..", "###"],
        '3' => ["###", "..#", ".##", "..#", "###"],
        '4' => ["#.#", "#.#", "###", "..#", "..#"],
        '5' => ["###", "#..", "###", "..#", "###"],
        '6' => ["###", "#..", "###", "#.#", "###"],
        '7' => ["###", "..#", ".#.", ".#.", ".#."],
        '8' => ["###", "#.#", "###", "#.#", "###"],
        '9' => ["###", "#.#", "###", "..#", "###"],
        '-' => ["...", "...", "###", "...", "..."],
        ' ' => ["...", "...", "...", "...", "..."],
        _ => return None,
    })
}

/// Width in cells of `text` drawn large (digits 4 cells, '.' 2).
pub fn width(text: &str) -> u16 {
    text.chars().map(|c| if c == '.' { 2 } else { 4 }).sum()
}

/// A number in large figures, three rows tall.
pub struct Figures<'a> {
    pub text: &'a str,
    pub style: Style,
}

impl Widget for Figures<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let mut x = area.x;
        let right = area.x + area.width;
        for c in self.text.chars() {
            if c == '.' {
                if x < right && area.height >= 3 {
                    buf[(x, area.y + 2)].set_symbol("▀").set_style(self.style);
                }
                x += 2;
                continue;
            }
            let Some(g) = glyph(c) else {
                x += 4;
                continue;
            };
            for col in 0..3u16 {
                if x + col >= right {
                    break;
                }
                for row in 0..3u16.min(area.height) {
                    let lit = |p: usize| g.get(p).is_some_and(|r| r.as_bytes()[col as usize] == b'#');
                    let (top, bottom) = (lit(2 * row as usize), lit(2 * row as usize + 1));
                    let sym = match (top, bottom) {
                        (true, true) => "█",
                        (true, false) => "▀",
                        (false, true) => "▄",
                        (false, false) => " ",
                    };
                    buf[(x + col, area.y + row)].set_symbol(sym).set_style(self.style);
                }
            }
            x += 4;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn draws_digits_three_rows_tall() {
        let area = Rect::new(0, 0, 10, 3);
        let mut buf = Buffer::empty(area);
        Figures { text: "7.1", style: Style::new() }.render(area, &mut buf);
        let rows: Vec<String> = (0..3).map(|y| (0..10).map(|x| buf[(x, y)].symbol().to_string()).collect()).collect();
        // By hand: '7' rows ###/..#/.#./.#./.#. pair up as (###,..#) → ▀▀█,
        // (.#.,.#.) → " █ ", (.#.) → " ▀ "; '.' lights the bottom row of its
        // first column; '1' (.#./##./.#./.#./###) → ▄█ , " █ ", ▀▀▀.
        assert_eq!(
            rows,
            vec!["▀▀█   ▄█  ", " █     █  ", " ▀  ▀ ▀▀▀ "].into_iter().map(String::from).collect::<Vec<_>>()
        );
        assert_eq!(width("312.4"), 18);
    }
}
