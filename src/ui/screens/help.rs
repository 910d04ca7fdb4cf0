//! The help screen: every key, how to read the screens, and the caution.

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Wrap};

use crate::CAUTION;
use crate::ui::app::{App, KEYS};

pub fn draw(f: &mut Frame, area: Rect, app: &App) {
    let t = &app.theme;
    let mut lines = vec![Line::styled(" keys", t.heading())];
    for (k, what) in KEYS {
        lines.push(Line::from(vec![Span::styled(format!("   {k:<18}"), t.value()), Span::styled(*what, t.label())]));
    }
    lines.push(Line::raw(""));
    lines.push(Line::styled(" reading the screens", t.heading()));
    for l in [
        "   States read as words and marks, not colour alone: !! ALARM, ! CAUTN, i INFO;",
        "   sources ▲ up, ◆ stale, ▼ down, ↻ retrying; channels STALE, OUT OF RANGE.",
        "   Unconverged estimates are marked (prior, unconverged): the vehicle file's",
        "   values are used. The peak shows a band from the drag estimate's spread.",
        "   Alerts stay listed until acknowledged (a), even after they clear.",
    ] {
        lines.push(Line::styled(l, t.label()));
    }
    lines.push(Line::raw(""));
    lines.push(Line::styled(" caution", t.heading()));
    lines.push(Line::styled(format!("   {CAUTION}"), t.caution_line()));
    lines
        .push(Line::styled("   termvel is not a safety system, not a braking cue of record, and no", t.caution_line()));
    lines.push(Line::styled("   substitute for marshals, scrutineering or the run plan.", t.caution_line()));
    f.render_widget(Paragraph::new(lines).wrap(Wrap { trim: false }), area);
}
