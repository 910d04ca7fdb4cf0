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

    // The fixed columns take 82 cells with their gaps: below about 110 the
    // reason a source is down would be cut to nothing, so it goes on lines
    // of its own under the table, whole.
    let reasons_below = sources.width < 110;
    let reason_of = |v: &crate::engine::SourceView| {
        v.link_reason.as_deref().or(v.last_error.as_deref()).map(|r| crate::printable::printable(r).into_owned())
    };
    let reasons: Vec<Line> = if reasons_below {
        s.sources
            .iter()
            .filter(|v| matches!(v.kind, SourceKind::Can | SourceKind::Nmea | SourceKind::Lines))
            .filter_map(|v| {
                reason_of(v).map(|r| {
                    Line::from(vec![
                        Span::styled(format!(" {}: ", crate::printable::printable(&v.name)), t.label()),
                        Span::styled(r, t.doubtful()),
                    ])
                })
            })
            .collect()
    } else {
        Vec::new()
    };
    let sources = if reasons.is_empty() {
        sources
    } else {
        // At most half the room: the table keeps its rows.
        let want = reasons.iter().map(|l| l.width().div_ceil(sources.width.max(1) as usize)).sum::<usize>();
        let h = (want as u16).min(sources.height / 2).max(1);
        let [table, below] = Layout::vertical([Constraint::Min(3), Constraint::Length(h)]).areas(sources);
        f.render_widget(Paragraph::new(reasons).wrap(ratatui::widgets::Wrap { trim: false }), below);
        table
    };

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
                crate::printable::printable(&v.name).into_owned(),
                v.kind.as_str().to_string(),
                state.to_string(),
                v.events.to_string(),
                format!("{:.0}", v.rate_per_s),
                v.gaps.to_string(),
                v.lost.to_string(),
                v.parse_errors.to_string(),
                v.error_frames.to_string(),
                // A link that will not come up says why (the same words as
                // its alert); otherwise the last line that did not parse.
                // On a narrow screen the reason is under the table.
                match reason_of(v) {
                    Some(_) if reasons_below => "↓ below".to_string(),
                    Some(r) => r,
                    None => "—".to_string(),
                },
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
    .block(Block::new().borders(Borders::TOP).title(Span::styled(
        if s.sources_hidden > 0 {
            format!(" sources ({} more not listed) ", s.sources_hidden)
        } else {
            " sources ".to_string()
        },
        t.heading(),
    )));
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
        // The stream's count to its position (after a seek: a straight run's
        // to there), not the frames this screen happened to receive.
        Line::styled(format!(" snapshots    {}", app.status().map_or(0, |st| st.snapshots)), t.label()),
        Line::styled(format!(" bus load     {:.1} % worst case", load.worst * 100.0), t.label()),
        Line::styled(rate_line(load.frames_per_s, load.bitrate, counts.width as usize), t.dim()),
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
        Span::styled(latency_text(l.p50_us), t.value()),
        Span::styled("  p99 ", t.label()),
        Span::styled(latency_text(l.p99_us), t.value()),
        Span::styled("  max ", t.label()),
        Span::styled(latency_text(l.max_us), t.value()),
        Span::styled(format!("  ({} events)", l.count), t.dim()),
    ])];
    let rows = histogram_rows(&l.buckets, inner.height.saturating_sub(1) as usize);
    let most = rows.iter().map(|r| r.1).max().unwrap_or(0).max(1);
    let width = inner.width.saturating_sub(16) as u64;
    for (upper, n) in rows {
        let bar = "█".repeat((n * width / most) as usize);
        lines.push(Line::from(vec![
            Span::styled(format!(" ≤{:>9} ", latency_text(upper)), t.label()),
            Span::styled(bar, t.ahead()),
            Span::styled(format!(" {n}"), t.dim()),
        ]));
    }
    if l.count == 0 {
        lines.push(Line::styled(" no measurements yet", t.dim()));
    }
    f.render_widget(Paragraph::new(lines), inner);
}

/// A latency for people: µs below a millisecond, ms below ten seconds, else s.
pub fn latency_text(us: u64) -> String {
    match us {
        0..1_000 => format!("{us} µs"),
        1_000..10_000 => format!("{:.1} ms", us as f64 / 1e3),
        10_000..10_000_000 => format!("{:.0} ms", us as f64 / 1e3),
        _ => format!("{:.0} s", us as f64 / 1e6),
    }
}

/// The histogram rows to draw in `rows` lines: every bucket from the first
/// to the last that holds an event (so p99 and the maximum are always
/// shown), adjacent buckets merged from the fast end while they do not fit.
/// Each row is (upper bound µs, count).
pub fn histogram_rows(buckets: &[(u64, u64)], rows: usize) -> Vec<(u64, u64)> {
    let (Some(first), Some(last)) = (buckets.iter().position(|b| b.1 > 0), buckets.iter().rposition(|b| b.1 > 0))
    else {
        return Vec::new();
    };
    let mut out: Vec<(u64, u64)> = buckets[first..=last].to_vec();
    while out.len() > rows.max(1) {
        // Merge the two fastest rows: the slow tail is what an engineer reads.
        let (_, n0) = out.remove(0);
        out[0].1 += n0;
    }
    out
}

/// The bus load's second line in `width` columns: aligned under the figure
/// when there is room, else shorter words; the figures and units stay whole.
fn rate_line(frames_per_s: f64, bitrate: u32, width: usize) -> String {
    let kbit = bitrate / 1000;
    [
        format!("              at {frames_per_s:.0} frames/s, {kbit} kbit/s"),
        format!("  at {frames_per_s:.0} frames/s, {kbit} kbit/s"),
        format!(" {frames_per_s:.0} fr/s, {kbit} kbit/s"),
    ]
    .into_iter()
    .find(|l| l.chars().count() <= width)
    .unwrap_or_else(|| format!(" {kbit} kbit/s"))
}

#[cfg(test)]
mod tests {
    use super::*;

    // Issue 15, item 7: the histogram stopped at the ≤ 512 µs bucket while p99
    // was 2–4 ms and the maximum 10–45 ms.
    #[test]
    fn the_slow_tail_is_always_drawn() {
        // Power-of-two buckets as the feed screen reads them: 1 µs … 32 768 µs.
        let mut b: Vec<(u64, u64)> = (0..16).map(|i| (1u64 << i, 0)).collect();
        b[3].1 = 10; // ≤ 8 µs
        b[9].1 = 500; // ≤ 512 µs
        b[12].1 = 7; // ≤ 4 096 µs: the p99
        b[15].1 = 1; // ≤ 32 768 µs: the maximum
        let rows = histogram_rows(&b, 5);
        assert_eq!(rows.len(), 5);
        assert_eq!(rows.last(), Some(&(32_768, 1)), "the maximum's bucket is the last row");
        assert!(rows.contains(&(4_096, 7)), "{rows:?}");
        assert_eq!(rows.iter().map(|r| r.1).sum::<u64>(), 518, "nothing is lost in merging");
        // Enough room: from the first to the last non-empty bucket, gaps kept.
        let all = histogram_rows(&b, 40);
        assert_eq!(all.len(), 13);
        assert_eq!(all[0], (8, 10));
        assert!(histogram_rows(&[(1, 0), (2, 0)], 5).is_empty());
    }

    #[test]
    fn large_latencies_read_in_ms() {
        assert_eq!(latency_text(512), "512 µs");
        assert_eq!(latency_text(4_096), "4.1 ms");
        assert_eq!(latency_text(32_768), "33 ms");
        assert_eq!(latency_text(12_000_000), "12 s");
    }
}
