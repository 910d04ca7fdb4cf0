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

/// The header line: the screens, then the car, the course and the target.
/// Narrower than everything, the screen tabs shorten to their keys (the
/// one shown keeps its name), then the car's and course's names are cut;
/// the target's figure and unit always stay.
pub fn header(f: &mut Frame, area: Rect, app: &App) {
    let t = &app.theme;
    let width = area.width as usize;
    let tabs = |compact: bool| -> Vec<Span<'static>> {
        let mut spans = vec![Span::styled(" termvel ", t.heading().add_modifier(Modifier::REVERSED)), Span::raw(" ")];
        for s in Screen::ALL {
            if s == app.screen {
                spans.push(Span::styled(format!("[{}:{}]", s.key(), s.name()), t.heading()));
            } else if compact {
                spans.push(Span::styled(format!(" {} ", s.key()), t.label()));
            } else {
                spans.push(Span::styled(format!(" {}:{} ", s.key(), s.name()), t.label()));
            }
        }
        spans
    };
    let cfg = &app.info.config;
    let car =
        crate::printable::printable(cfg.vehicle.name.split(" (").next().unwrap_or(&cfg.vehicle.name)).into_owned();
    let course = crate::printable::printable(&cfg.track.name).into_owned();
    let target = format!(
        "target {} {}",
        format::num(Some(app.units.speed(cfg.track.target_speed_mps)), 0),
        app.units.speed_unit()
    );
    let right = |car: &str, course: &str| format!(" {car} · {course} · {target} ");
    let wide = tabs(false);
    let used = |spans: &[Span]| spans.iter().map(|s| s.width()).sum::<usize>();
    let (mut spans, text) = if used(&wide) + right(&car, &course).chars().count() <= width {
        (wide, right(&car, &course))
    } else {
        let compact = tabs(true);
        // Room for the two names once the tabs, the target and the
        // separators are placed, shared between them.
        let fixed = used(&compact) + right("", "").chars().count();
        let room = width.saturating_sub(fixed);
        let (c, k) = (car.chars().count(), course.chars().count());
        let (cw, kw) = if c + k <= room {
            (c, k)
        } else {
            let half = room / 2;
            if c <= half {
                (c, room - c)
            } else if k <= half {
                (room - k, k)
            } else {
                (half, room - half)
            }
        };
        (compact, right(&cut(&car, cw), &cut(&course, kw)))
    };
    let used = used(&spans);
    if used + text.chars().count() <= width {
        spans.push(Span::raw(" ".repeat(width - used - text.chars().count())));
        spans.push(Span::styled(text, t.label()));
    } else if used + target.chars().count() + 2 <= width {
        // Too narrow for any name: the target alone.
        spans.push(Span::raw(" ".repeat(width - used - target.chars().count() - 1)));
        spans.push(Span::styled(format!("{target} "), t.label()));
    }
    f.render_widget(Paragraph::new(Line::from(spans)), area);
}

/// `s` in at most `n` characters, cut with "…".
fn cut(s: &str, n: usize) -> String {
    if s.chars().count() <= n {
        s.to_string()
    } else if n == 0 {
        String::new()
    } else {
        s.chars().take(n - 1).collect::<String>() + "…"
    }
}

/// The one-line caution, on every screen.
pub fn caution(f: &mut Frame, area: Rect, app: &App) {
    let text = format!(" ⚠ {CAUTION}");
    f.render_widget(Paragraph::new(Line::styled(text, app.theme.caution_line())), area);
}

/// One field of the status line, in the forms it can take, longest first
/// (an empty form drops the field).
struct Field<'a> {
    forms: Vec<Vec<Span<'a>>>,
    /// Which form is used.
    at: usize,
}

impl<'a> Field<'a> {
    fn new(forms: Vec<Vec<Span<'a>>>) -> Field<'a> {
        Field { forms, at: 0 }
    }
    fn width(&self) -> usize {
        self.forms[self.at].iter().map(|s| s.width()).sum()
    }
    /// Takes the next shorter form, if there is one.
    fn shorten(&mut self) {
        if self.at + 1 < self.forms.len() {
            self.at += 1;
        }
    }
}

/// Status fields, in the order they shorten when the line is too narrow:
/// the recording's name (then the word REC alone), the clock of day, the
/// share link's figures (to its state), the mode word, the sources (to
/// counts). Figures are never cut. Another field
/// goes in as one more [`Field`] with its shorter forms, its index named
/// here.
const SHORTEN_ORDER: [usize; 7] = [REC, CLOCK, SHARE, PLAY, REC, SOURCES, REC];
const SOURCES: usize = 0;
const CLOCK: usize = 1;
const PLAY: usize = 2;
const REC: usize = 3;
const SHARE: usize = 4;

/// The status line: sources, clock, position of total, pace, pause,
/// recording; a message or the mark being typed first, with the room the
/// fields' shortest forms leave it (they keep the position and the state).
pub fn status(f: &mut Frame, area: Rect, app: &App) {
    let t = &app.theme;
    let st = t.status();
    let width = area.width as usize;
    let snap = app.snapshot();
    let mut fields: Vec<Field> = Vec::new();
    // Sources with a state mark: ▲ up, ◆ stale, ▼ down, ↻ retrying.
    match snap {
        Some(s) => {
            let mut list = String::from(" ");
            let mut counts = [0usize; 4];
            for v in
                s.sources.iter().filter(|v| matches!(v.kind, SourceKind::Can | SourceKind::Nmea | SourceKind::Lines))
            {
                let stale = v.age_s.is_some_and(|a| a > 1.0);
                let (mark, i) = match v.link {
                    Some(LinkState::Down) => ("▼", 2),
                    Some(LinkState::Retrying) => ("↻", 3),
                    _ if stale => ("◆", 1),
                    _ => ("▲", 0),
                };
                counts[i] += 1;
                list.push_str(&format!("{}{} ", crate::printable::printable(&v.name), mark));
            }
            let mut short = String::from(" sources");
            for (n, mark) in counts.iter().zip(["▲", "◆", "▼", "↻"]) {
                if *n > 0 {
                    short.push_str(&format!(" {n}{mark}"));
                }
            }
            short.push(' ');
            fields.push(Field::new(vec![vec![Span::styled(list, st)], vec![Span::styled(short, st)]]));
            fields.push(Field::new(vec![vec![Span::styled(format!("│ {} ", format::clock(s.t_ns)), st)], vec![]]));
        }
        None => {
            fields.push(Field::new(vec![vec![Span::styled(" waiting for data ", st)]]));
            fields.push(Field::new(vec![vec![]]));
        }
    }
    match app.status() {
        Some(status) => {
            let mode = match &app.info.mode {
                Mode::Replay { .. } => "replay",
                Mode::Rehearsal { .. } => "rehearsal",
                Mode::Live => "live",
                Mode::Follow { .. } => "follow",
            };
            // The time of the snapshot on the screen, from the first event,
            // and of the whole stream when the source knows its end.
            let pos = match (status.start_ns, snap) {
                (Some(a), Some(s)) => format::elapsed(s.t_ns - a),
                _ => "0:00.0".into(),
            };
            let pos = match (status.start_ns, status.end_ns) {
                (Some(a), Some(e)) if !matches!(app.info.mode, Mode::Live | Mode::Follow { .. }) => {
                    format!("{pos} / {}", format::elapsed(e - a))
                }
                _ => pos,
            };
            let speed = if status.speed.is_finite() { format!("x{}", trim(status.speed)) } else { "fastest".into() };
            let state = if status.finished {
                "■ end"
            } else if status.paused {
                "‖ PAUSED"
            } else {
                "▶"
            };
            fields.push(Field::new(if matches!(app.info.mode, Mode::Live | Mode::Follow { .. }) {
                // Live and followed: the time since the session started; no
                // pace or pause.
                vec![vec![Span::styled(format!("│ {mode} {pos} "), st)], vec![Span::styled(format!("│ {pos} "), st)]]
            } else {
                vec![
                    vec![Span::styled(format!("│ {mode} {pos} {speed} {state} "), st)],
                    vec![Span::styled(format!("│ {pos} {speed} {state} "), st)],
                ]
            }));
            fields.push(Field::new(match &status.recording {
                // The file does not take writes: say so, with what is waiting
                // in memory and what was dropped.
                Some(_) if status.record_error.is_some() || status.record_dropped > 0 => {
                    let what = if status.record_error.is_some() { "REC FAILING" } else { "REC LOST EVENTS" };
                    let figures = format!(" {} held, {} dropped ", status.record_held, status.record_dropped);
                    let alarm = t.severity(crate::config::Severity::Alarm);
                    vec![vec![
                        Span::styled("│", st),
                        Span::styled(format!(" ● {what} "), alarm),
                        Span::styled(figures, st),
                    ]]
                }
                Some(p) => {
                    let name = p.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
                    let name = crate::printable::printable(&name).into_owned();
                    // A recording's name is termvel-DATE-TIME-COMMAND.tvrec:
                    // the figures and the command say which.
                    let short = name.strip_prefix("termvel-").unwrap_or(&name);
                    let short = short.strip_suffix(".tvrec").unwrap_or(short).to_string();
                    let form = |n: String| {
                        let mut v = vec![Span::styled("│", st), Span::styled(" ● REC ", t.recording())];
                        if !n.is_empty() {
                            v.push(Span::styled(format!(" {n} "), st));
                        }
                        v
                    };
                    vec![form(name), form(short), form(String::new())]
                }
                None => vec![vec![Span::styled("│ not recording ", st)], vec![Span::styled("│ no rec ", st)]],
            }));
        }
        None => fields.push(Field::new(vec![vec![]])),
    }
    while fields.len() < 4 {
        fields.push(Field::new(vec![vec![]]));
    }
    // The link to the broker when sharing or following: up, or down since
    // when, and what was not shared (lost); short: the state alone.
    fields.push(Field::new(match (app.share_text(), app.share_short()) {
        (Some(long), Some(short)) => {
            vec![vec![Span::styled(format!("│ {long} "), st)], vec![Span::styled(format!("│ {short} "), st)]]
        }
        _ => vec![vec![]],
    }));
    // What the user is typing, or a passing message, comes first: the
    // fields shorten to give it room (their short forms keep every figure
    // and the state), and it is cut only if that is not enough.
    let typed = app.prompt.as_ref().map(|text| (text, " Enter records, Esc cancels "));
    let wanted = match (&typed, &app.message) {
        (Some((text, help)), _) => 8 + text.chars().count() + help.chars().count(),
        (None, Some((m, _))) => m.chars().count() + 2,
        _ => 0,
    };
    let total = |fields: &[Field]| fields.iter().map(Field::width).sum::<usize>();
    let mut order = SHORTEN_ORDER.iter();
    while total(&fields) + wanted > width {
        let Some(&i) = order.next() else { break };
        fields[i].shorten();
    }
    let room = width.saturating_sub(total(&fields)).min(wanted);
    let mut parts: Vec<Span> = Vec::new();
    match (typed, &app.message) {
        (Some((text, help)), _) => {
            // The end of the note stays in sight as it is typed; the key
            // help goes first when the room is short.
            let help = if 8 + text.chars().count() + help.chars().count() <= room { help } else { " " };
            let keep = room.saturating_sub(8 + help.chars().count());
            let n = text.chars().count();
            let shown = if n > keep {
                format!("…{}", text.chars().skip(n + 1 - keep.max(1)).collect::<String>())
            } else {
                text.clone()
            };
            parts.push(Span::styled(format!(" mark: {shown}▏{help}"), st.add_modifier(Modifier::BOLD)));
        }
        (None, Some((m, _))) => {
            let m = cut(m, room.saturating_sub(2));
            parts.push(Span::styled(format!(" {m} "), st.add_modifier(Modifier::BOLD | Modifier::REVERSED)));
        }
        _ => {}
    }
    for fl in fields {
        parts.extend(fl.forms.into_iter().nth(fl.at).unwrap_or_default());
    }
    if app.status().is_none()
        && let Some(share) = app.share_text()
    {
        parts.push(Span::styled(format!("│ {share} "), t.status()));
    }
    let used: usize = parts.iter().map(|s| s.width()).sum();
    if used < width {
        parts.push(Span::styled(" ".repeat(width - used), st));
    }
    f.render_widget(Paragraph::new(Line::from(parts)), area);
}

fn trim(x: f64) -> String {
    let s = format!("{x:.2}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}
