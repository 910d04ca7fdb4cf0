//! The help screen: every key, how to read the screens (states, chart marks,
//! meter markers), and the caution. The caution stays at the bottom; the
//! rest scrolls with ↑ ↓ PgUp PgDn when the terminal is too short for it.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Wrap};

use crate::CAUTION;
use crate::ui::app::{App, KEYS};

/// How to read the screens: states, chart marks and meter markers.
const READING: &[&str] = &[
    "States read as words and marks, not colour alone: !! ALARM, ! CAUTION, i INFO;",
    "alerts ● active, ○ cleared (listed until acknowledged), ✓ acknowledged;",
    "sources ▲ up, ◆ stale, ▼ down, ↻ retrying; channels STALE, OUT OF RANGE.",
    "The PEAK line says what the projection stands on: drag from the estimate",
    "or the vehicle file's values, derating from the fit or the file's curve",
    "(the power and battery screens say why). The peak shows a band from the",
    "drag estimate's spread.",
    "Alerts stay listed until acknowledged (a), even after they clear.",
    "Meters: █ filled to the value, ┃ a reference, named beside it with the same",
    "┃ (run screen: demand and road ┃ avail. power, charge ┃ reserve, battery",
    "┃ rated; power screen ┃ available; battery screen ┃ rated).",
    "Charts: each series has its own mark, named with a sample in the line",
    "above the chart or in its title, so they read without colour.",
    "Run chart: ⣀⡠ driven, ••• projected ahead of the car, ╌╌ target speed,",
    "┆ braking point, ┊ stop-by line (where the car must be down to the exit",
    "speed), ▼ a mark at the distance it was made (the latest's note above).",
    "Power chart: ⣀⣀ road load, •• available, ▄▄ engine only, █ now (measured).",
    "Boost (run screen): the seconds the pack can still give the power the",
    "target needs, at that power, and what ends it: charge (energy above the",
    "reserve), derate (deliverable power falls below the need) or heat;",
    "`below … need now`: it gives less already; `?`: derating curve not fitted",
    "yet (the vehicle file's). `— no battery data`: nothing to judge boost by.",
    "Boost left is the time the pack can still give what the target needs:",
    "0 s on the derating line means it already gives less, not that it stopped.",
];

pub fn draw(f: &mut Frame, area: Rect, app: &App) {
    let t = &app.theme;
    let mut lines = vec![Line::styled(" keys", t.heading())];
    for (k, what) in KEYS {
        lines.push(Line::from(vec![Span::styled(format!("   {k:<18}"), t.value()), Span::styled(*what, t.label())]));
    }
    lines.push(Line::raw(""));
    lines.push(Line::styled(" reading the screens", t.heading()));
    for l in READING {
        lines.push(Line::styled(format!("   {l}"), t.label()));
    }
    let caution = vec![
        Line::styled(format!("   {CAUTION}"), t.caution_line()),
        Line::styled("   termvel is not a safety system, not a braking cue of record, and no", t.caution_line()),
        Line::styled("   substitute for marshals, scrutineering or the run plan.", t.caution_line()),
    ];
    let [body, foot] = Layout::vertical([Constraint::Min(1), Constraint::Length(caution.len() as u16)]).areas(area);
    // The scroll position is the screens' shared one (↑ ↓ PgUp PgDn), held so
    // the last line stays at the bottom; a line says there is more.
    let total = lines.len();
    let shown = body.height as usize;
    let max_scroll = total.saturating_sub(shown.saturating_sub(1).max(1));
    let top = if total > shown { app.scroll.min(max_scroll) } else { 0 };
    let mut visible: Vec<Line> = lines.into_iter().skip(top).collect();
    if total > shown {
        let last = (top + shown - 1).min(total);
        visible.truncate(shown.saturating_sub(1));
        visible.push(Line::styled(format!(" lines {}–{last} of {total} · ↑ ↓ PgUp PgDn scroll", top + 1), t.dim()));
    }
    f.render_widget(Paragraph::new(visible).wrap(Wrap { trim: false }), body);
    f.render_widget(Paragraph::new(caution), foot);
}
