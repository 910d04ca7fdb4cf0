//! What every screen carries: the header (screens, car, place, target), the
//! caution line, and the status line (sources, stream clock, replay position
//! and speed, pause, recording indicator, messages).

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::Modifier;
use ratatui::text::{Line, Span};
use ratatui::widgets::Paragraph;

use super::app::{App, Mode, Screen};
use super::format;
use crate::CAUTION;
use crate::event::{LinkState, SourceKind};

/// The header line.
pub fn header(f: &mut Frame, area: Rect, app: &App) {
    let t = &app.theme;
    let mut spans = vec![Span::styled(" termvel ", t.heading().add_modifier(Modifier::REVERSED)), Span::raw(" ")];
    for s in Screen::ALL {
        let label = format!("{}:{}", s.key(), s.name());
        if s == app.screen {
            spans.push(Span::styled(format!("[{label}]"), t.heading()));
        } else {
            spans.push(Span::styled(format!(" {label} "), t.label()));
        }
    }
    let cfg = &app.info.config;
    let right = format!(
        " {} · {} · target {} {} ",
        cfg.vehicle.name.split(" (").next().unwrap_or(&cfg.vehicle.name),
        cfg.track.name,
        format::num(Some(app.units.speed(cfg.track.target_speed_mps)), 0),
        app.units.speed_unit()
    );
    let used: usize = spans.iter().map(|s| s.width()).sum();
    if used + right.chars().count() <= area.width as usize {
        let pad = area.width as usize - used - right.chars().count();
        spans.push(Span::raw(" ".repeat(pad)));
        spans.push(Span::styled(right, t.label()));
    }
    f.render_widget(Paragraph::new(Line::from(spans)), area);
}

/// The one-line caution, on every screen.
pub fn caution(f: &mut Frame, area: Rect, app: &App) {
    let text = format!(" ⚠ {CAUTION}");
    f.render_widget(Paragraph::new(Line::styled(text, app.theme.caution_line())), area);
}

/// The status line: sources, clock, position, speed, pause, recording.
pub fn status(f: &mut Frame, area: Rect, app: &App) {
    let t = &app.theme;
    let mut parts: Vec<Span> = Vec::new();
    // What the user is typing, or a passing message, comes first: the line
    // may be cut on the right.
    if let Some(text) = &app.prompt {
        parts.push(Span::styled(
            format!(" mark: {text}▏ Enter records, Esc cancels "),
            t.status().add_modifier(Modifier::BOLD),
        ));
    } else if let Some((m, _)) = &app.message {
        parts.push(Span::styled(format!(" {m} "), t.status().add_modifier(Modifier::BOLD | Modifier::REVERSED)));
    }
    let snap = app.snapshot();
    // Sources with a state mark: ▲ up, ◆ stale, ▼ down, ↻ retrying.
    if let Some(s) = snap {
        let mut src = String::from(" ");
        for v in s.sources.iter().filter(|v| matches!(v.kind, SourceKind::Can | SourceKind::Nmea | SourceKind::Lines)) {
            let stale = v.age_s.is_some_and(|a| a > 1.0);
            let mark = match v.link {
                Some(LinkState::Down) => "▼",
                Some(LinkState::Retrying) => "↻",
                _ if stale => "◆",
                _ => "▲",
            };
            src.push_str(&format!("{}{} ", v.name, mark));
        }
        parts.push(Span::styled(src, t.status()));
        parts.push(Span::styled(format!("│ {} ", format::clock(s.t_ns)), t.status()));
    } else {
        parts.push(Span::styled(" waiting for data ", t.status()));
    }
    if let Some(st) = app.status() {
        let mode = match &app.info.mode {
            Mode::Replay { .. } => "replay",
            Mode::Rehearsal { .. } => "rehearsal",
            Mode::Live => "live",
            Mode::Follow { .. } => "follow",
        };
        // The time of the snapshot on the screen, from the first event.
        let pos = match (st.start_ns, snap) {
            (Some(a), Some(s)) => format::elapsed(s.t_ns - a),
            _ => "0:00.0".into(),
        };
        let speed = if st.speed.is_finite() { format!("x{}", trim(st.speed)) } else { "fastest".into() };
        let state = if st.finished {
            "■ end"
        } else if st.paused {
            "‖ PAUSED"
        } else {
            "▶"
        };
        if matches!(app.info.mode, Mode::Live | Mode::Follow { .. }) {
            // Live: the time since the session started; no pace or pause.
            parts.push(Span::styled(format!("│ {mode} {pos} "), t.status()));
        } else {
            parts.push(Span::styled(format!("│ {mode} {pos} {speed} {state} "), t.status()));
        }
        if let Some(share) = app.share_text() {
            parts.push(Span::styled(format!("│ {share} "), t.status()));
        }
        match &st.recording {
            // The file does not take writes: say so, with what is waiting
            // in memory and what was dropped.
            Some(_) if st.record_error.is_some() || st.record_dropped > 0 => {
                parts.push(Span::styled("│", t.status()));
                let what = if st.record_error.is_some() { "REC FAILING" } else { "REC LOST EVENTS" };
                parts.push(Span::styled(format!(" ● {what} "), t.severity(crate::config::Severity::Alarm)));
                parts.push(Span::styled(
                    format!(" {} held, {} dropped ", st.record_held, st.record_dropped),
                    t.status(),
                ));
            }
            Some(p) => {
                let name = p.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
                parts.push(Span::styled("│", t.status()));
                parts.push(Span::styled(" ● REC ", t.recording()));
                parts.push(Span::styled(format!(" {name} "), t.status()));
            }
            None => parts.push(Span::styled("│ not recording ", t.status())),
        }
    }
    if app.status().is_none()
        && let Some(share) = app.share_text()
    {
        parts.push(Span::styled(format!("│ {share} "), t.status()));
    }
    let used: usize = parts.iter().map(|s| s.width()).sum();
    if used < area.width as usize {
        parts.push(Span::styled(" ".repeat(area.width as usize - used), t.status()));
    }
    f.render_widget(Paragraph::new(Line::from(parts)), area);
}

fn trim(x: f64) -> String {
    let s = format!("{x:.2}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}
