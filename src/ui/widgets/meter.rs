//! A labelled horizontal meter: a filled run of cells for the value, an
//! optional reference mark (what is available, a limit), and the numbers as
//! text, so it reads without colour.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::text::Line;
use ratatui::widgets::Widget;

pub struct Meter<'a> {
    pub label: &'a str,
    /// Value and full scale, in any one unit.
    pub value: Option<f64>,
    pub full: f64,
    /// A reference position (drawn as a tick), same unit.
    pub mark: Option<f64>,
    /// Text after the bar.
    pub text: String,
    pub label_style: Style,
    pub bar_style: Style,
    pub mark_style: Style,
    pub text_style: Style,
    /// Columns reserved for the label and the text.
    pub label_width: u16,
    pub text_width: u16,
}

impl Widget for Meter<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.height == 0 || area.width < self.label_width + self.text_width + 4 {
            return;
        }
        let y = area.y;
        Line::styled(self.label, self.label_style).render(Rect::new(area.x, y, self.label_width, 1), buf);
        let bar_x = area.x + self.label_width;
        let bar_w = area.width - self.label_width - self.text_width - 1;
        let frac = |v: f64| (v / self.full).clamp(0.0, 1.0);
        let filled = self.value.filter(|v| v.is_finite() && self.full > 0.0).map_or(0.0, |v| frac(v) * bar_w as f64);
        for i in 0..bar_w {
            let cell = &mut buf[(bar_x + i, y)];
            let f = filled - i as f64;
            let sym = if f >= 1.0 {
                "█"
            } else if f >= 0.5 {
                "▌"
            } else {
                "·"
            };
            cell.set_symbol(sym).set_style(if f >= 0.5 { self.bar_style } else { self.text_style });
        }
        if let Some(m) = self.mark.filter(|m| m.is_finite() && self.full > 0.0) {
            let i = ((frac(m) * bar_w as f64).round() as u16).min(bar_w.saturating_sub(1));
            buf[(bar_x + i, y)].set_symbol("┃").set_style(self.mark_style);
        }
        let tx = bar_x + bar_w + 1;
        Line::styled(self.text, self.text_style).render(Rect::new(tx, y, self.text_width, 1), buf);
    }
}
