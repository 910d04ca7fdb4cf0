//! The power screen: the road-load breakdown (aero, rolling, grade,
//! inertial) as numbers and meters; the drag and rolling-resistance
//! estimates with their uncertainty and whether they have converged; the
//! air density and where it came from; and power against speed: road load at
//! the present estimates, power available, and where the car is now. It
//! only draws: every number comes from the snapshot.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType, Paragraph};

use crate::engine::Snapshot;
use crate::engine::derived::{AirOrigin, CoefficientSource};
use crate::engine::power_curve::PowerPoint;
use crate::ui::app::App;
use crate::ui::format;
use crate::ui::widgets::meter::Meter;
use crate::units::Measure;

pub fn draw(f: &mut Frame, area: Rect, app: &App) {
    let Some(s) = app.snapshot() else {
        f.render_widget(Paragraph::new("waiting for the first snapshot…").style(app.theme.dim()), area);
        return;
    };
    let [top, chart] = Layout::vertical([Constraint::Length(10), Constraint::Min(6)]).areas(area);
    let [breakdown, estimate] = Layout::horizontal([Constraint::Percentage(55), Constraint::Percentage(45)]).areas(top);
    draw_breakdown(f, breakdown, app, s);
    draw_estimate(f, estimate, app, s);
    draw_curve(f, chart, app, s);
}

fn draw_breakdown(f: &mut Frame, area: Rect, app: &App, s: &Snapshot) {
    let t = &app.theme;
    let u = app.units;
    // The `┃` on every meter here is the power available at full demand.
    let block = Block::new().borders(Borders::TOP).title(Span::styled(" road load now · ┃ available ", t.heading()));
    let inner = block.inner(area);
    f.render_widget(block, area);
    let Some(r) = &s.derived.road_load else {
        f.render_widget(Paragraph::new(Span::styled(" no fresh speed: nothing to compute", t.doubtful())), inner);
        return;
    };
    let full = r.available_w.max(r.demand_w).max(r.total_w).max(1.0) * 1.05;
    let rows: Vec<(&str, Option<f64>, String)> = vec![
        ("aero", Some(r.aero_w), format::power(u, Some(r.aero_w))),
        ("rolling", Some(r.rolling_w), format::power(u, Some(r.rolling_w))),
        ("grade", Some(r.grade_w.abs()), format::power(u, Some(r.grade_w))),
        ("road", Some(r.total_w), format!("{} total", format::power(u, Some(r.total_w)))),
        ("inertia", Some(r.inertial_w.abs()), format::power(u, Some(r.inertial_w))),
        ("demand", Some(r.demand_w.max(0.0)), format!("{} road + inertia", format::power(u, Some(r.demand_w)))),
        ("wheels", r.wheel_w.map(|w| w.max(0.0)), format!("{} measured", format::power(u, r.wheel_w))),
        ("avail.", Some(r.available_w), format!("{} at full demand", format::power(u, Some(r.available_w)))),
        ("margin", Some(r.margin_w.max(0.0)), format!("{} to accelerate", format::power(u, Some(r.margin_w)))),
    ];
    let lines = Layout::vertical(vec![Constraint::Length(1); rows.len()]).split(inner);
    for (i, (label, v, text)) in rows.into_iter().enumerate() {
        if i >= lines.len() {
            break;
        }
        let bar = if label == "margin" && r.margin_w < 0.0 {
            t.limit()
        } else if label == "avail." {
            t.good()
        } else {
            t.ahead()
        };
        f.render_widget(
            Meter {
                label,
                value: v,
                full,
                mark: Some(r.available_w),
                text,
                label_style: t.label(),
                bar_style: bar,
                mark_style: t.limit(),
                text_style: t.value(),
                label_width: 8,
                text_width: 22,
            },
            lines[i],
        );
    }
}

/// The words for which coefficients the road load uses and why, and
/// whether that is the good case (the estimate, converged).
fn state_words(cda: CoefficientSource, crr: CoefficientSource, converged: bool, narrow: bool) -> (String, bool) {
    use CoefficientSource as S;
    if cda == S::Estimate && crr == S::Estimate {
        return if converged {
            ("converged ✓ · in use".into(), true)
        } else if narrow {
            ("in use, not yet converged".into(), false)
        } else {
            ("in use, certain enough though not yet converged".into(), false)
        };
    }
    // The one whose own estimate would not do (the other is held with it).
    let (name, why) = if cda != S::PriorWithOther && cda != S::Estimate { ("CdA", cda) } else { ("Crr", crr) };
    let why = match (why, narrow) {
        (S::PriorUnphysical, true) => "not a car's",
        (S::PriorUnphysical, false) => "estimate outside a car's range",
        (_, true) => "too uncertain",
        (_, false) => "estimate too uncertain",
    };
    if narrow {
        (format!("file values: {name} {why}"), false)
    } else {
        (format!("the vehicle file's values are used: {name} {why}"), false)
    }
}

fn draw_estimate(f: &mut Frame, area: Rect, app: &App, s: &Snapshot) {
    let t = &app.theme;
    let u = app.units;
    let d = &s.derived;
    let e = &d.estimate;
    let area_u = Measure::Area.unit(u);
    let block = Block::new()
        .borders(Borders::TOP | Borders::LEFT)
        .title(Span::styled(" drag and rolling estimate ", t.heading()));
    let inner = block.inner(area);
    f.render_widget(block, area);
    // Below ~48 columns the words get shorter; the figures and units stay.
    let narrow = inner.width < 48;
    // What the road load uses, as the engine chose it (an estimate is used
    // before it counts as converged once it is certain enough).
    let state = match &d.road_load {
        Some(rl) => state_words(rl.cda_source, rl.crr_source, e.converged, narrow),
        None if e.converged => ("converged ✓".to_string(), true),
        None => ("not yet converged".to_string(), false),
    };
    let state = Span::styled(state.0, if state.1 { t.good() } else { t.doubtful() });
    let veh = &app.info.config.vehicle;
    let mut lines = vec![
        Line::from(vec![
            Span::styled(" CdA ", t.label()),
            Span::styled(
                format!(
                    "{} ± {} {}",
                    area_u.number(e.cda_m2.value, false),
                    area_u.number(e.cda_m2.sd, false),
                    area_u.symbol
                ),
                t.value(),
            ),
            Span::styled(format!("  (file {})", area_u.number(veh.cda_m2, false)), t.dim()),
        ]),
        Line::from(vec![
            Span::styled(" Crr ", t.label()),
            Span::styled(format!("{:.4} ± {:.4}", e.crr.value, e.crr.sd), t.value()),
            Span::styled(format!("  (file {:.4})", veh.crr0), t.dim()),
        ]),
        Line::from(vec![Span::raw(" "), state]),
        Line::styled(
            format!(
                " {} samples over {} of speed; {} coasting",
                e.samples,
                format::rounded(u, Measure::Speed, Some(e.speed_span_mps)),
                e.coast_samples
            ),
            t.label(),
        ),
    ];
    if narrow {
        // Two short lines rather than one cut: every count keeps its word.
        lines[3] = Line::styled(format!(" {} samples, {} coasting", e.samples, e.coast_samples), t.label());
        lines.insert(
            4,
            Line::styled(
                format!(" over {} of speed", format::rounded(u, Measure::Speed, Some(e.speed_span_mps))),
                t.label(),
            ),
        );
    }
    match e.coast {
        Some((c, r)) if narrow => lines.push(Line::styled(
            format!(
                " coast: CdA {}±{} Crr {:.4}±{:.4}",
                area_u.number(c.value, false),
                area_u.number(c.sd, false),
                r.value,
                r.sd
            ),
            t.label(),
        )),
        Some((c, r)) => lines.push(Line::styled(
            format!(
                " coast-down alone: CdA {} ± {} {}, Crr {:.4} ± {:.4}",
                area_u.number(c.value, false),
                area_u.number(c.sd, false),
                area_u.symbol,
                r.value,
                r.sd
            ),
            t.label(),
        )),
        None if narrow => lines.push(Line::styled(" coast-down: too little coasting", t.dim())),
        None => lines.push(Line::styled(" coast-down alone: not enough coasting yet", t.dim())),
    }
    // The density and its origin on one line, how old and how it was
    // computed on the next when the pane is narrow.
    let (origin, detail, style) = match d.air_origin {
        Some(AirOrigin::Measured { age_s, humidity_assumed }) => (
            "measured".to_string(),
            format!("{} old, CIPM-2007{}", format::age(age_s), if humidity_assumed { ", RH 50 % assumed" } else { "" }),
            if age_s > 5.0 { t.doubtful() } else { t.label() },
        ),
        _ => (
            format!("ISA at {}", format::rounded(u, Measure::Height, Some(app.info.config.track.elevation_m))),
            "no weather data: standard atmosphere".to_string(),
            t.doubtful(),
        ),
    };
    let mut air = vec![
        Span::styled(" air ", t.label()),
        Span::styled(format!("{} ", format::value(u, Measure::Density, Some(d.air_density))), t.value()),
        Span::styled(origin, style),
    ];
    if narrow {
        lines.push(Line::from(air));
        lines.push(Line::styled(format!("     {detail}"), style));
    } else {
        air.push(Span::styled(format!(", {detail}"), style));
        lines.push(Line::from(air));
    }
    let accel = match d.accel_mps2 {
        Some(a) => format!("{} ({})", format::value(u, Measure::Accel, Some(a)), d.accel_source),
        None => format::UNKNOWN.into(),
    };
    lines.push(Line::from(vec![Span::styled(" accel ", t.label()), Span::styled(accel, t.value())]));
    f.render_widget(Paragraph::new(lines), inner);
}

fn draw_curve(f: &mut Frame, area: Rect, app: &App, s: &Snapshot) {
    let t = &app.theme;
    let u = app.units;
    let d = &s.derived;
    // The engine computes the curve (engine/power_curve.rs) with the same
    // function as the meter's available power: this only converts units.
    let vmax = d.power_curve.last().map_or(1.0, |p| p.v_mps).max(1.0);
    let top = d.power_curve.iter().fold(0.0f64, |m, p| m.max(p.available_w));
    let points = |f: fn(&PowerPoint) -> f64| -> Vec<(f64, f64)> {
        d.power_curve.iter().map(|p| (u.speed(p.v_mps), u.power(f(p)))).collect()
    };
    let road = points(|p| p.road_w);
    let avail = points(|p| p.available_w);
    let engine_only = points(|p| p.engine_only_w);
    let pmax = u.power(top * 1.15);
    let road: Vec<(f64, f64)> = road.into_iter().filter(|p| p.1 <= pmax).collect();
    let now: Vec<(f64, f64)> = match (d.speed_mps, d.road_load.and_then(|r| r.wheel_w)) {
        (Some(v), Some(w)) => vec![(u.speed(v), u.power(w))],
        _ => vec![],
    };
    // Each series has its own mark, so the chart reads without colour; the
    // legend is a line of its own above the chart (ratatui's legend box has
    // no samples and covers data), drawn with the very marks used.
    let datasets = vec![
        Dataset::default().marker(Marker::Braille).graph_type(GraphType::Line).style(t.behind()).data(&road),
        Dataset::default().marker(Marker::Dot).graph_type(GraphType::Line).style(t.good()).data(&avail),
        Dataset::default().marker(Marker::Bar).graph_type(GraphType::Line).style(t.dim()).data(&engine_only),
        Dataset::default().marker(Marker::Block).graph_type(GraphType::Scatter).style(t.limit()).data(&now),
    ];
    let su = u.speed_unit();
    let pu = u.power_unit();
    let block = Block::new().borders(Borders::TOP).title(Span::styled(
        format!(" power at the wheels ({pu}) against speed ({su}), level road, no wind "),
        t.heading(),
    ));
    let inner = block.inner(area);
    f.render_widget(block, area);
    let [legend_row, chart_area] = Layout::vertical([Constraint::Length(1), Constraint::Min(3)]).areas(inner);
    f.render_widget(Paragraph::new(legend_line(app, !now.is_empty())), legend_row);
    let chart = Chart::new(datasets)
        .x_axis(
            Axis::default()
                .bounds([0.0, u.speed(vmax)])
                .labels(["0".to_string(), format!("{:.0}", u.speed(vmax) / 2.0), format!("{:.0}", u.speed(vmax))])
                .style(t.label()),
        )
        .y_axis(
            Axis::default()
                .bounds([0.0, pmax])
                .labels(["0".to_string(), format!("{:.0}", pmax / 2.0), format!("{pmax:.0}")])
                .style(t.label()),
        )
        .legend_position(None);
    f.render_widget(chart, chart_area);
}

/// The power chart's legend: each series with a sample of the mark it is
/// drawn with (braille line, dots, low bars, a block).
pub fn legend_line(app: &App, has_now: bool) -> Line<'static> {
    let t = &app.theme;
    let mut spans = vec![
        Span::styled(" ⣀⣀ ", t.behind()),
        Span::styled("road load  ", t.label()),
        Span::styled("•• ", t.good()),
        Span::styled("available  ", t.label()),
        Span::styled("▄▄ ", t.dim()),
        Span::styled("engine only  ", t.label()),
    ];
    if has_now {
        spans.push(Span::styled("█ ", t.limit()));
        spans.push(Span::styled("now (measured)", t.label()));
    }
    Line::from(spans)
}
