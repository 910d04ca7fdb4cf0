//! The feed screen: link health per source (state, rate, gaps, parse
//! errors, CAN error frames, the last error), the CAN bus load, the counters
//! of the whole stream, and the arrival-to-applied latency histogram.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Row, Table};

use crate::event::{LinkState, SourceKind};
use crate::ui::app::App;

pub fn draw(f: &mut Frame, area: Rect, app: &App) {
    let t = &app.theme;
    let Some(s) = app.snapshot() else {
        f.render_widget(Paragraph::new("waiting for the first snapshot…").style(t.dim()), area);
        return;
    };
    let [sources, bottom] = Layout::vertical([Constraint::Min(6), Constraint::Length(12)]).areas(area);
    let [counts, latency] = Layout::horizontal([Constraint::Percentage(45), Constraint::Percentage(55)]).areas(bottom);

    let header = Row::new([
        "source",
        "kind",
        "state",
        "events",
        "per s",
        "gaps",
        "lost",
        "bad lines",
        "CAN errors",
        "last error",
    ])
    .style(t.label());
    let rows: Vec<Row> = s
        .sources
        .iter()
        .filter(|v| matches!(v.kind, SourceKind::Can | SourceKind::Nmea | SourceKind::Lines))
        .map(|v| {
            let stale = v.age_s.is_some_and(|a| a > 1.0);
            let (state, style) = match v.link {
                Some(LinkState::Down) => ("▼ DOWN", t.severity(crate::config::Severity::Alarm)),
                Some(LinkState::Retrying) => ("↻ RETRYING", t.doubtful()),
                _ if stale => ("◆ STALE", t.doubtful()),
                _ => ("▲ up", t.good()),
            };
            Row::new([
                v.name.clone(),
                v.kind.as_str().to_string(),
                state.to_string(),
                v.events.to_string(),
                format!("{:.0}", v.rate_per_s),
                v.gaps.to_string(),
                v.lost.to_string(),
                v.parse_errors.to_string(),
                v.error_frames.to_string(),
                v.last_error.clone().unwrap_or_else(|| "—".into()),
            ])
            .style(style)
        })
        .collect();
    let table = Table::new(
        rows,
        [
            Constraint::Length(10),
            Constraint::Length(6),
            Constraint::Length(11),
            Constraint::Length(9),
            Constraint::Length(7),
            Constraint::Length(5),
            Constraint::Length(6),
            Constraint::Length(9),
            Constraint::Length(10),
            Constraint::Min(10),
        ],
    )
    .header(header)
    .block(Block::new().borders(Borders::TOP).title(Span::styled(" sources ", t.heading())));
    f.render_widget(table, sources);

    let c = &s.counters;
    // From the config alone: computed once, when the app starts.
    let load = &app.bus_load;
    let lines = vec![
        Line::styled(format!(" events       {}", c.events), t.value()),
        Line::styled(format!(" CAN frames   {}", c.can_frames), t.value()),
        Line::styled(format!(" samples      {}", c.samples), t.value()),
        Line::styled(
            format!(" out of range {}", c.out_of_range),
            if c.out_of_range > 0 { t.doubtful() } else { t.value() },
        ),
        Line::styled(
            format!(" bad lines    {}", c.parse_errors),
            if c.parse_errors > 0 { t.doubtful() } else { t.value() },
        ),
        Line::styled(format!(" replies      {}", c.replies), t.label()),
        Line::styled(
            format!(" rejected     {}", c.rejected_values),
            if c.rejected_values > 0 { t.doubtful() } else { t.value() },
        ),
        Line::styled(format!(" time jumps   {}", c.time_jumps), t.value()),
        Line::styled(format!(" snapshots    {} received", app.snapshots_seen), t.label()),
        Line::styled(format!(" bus load     {:.1} % worst case", load.worst * 100.0), t.label()),
        Line::styled(
            format!("              at {:.0} frames/s, {} kbit/s", load.frames_per_s, load.bitrate / 1000),
            t.dim(),
        ),
    ];
    let block = Block::new().borders(Borders::TOP).title(Span::styled(" stream ", t.heading()));
    let inner = block.inner(counts);
    f.render_widget(block, counts);
    f.render_widget(Paragraph::new(lines), inner);

    let l = &app.latency;
    let block = Block::new()
        .borders(Borders::TOP | Borders::LEFT)
        .title(Span::styled(" arrival → applied latency ", t.heading()));
    let inner = block.inner(latency);
    f.render_widget(block, latency);
    let mut lines = vec![Line::from(vec![
        Span::styled(" p50 ", t.label()),
        Span::styled(format!("{} µs", l.p50_us), t.value()),
        Span::styled("  p99 ", t.label()),
        Span::styled(format!("{} µs", l.p99_us), t.value()),
        Span::styled("  max ", t.label()),
        Span::styled(format!("{} µs", l.max_us), t.value()),
        Span::styled(format!("  ({} events)", l.count), t.dim()),
    ])];
    let most = l.buckets.iter().map(|b| b.1).max().unwrap_or(0).max(1);
    let width = inner.width.saturating_sub(16) as u64;
    for &(upper, n) in l.buckets.iter().filter(|b| b.1 > 0).take(inner.height.saturating_sub(1) as usize) {
        let bar = "█".repeat((n * width / most) as usize);
        lines.push(Line::from(vec![
            Span::styled(format!(" ≤{:>7} µs ", upper), t.label()),
            Span::styled(bar, t.ahead()),
            Span::styled(format!(" {n}"), t.dim()),
        ]));
    }
    if l.count == 0 {
        lines.push(Line::styled(" no measurements yet", t.dim()));
    }
    f.render_widget(Paragraph::new(lines), inner);
}
