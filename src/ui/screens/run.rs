//! The run screen: what the engineer watches during a pull. Speed in large
//! figures with its source and age; meters for power demand against power
//! available, state of charge and boost time left with the binding limit;
//! the projected peak with its band, the braking point and the target; the
//! speed trace over distance with the projection drawn ahead of the car;
//! and the alerts, newest first.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::Style;
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType, Paragraph};

use crate::engine::Snapshot;
use crate::engine::derived::Derived;
use crate::engine::progress::Phase;
use crate::ui::app::App;
use crate::ui::format::{self, Units};
use crate::ui::theme::severity_tag;
use crate::ui::widgets::figures::{self, Figures};
use crate::ui::widgets::meter::Meter;
use crate::units::Measure;

pub fn draw(f: &mut Frame, area: Rect, app: &App) {
    let Some(s) = app.snapshot() else {
        f.render_widget(Paragraph::new("waiting for the first snapshot…").style(app.theme.dim()), area);
        return;
    };
    // The alerts column grows with the terminal: a third of it from 120
    // columns, 28 below (the chart needs the rest at 80).
    let alerts_w = if area.width >= 120 { (area.width / 3).min(56) } else { 28 };
    let [top, summary, bottom] =
        Layout::vertical([Constraint::Length(5), Constraint::Length(3), Constraint::Min(6)]).areas(area);
    let [speed_area, meters] = Layout::horizontal([Constraint::Length(36), Constraint::Min(30)]).areas(top);
    let [chart, alerts] = Layout::horizontal([Constraint::Min(30), Constraint::Length(alerts_w)]).areas(bottom);
    draw_speed(f, speed_area, app, s);
    draw_meters(f, meters, app, &s.derived);
    draw_summary(f, summary, app, s);
    draw_trace(f, chart, app, s);
    draw_alerts(f, alerts, app, s);
}

fn draw_speed(f: &mut Frame, area: Rect, app: &App, s: &Snapshot) {
    let t = &app.theme;
    let d = &s.derived;
    let u = app.units;
    let (age, stale) = match s.channel_named(d.speed_source) {
        Some(c) => (format::age(c.age_s), c.stale),
        None => (format::UNKNOWN.to_string(), true),
    };
    let head = if d.speed_mps.is_some() {
        Line::from(vec![
            Span::styled(" SPEED ", t.heading()),
            Span::styled(format!("{} · {age} old", d.speed_source), if stale { t.doubtful() } else { t.label() }),
        ])
    } else {
        Line::from(vec![Span::styled(" SPEED ", t.heading()), Span::styled("no fresh speed channel", t.doubtful())])
    };
    f.render_widget(Paragraph::new(head), Rect { height: 1, ..area });
    let text = match d.speed_mps {
        Some(v) => format!("{:.1}", u.speed(v)),
        None => "---.-".into(),
    };
    let w = figures::width(&text);
    let style = if d.speed_mps.is_none() || stale { t.doubtful() } else { t.figure() };
    let fig_area =
        Rect::new(area.x + 1, area.y + 1, w.min(area.width.saturating_sub(1)), 3.min(area.height.saturating_sub(1)));
    f.render_widget(Figures { text: &text, style }, fig_area);
    let unit_x = area.x + 1 + w + 1;
    if unit_x + 5 < area.x + area.width {
        f.render_widget(Paragraph::new(Span::styled(u.speed_unit(), t.label())), Rect::new(unit_x, area.y + 3, 5, 1));
        // Beside the figures: where the car is, and GNSS against wheel speed
        // (a slip and sensor check) when both are fresh.
        let room = area.x + area.width - unit_x;
        let at = format!("at {}", format::distance(u, Some(d.distance_m)));
        f.render_widget(Paragraph::new(Span::styled(at, t.value())), Rect::new(unit_x, area.y + 1, room, 1));
        if let Some(diff) = d.progress.gnss_minus_wheel_mps {
            let text = format!("GNSS {}", format::signed(u, Measure::Speed, diff));
            let style = if diff.abs() > 2.0 { t.doubtful() } else { t.label() };
            f.render_widget(Paragraph::new(Span::styled(text, style)), Rect::new(unit_x, area.y + 2, room, 1));
        }
    }
    let wind = d.wind_mps.map_or(String::new(), |w| {
        format!(" · {} {}", if w >= 0.0 { "head" } else { "tail" }, format::rounded(u, Measure::Speed, Some(w.abs())))
    });
    let tyre = d.tyre.map(|ty| {
        format!("tyres {} {} under{wind}", format::num(Some(u.speed(ty.margin_mps)), 0), u.speed_unit())
            .chars()
            .take(area.width.saturating_sub(2) as usize)
            .collect::<String>()
    });
    if let Some(line) = tyre {
        let style = if d.tyre.is_some_and(|ty| ty.margin_mps < app.info.config.alerts.limits.tyre_margin_low_mps) {
            t.severity(crate::config::Severity::Alarm)
        } else {
            t.label()
        };
        f.render_widget(
            Paragraph::new(Span::styled(format!(" {line}"), style)),
            Rect::new(area.x, area.y + 4, area.width, 1),
        );
    }
}

fn meter<'a>(
    app: &App,
    label: &'a str,
    value: Option<f64>,
    full: f64,
    mark: Option<f64>,
    text: String,
    bar: Style,
) -> Meter<'a> {
    let t = &app.theme;
    Meter {
        label,
        value,
        full,
        mark,
        text,
        label_style: t.label(),
        bar_style: bar,
        mark_style: t.limit(),
        text_style: t.value(),
        label_width: 8,
        text_width: 26,
    }
}

fn draw_meters(f: &mut Frame, area: Rect, app: &App, d: &Derived) {
    let t = &app.theme;
    let u = app.units;
    let rows = Layout::vertical([Constraint::Length(1); 5]).split(area);
    let cfg = &app.info.config;
    // The `┃` on each meter marks a different reference; its text names it
    // with the same glyph (┃ available, ┃ reserve, ┃ rated).
    if let Some(r) = &d.road_load {
        let full = r.available_w.max(r.demand_w).max(1.0) * 1.08;
        let text =
            format!("{} of ┃{} avail.", format::power(u, Some(r.demand_w)), format::power(u, Some(r.available_w)));
        f.render_widget(meter(app, "demand", Some(r.demand_w), full, Some(r.available_w), text, t.ahead()), rows[0]);
        let text = format!("{} road load, ┃ avail.", format::power(u, Some(r.total_w)));
        f.render_widget(meter(app, "road", Some(r.total_w), full, Some(r.available_w), text, t.behind()), rows[1]);
    } else {
        f.render_widget(Paragraph::new(Span::styled("demand  — no speed", t.doubtful())), rows[0]);
    }
    // State of charge with the reserve marked.
    let b = &d.battery;
    let reserve = cfg.vehicle.battery.soc_reserve;
    let soc_text = match b.soc {
        Some(soc) => format!("{:.0} %, ┃reserve {:.0} %", soc * 100.0, reserve * 100.0),
        None => format!("{}, ┃reserve {:.0} %", format::UNKNOWN, reserve * 100.0),
    };
    let low = b.soc.is_some_and(|s| s < reserve + 0.05);
    f.render_widget(
        meter(app, "charge", b.soc, 1.0, Some(reserve), soc_text, if low { t.limit() } else { t.good() }),
        rows[2],
    );
    let (text, style) = boost_text(app, d);
    f.render_widget(meter(app, "boost", d.boost_left.seconds, 60.0, None, text, style), rows[3]);
    // Deliverable battery power against rated.
    let text = format!(
        "{} of ┃{} rated",
        format::electric_power(u, b.deliverable_w),
        format::electric_power(u, Some(b.rated_w))
    );
    f.render_widget(
        meter(app, "battery", b.deliverable_w, b.rated_w * 1.05, Some(b.rated_w), text, t.ahead()),
        rows[4],
    );
}

/// The boost meter's words: how long the pack can still give the power the
/// target needs, at that power, and the limit that ends it (charge,
/// derate, heat: the battery screen's rows), or that it already gives less.
/// A `?` says the derating curve is still the vehicle file's.
pub fn boost_text(app: &App, d: &Derived) -> (String, Style) {
    let t = &app.theme;
    let u = app.units;
    let l = &d.boost_left;
    let prior = if l.curve_fitted { "" } else { " ?" };
    let need = format::electric_power(u, l.need_w);
    let short = l.seconds.is_some_and(|s| s < app.info.config.alerts.limits.boost_left_low_s);
    let style = if short {
        t.limit()
    } else if l.curve_fitted {
        t.good()
    } else {
        t.doubtful()
    };
    let limit = |b: crate::engine::derived::BoostLimit| match b {
        crate::engine::derived::BoostLimit::Energy => "charge",
        crate::engine::derived::BoostLimit::Power => "derate",
        crate::engine::derived::BoostLimit::Thermal => "heat",
    };
    let text = match (l.seconds, l.binding) {
        _ if d.battery.deliverable_w.is_none() => return ("— no battery data".into(), t.doubtful()),
        (Some(s), Some(b)) if s < 0.05 && b == crate::engine::derived::BoostLimit::Power => {
            format!("below {need} need now{prior}")
        }
        (Some(s), Some(b)) => format!("{} at {need}, {}{prior}", format::seconds(Some(s)), limit(b)),
        _ => format!("no limit at {need}{prior}"),
    };
    (text, style)
}

/// What the projection stands on, in words the power and battery screens
/// share: the drag and rolling coefficients (the estimate when the engine
/// uses it, else the vehicle file's) and the derating curve (the fit, else
/// the file's); `true` when both are fitted and settled.
fn basis_words(d: &Derived, narrow: bool) -> (String, bool) {
    let estimate_used =
        d.road_load.is_some_and(|r| r.cda_source == crate::engine::derived::CoefficientSource::Estimate);
    let fitted = d.boost_left.curve_fitted;
    if d.estimate.converged && estimate_used && fitted {
        return ("estimates converged".into(), true);
    }
    let words = match (narrow, estimate_used, fitted) {
        (true, true, true) => "drag est. · derate fit",
        (true, true, false) => "drag est. · derate file",
        (true, false, true) => "drag file · derate fit",
        (true, false, false) => "drag file · derate file",
        (false, true, true) => "drag: estimate · derating: fit",
        (false, true, false) => "drag: estimate · derating: file's",
        (false, false, true) => "drag: file's · derating: fit",
        (false, false, false) => "drag: file's · derating: file's",
    };
    (words.into(), false)
}

fn draw_summary(f: &mut Frame, area: Rect, app: &App, s: &Snapshot) {
    let t = &app.theme;
    let u = app.units;
    let d = &s.derived;
    let su = u.speed_unit();
    let mut lines = Vec::new();
    let pr = &d.progress;
    let exit_kmh = format!("{} {su}", format::num(Some(u.speed(app.info.config.track.exit_speed_mps)), 0));
    let stop_by = format::distance(u, Some(app.info.config.track.stop_by_m()));
    // Once the car brakes the projection is over: the panel says what was
    // reached, and where the car will be down to the exit speed against the
    // stop-by line (both from the engine's run-so-far view).
    if matches!(pr.phase, Phase::Braking | Phase::Stopped) {
        let target = format!("{} {su}", format::num(Some(u.speed(app.info.config.track.target_speed_mps)), 0));
        lines.push(Line::from(vec![
            Span::styled(" PEAK   ", t.heading()),
            Span::styled(format!("{} {su}", format::num(pr.peak_mps.map(|v| u.speed(v)), 1)), t.value()),
            Span::styled(format!(" reached at {}", format::distance(u, pr.peak_at_m)), t.label()),
        ]));
        let by = pr.peak_minus_target_mps.map_or(0.0, |x| u.speed(x.abs()));
        let verdict = match pr.target_at_m {
            Some(at) => Span::styled(
                format!("REACHED at {}, peak {} {su} above", format::distance(u, Some(at)), format::num(Some(by), 1)),
                t.good(),
            ),
            None => Span::styled(
                format!("MISSED by {} {su}", format::num(Some(by), 1)),
                t.severity(crate::config::Severity::Caution),
            ),
        };
        lines.push(Line::from(vec![
            Span::styled(" TARGET ", t.heading()),
            Span::styled(format!("{target}  "), t.value()),
            verdict,
        ]));
        let (word, when) = if pr.phase == Phase::Stopped { ("STOPPED", "at") } else { ("BRAKING", "by") };
        let margin = pr.stop_margin_m.map(|m| {
            if m >= 0.0 {
                (format!("{} spare", format::distance(u, Some(m))), t.good())
            } else {
                (format!("{} over", format::distance(u, Some(-m))), t.severity(crate::config::Severity::Alarm))
            }
        });
        let mut spans = vec![
            Span::styled(" BRAKE  ", t.heading()),
            Span::styled(format!("{word} · "), t.value()),
            Span::styled(
                format!("{exit_kmh} {when} {} · stop-by {stop_by}: ", format::distance(u, pr.exit_speed_at_m)),
                t.label(),
            ),
        ];
        if let Some((m, style)) = margin {
            spans.push(Span::styled(m, style));
        }
        lines.push(Line::from(spans));
        f.render_widget(Paragraph::new(lines), area);
        return;
    }
    match &d.projection {
        Some(p) => {
            let (words, good) = basis_words(d, area.width < 100);
            let basis = Span::styled(format!("  {words}"), if good { t.good() } else { t.doubtful() });
            lines.push(Line::from(vec![
                Span::styled(" PEAK   ", t.heading()),
                Span::styled(format!("{} {su}", format::num(Some(u.speed(p.peak_mps)), 0)), t.value()),
                Span::styled(
                    format!(
                        " ({}–{})  at {}, {}",
                        format::num(Some(u.speed(p.peak_low_mps)), 0),
                        format::num(Some(u.speed(p.peak_high_mps)), 0),
                        format::distance(u, Some(p.peak_at_m)),
                        if p.peak_in_s < 0.5 {
                            "now".to_string()
                        } else {
                            format!("in {}", format::seconds(Some(p.peak_in_s)))
                        }
                    ),
                    t.label(),
                ),
                basis,
            ]));
            let target = format!("{} {su}", format::num(Some(u.speed(p.target_mps)), 0));
            let verdict = if p.target_reachable {
                match (p.target_in_s, p.target_at_m) {
                    (Some(ts), Some(xm)) if ts > 0.0 => Span::styled(
                        format!("reachable: in {} at {}", format::seconds(Some(ts)), format::distance(u, Some(xm))),
                        t.good(),
                    ),
                    _ => Span::styled("reached".to_string(), t.good()),
                }
            } else {
                Span::styled(
                    "OUT OF REACH before the braking point".to_string(),
                    t.severity(crate::config::Severity::Caution),
                )
            };
            lines.push(Line::from(vec![
                Span::styled(" TARGET ", t.heading()),
                Span::styled(format!("{target}  "), t.value()),
                verdict,
            ]));
        }
        None => {
            let why = d.projection_note.unwrap_or("no projection");
            lines.push(Line::from(vec![
                Span::styled(" PEAK   ", t.heading()),
                Span::styled(format!("— ({why})"), t.doubtful()),
            ]));
            lines.push(Line::from(vec![
                Span::styled(" TARGET ", t.heading()),
                Span::styled(
                    format!("{} {su}", format::num(Some(u.speed(app.info.config.track.target_speed_mps)), 0)),
                    t.value(),
                ),
            ]));
        }
    }
    match d.braking {
        Some(b) if b.passed => lines.push(Line::from(vec![
            Span::styled(" BRAKE  ", t.heading()),
            Span::styled(
                format!("PASSED by {} — brake now", format::distance(u, Some(-b.distance_m))),
                t.severity(crate::config::Severity::Alarm),
            ),
        ])),
        Some(b) => lines.push(Line::from(vec![
            Span::styled(" BRAKE  ", t.heading()),
            Span::styled(format!("in {}", format::seconds(Some(b.in_s))), t.value()),
            Span::styled(
                // Braking from the point (at the speed the projection
                // reaches there) ends at the stop-by line: the line says
                // so, rather than a stopping distance from today's speed,
                // which added to the point would overrun it.
                format!(
                    " · {} to go · at {} · {exit_kmh} by {stop_by}",
                    format::distance(u, Some(b.distance_m)),
                    format::distance(u, Some(b.point_m)),
                ),
                t.label(),
            ),
        ])),
        None => lines
            .push(Line::from(vec![Span::styled(" BRAKE  ", t.heading()), Span::styled(format::UNKNOWN, t.doubtful())])),
    }
    f.render_widget(Paragraph::new(lines), area);
}

fn draw_trace(f: &mut Frame, area: Rect, app: &App, s: &Snapshot) {
    let t = &app.theme;
    let u = app.units;
    let cfg = &app.info.config;
    let d = &s.derived;
    let zone = cfg.track.zone_length_m;
    let vmax = (cfg.vehicle.tyre_rated_mps.max(cfg.track.target_speed_mps) * 1.05).max(10.0);
    // Both axes in the unit set's display units: speed, and distance in km
    // or mi (the run's figures say the same units). `zone` and the column
    // of a place are in metres; the chart's x data in the display unit.
    let y = |v: f64| u.speed(v);
    let xu = u.course_unit();
    let x = |m: f64| xu.from_si(m);
    let behind: Vec<(f64, f64)> = app.trace.iter().map(|&(m, v)| (x(m), y(v))).collect();
    let ahead: Vec<(f64, f64)> =
        d.projection.as_ref().map(|p| p.trajectory.iter().map(|&(m, v)| (x(m), y(v))).collect()).unwrap_or_default();
    let block = Block::new()
        .borders(Borders::TOP)
        .title(Span::styled(format!(" speed over distance ({}, {}) ", u.speed_unit(), xu.symbol), t.heading()));
    let inner = block.inner(area);
    f.render_widget(block, area);
    // The legend is a line of its own above the chart (ratatui's legend box
    // has no samples and covered the brake and stop-by lines), each series
    // with the very mark it is drawn with; two lines when narrow.
    let legend = legend_lines(app, s, inner.width as usize);
    let [legend_row, chart_area] =
        Layout::vertical([Constraint::Length(legend.len() as u16), Constraint::Min(3)]).areas(inner);
    f.render_widget(Paragraph::new(legend), legend_row);
    // The car's trace and its projection are the datasets; the reference
    // lines (target, braking point, stop-by) and the marks are drawn after,
    // into the cells the data left empty, so they never hide it.
    let datasets = vec![
        Dataset::default().marker(Marker::Braille).graph_type(GraphType::Line).style(t.behind()).data(&behind),
        Dataset::default().marker(Marker::Dot).graph_type(GraphType::Scatter).style(t.ahead()).data(&ahead),
    ];
    let along = |m: f64| format!("{:.1}", x(m));
    let chart = Chart::new(datasets)
        .x_axis(
            Axis::default()
                .bounds([0.0, x(zone)])
                .labels([along(0.0), along(zone / 2.0), along(zone)])
                .style(t.label()),
        )
        .y_axis(
            Axis::default()
                .bounds([0.0, y(vmax)])
                .labels(["0".to_string(), format!("{:.0}", y(vmax) / 2.0), format!("{:.0}", y(vmax))])
                .style(t.label()),
        )
        .legend_position(None);
    f.render_widget(chart, chart_area);
    let Some(plot) = plot_area(f.buffer_mut(), chart_area) else { return };
    let col = |x_m: f64| -> Option<u16> {
        (0.0..=zone).contains(&x_m).then(|| plot.x + ((x_m / zone) * (plot.width - 1) as f64).round() as u16)
    };
    let row = |v: f64| -> Option<u16> {
        let r = (1.0 - y(v) / y(vmax)) * (plot.height - 1) as f64;
        (0.0..=(plot.height - 1) as f64).contains(&r).then(|| plot.y + r.round() as u16)
    };
    let buf = f.buffer_mut();
    let mut put = |x: u16, yy: u16, sym: &str, style: Style| {
        let cell = &mut buf[(x, yy)];
        if cell.symbol() == " " {
            cell.set_symbol(sym).set_style(style);
        }
    };
    if let Some(r) = row(cfg.track.target_speed_mps) {
        for x in plot.x..plot.x + plot.width {
            put(x, r, TARGET_MARK, t.label());
        }
    }
    if let Some(c) = col(cfg.track.stop_by_m()) {
        for r in plot.y..plot.y + plot.height {
            put(c, r, STOP_BY_MARK, t.dim());
        }
    }
    if let Some(c) = d.braking.and_then(|b| col(b.point_m)) {
        for r in plot.y..plot.y + plot.height {
            put(c, r, BRAKE_MARK, t.limit());
        }
    }
    // Marks at the distance they were made, on the plot's top row.
    for m in s.mark_places.iter() {
        if let Some(c) = col(m.distance_m) {
            let cell = &mut buf[(c, plot.y)];
            cell.set_symbol(MARK_MARK).set_style(t.heading());
        }
    }
}

/// The run chart's marks, the same in the legend, on the chart and in help.
pub const TARGET_MARK: &str = "╌";
pub const BRAKE_MARK: &str = "┆";
pub const STOP_BY_MARK: &str = "┊";
pub const MARK_MARK: &str = "▼";

/// The run chart's legend: each series with a sample of its mark, the
/// reference lines, and the latest mark with its note and place, laid out
/// in at most two lines of `width` (an item is never split; the note is
/// cut to the room left, the place stays whole).
fn legend_lines(app: &App, s: &Snapshot, width: usize) -> Vec<Line<'static>> {
    let t = &app.theme;
    let u = app.units;
    let cfg = &app.info.config;
    let item = |mark: String, mark_style: Style, words: String| {
        vec![Span::styled(format!(" {mark} "), mark_style), Span::styled(words, t.label())]
    };
    let mut items = vec![
        item("⣀⡠".into(), t.behind(), "driven".into()),
        item("•••".into(), t.ahead(), "projected".into()),
        item(format!("{TARGET_MARK}{TARGET_MARK}"), t.label(), "target".into()),
        item(BRAKE_MARK.into(), t.limit(), "brake".into()),
        item(STOP_BY_MARK.into(), t.dim(), format!("stop-by {}", format::distance(u, Some(cfg.track.stop_by_m())))),
    ];
    let w = |it: &Vec<Span>| it.iter().map(|s| s.width()).sum::<usize>();
    let mut lines: Vec<Vec<Span<'static>>> = vec![Vec::new()];
    for it in items.drain(..) {
        let cur: usize = lines.last().map_or(0, |l| l.iter().map(|s| s.width()).sum());
        if cur > 0 && cur + w(&it) > width {
            lines.push(Vec::new());
        }
        lines.last_mut().expect("a line").extend(it);
    }
    if let Some(m) = s.mark_places.last() {
        let at = format!(" at {}", format::distance(u, Some(m.distance_m)));
        let cur: usize = lines.last().map_or(0, |l| l.iter().map(|s| s.width()).sum());
        let note = crate::printable::printable(&m.text).into_owned();
        // Where it goes: the end of the last line if the whole note fits
        // there, else a line of its own (the second at most).
        let fixed = format!(" {MARK_MARK} mark ").chars().count() + at.chars().count();
        let n = note.chars().count();
        let room_here = width.saturating_sub(cur + fixed);
        if n > room_here && lines.len() < 2 {
            lines.push(Vec::new());
        }
        let cur: usize = lines.last().map_or(0, |l| l.iter().map(|s| s.width()).sum());
        let room = width.saturating_sub(cur + fixed);
        let note = if n > room { note.chars().take(room.saturating_sub(1)).collect::<String>() + "…" } else { note };
        let line = lines.last_mut().expect("a line");
        line.push(Span::styled(format!(" {MARK_MARK} "), t.heading()));
        line.push(Span::styled(format!("mark {note}{at}"), t.label()));
    }
    lines.truncate(2);
    lines.into_iter().map(Line::from).collect()
}

/// The chart's plotting area, found from the axes ratatui drew (the corner
/// `└` where they meet): the cells right of the y axis and above the x axis.
fn plot_area(buf: &ratatui::buffer::Buffer, area: Rect) -> Option<Rect> {
    for yy in (area.y..area.y + area.height).rev() {
        for x in area.x..area.x + area.width {
            if buf[(x, yy)].symbol() == "└" {
                let w = area.x + area.width - (x + 1);
                let h = yy - area.y;
                return (w >= 2 && h >= 2).then(|| Rect::new(x + 1, area.y, w, h));
            }
        }
    }
    None
}

fn draw_alerts(f: &mut Frame, area: Rect, app: &App, s: &Snapshot) {
    let t = &app.theme;
    let block = Block::new()
        .borders(Borders::TOP | Borders::LEFT)
        .title(Span::styled(" alerts · a acknowledges ", t.heading()));
    let inner = block.inner(area);
    f.render_widget(block, area);
    let mut lines: Vec<Line> = Vec::new();
    if s.alerts.is_empty() {
        lines.push(Line::styled(" none", t.good()));
    }
    let width = inner.width.saturating_sub(1) as usize;
    for (shown, a) in s.alerts.iter().enumerate() {
        let ago = (s.t_ns - a.raised_ns) as f64 * 1e-9;
        // Active and cleared differ by a mark and words, not colour alone:
        // ● active now, ○ cleared (still listed until acknowledged), ✓ acknowledged.
        let state = match (a.active, a.acked) {
            (true, false) => format!("● active · {} ago", format::age(ago)),
            (true, true) => format!("● active ✓ · {} ago", format::age(ago)),
            (false, false) => format!("○ cleared · {} ago", format::age(ago)),
            (false, true) => format!("○ cleared ✓ · {} ago", format::age(ago)),
        };
        // Three lines keep the figure at the end of the longer messages.
        // Messages carry names from the data (sources, channels): escaped.
        // Worded in the unit set shown (the engine keeps the numbers as values).
        let text = wrap(&crate::printable::printable(&a.text.render(app.units)), width, 3);
        // Keep a line for "… n more" unless this is the last alert.
        let need = 2 + text.len() + usize::from(shown + 1 < s.alerts.len());
        if lines.len() + need > inner.height as usize {
            lines.push(Line::styled(format!(" … {} more", s.alerts.len() - shown), t.label()));
            break;
        }
        let style = if a.acked || !a.active { t.dim() } else { t.severity(a.severity) };
        lines.push(Line::from(vec![Span::styled(severity_tag(a.severity), style)]));
        lines.push(Line::styled(format!("   {state}"), t.label()));
        for part in text {
            lines.push(Line::styled(format!(" {part}"), if a.active && !a.acked { t.value() } else { t.dim() }));
        }
    }
    f.render_widget(Paragraph::new(lines), inner);
}

/// Word-wraps `text` to `width` characters, at most `max` lines (the last
/// cut with "…" if the text goes on).
fn wrap(text: &str, width: usize, max: usize) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    let mut cur = String::new();
    for word in text.split_whitespace() {
        let n = cur.chars().count();
        if n > 0 && n + 1 + word.chars().count() > width {
            lines.push(std::mem::take(&mut cur));
        }
        if !cur.is_empty() {
            cur.push(' ');
        }
        cur.push_str(word);
    }
    if !cur.is_empty() {
        lines.push(cur);
    }
    if lines.len() > max {
        lines.truncate(max);
        let last = &mut lines[max - 1];
        let keep: String = last.chars().take(width.saturating_sub(1)).collect();
        *last = format!("{keep}…");
    }
    for l in &mut lines {
        if l.chars().count() > width {
            *l = l.chars().take(width.saturating_sub(1)).collect::<String>() + "…";
        }
    }
    lines
}

/// The run screen for terminals below 80×24: speed with its source and age,
/// the alerts with their state, the caution and the status line (position,
/// pause, recording), and what is hidden. `area` is the whole terminal, so
/// the size it names is the terminal's.
pub fn draw_small(f: &mut Frame, area: Rect, app: &App) {
    let t = &app.theme;
    let [body, caution, status] =
        Layout::vertical([Constraint::Min(1), Constraint::Length(1), Constraint::Length(1)]).areas(area);
    let mut lines = vec![Line::styled(
        format!("terminal {}×{} is below 80×24: showing speed and alerts only;", area.width, area.height),
        t.doubtful(),
    )];
    lines.push(Line::styled("enlarge it for the projection, meters and charts.", t.doubtful()));
    if let Some(s) = app.snapshot() {
        let u: Units = app.units;
        let d = &s.derived;
        let (age, stale) = match s.channel_named(d.speed_source) {
            Some(c) => (format::age(c.age_s), c.stale),
            None => (format::UNKNOWN.to_string(), true),
        };
        lines.push(Line::from(vec![
            Span::styled("SPEED ", t.heading()),
            Span::styled(
                format!("{} {}", format::speed(u, d.speed_mps), u.speed_unit()),
                if stale || d.speed_mps.is_none() { t.doubtful() } else { t.figure() },
            ),
            Span::styled(
                format!("  {} · {age} old{}", d.speed_source, if stale { " STALE" } else { "" }),
                if stale { t.doubtful() } else { t.label() },
            ),
        ]));
        for a in &s.alerts {
            // The same marks as the full screen: ● active, ○ cleared, ✓ acknowledged.
            let state = match (a.active, a.acked) {
                (true, false) => "●",
                (true, true) => "● ✓",
                (false, false) => "○",
                (false, true) => "○ ✓",
            };
            let style = if a.acked || !a.active { t.dim() } else { t.severity(a.severity) };
            lines.push(Line::from(vec![
                Span::styled(severity_tag(a.severity), style),
                Span::styled(format!(" {state} "), t.label()),
                Span::styled(
                    crate::printable::printable(&a.text.render(u)).into_owned(),
                    if a.active && !a.acked { t.value() } else { t.dim() },
                ),
            ]));
        }
    }
    f.render_widget(Paragraph::new(lines).wrap(ratatui::widgets::Wrap { trim: true }), body);
    crate::ui::chrome::caution(f, caution, app);
    crate::ui::chrome::status(f, status, app);
}

#[cfg(test)]
mod tests {
    use super::wrap;

    #[test]
    fn wraps_words_and_marks_a_cut() {
        assert_eq!(
            wrap("target 365 km/h out of reach: projected peak 362 km/h", 26, 2),
            vec!["target 365 km/h out of", "reach: projected peak 362…"]
        );
        assert_eq!(wrap("short", 26, 2), vec!["short"]);
        assert_eq!(wrap("averyveryveryverylongword x", 10, 2), vec!["averyvery…", "x"]);
    }
}
