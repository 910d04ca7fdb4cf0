//! The battery screen: power, discharge rate, state of charge and energy
//! above the reserve; the pack model (open-circuit voltage, resistance) and
//! the power it can deliver now against its rating; temperature and heating
//! rate; the three limits on boost time with the binding one marked; and the
//! derating curve: measured points and the fitted curve over time in boost.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType, LegendPosition, Paragraph};

use crate::engine::Snapshot;
use crate::engine::derived::BoostLimit;
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
    let [numbers, limits] = Layout::horizontal([Constraint::Percentage(50), Constraint::Percentage(50)]).areas(top);
    draw_numbers(f, numbers, app, s);
    draw_limits(f, limits, app, s);
    draw_curve(f, chart, app, s);
}

fn draw_numbers(f: &mut Frame, area: Rect, app: &App, s: &Snapshot) {
    let t = &app.theme;
    let u = app.units;
    let b = &s.derived.battery;
    let cfg = &app.info.config.vehicle.battery;
    let block = Block::new().borders(Borders::TOP).title(Span::styled(" pack ", t.heading()));
    let inner = block.inner(area);
    f.render_widget(block, area);
    // The figure and its unit always show; the note after it gives way to a
    // shorter one (or none) when the pane is narrow.
    let room = inner.width as usize;
    let kv = |k: &str, v: String, notes: &[String]| {
        let used = 13 + v.chars().count();
        let note = notes.iter().find(|n| used + n.chars().count() <= room).cloned().unwrap_or_default();
        Line::from(vec![
            Span::styled(format!(" {k:<12}"), t.label()),
            Span::styled(v, t.value()),
            Span::styled(note, t.dim()),
        ])
    };
    let model = match (b.ocv_v, b.resistance_ohm) {
        (Some(o), Some(r)) => format!("{:.1} V {:.1}±{:.1} mΩ", o.value, r.value * 1e3, r.sd * 1e3),
        _ => format::UNKNOWN.into(),
    };
    let heating =
        b.heating_c_per_s.map_or(format::UNKNOWN.to_string(), |h| format::signed(u, Measure::TemperatureRate, h));
    let limit = format::rounded(u, Measure::Temperature, Some(cfg.temp_limit_c));
    let lines = vec![
        kv(
            "power",
            format::electric_power(u, b.power_w),
            &[format!("  {} kW/kWh", format::num(b.discharge_rate_kw_per_kwh, 1))],
        ),
        kv(
            "charge",
            b.soc.map_or(format::UNKNOWN.into(), |s| format!("{:.1} %", s * 100.0)),
            &[format!("  reserve {:.0} %", cfg.soc_reserve * 100.0)],
        ),
        kv(
            "above res.",
            format::value(u, Measure::Energy, b.energy_above_reserve_j),
            &[format!("  of {}", format::value(u, Measure::Energy, Some(cfg.energy_j)))],
        ),
        kv(
            "model",
            model,
            &(if b.model_converged {
                ["  fitted ✓".to_string(), " ✓".to_string()]
            } else {
                ["  not converged".to_string(), " ?".to_string()]
            }),
        ),
        kv(
            "HPPC max",
            format::electric_power(u, b.hppc_max_w),
            &["  voltage- and current-limited".into(), "  V- and I-limited".into()],
        ),
        kv(
            "reported",
            format::electric_power(u, b.reported_limit_w),
            &["  by the battery system".into(), "  by the pack".into()],
        ),
        kv(
            "temperature",
            format::value(u, Measure::Temperature, b.temp_c),
            &[format!("  limit {limit}, {heating}"), format!("  limit {limit}")],
        ),
        kv(
            "in boost",
            format!("{:.1} s", b.time_in_boost_s),
            &[if b.boosting { "  boosting now".into() } else { "  not boosting".into() }],
        ),
    ];
    f.render_widget(Paragraph::new(lines), inner);
}

fn draw_limits(f: &mut Frame, area: Rect, app: &App, s: &Snapshot) {
    let t = &app.theme;
    let u = app.units;
    let d = &s.derived;
    let b = &d.battery;
    let l = &d.boost_left;
    let block = Block::new()
        .borders(Borders::TOP | Borders::LEFT)
        .title(Span::styled(" deliverable power · ┃ rated ", t.heading()));
    let inner = block.inner(area);
    f.render_widget(block, area);
    let rows = Layout::vertical([Constraint::Length(1); 8]).split(inner);
    let meter = |label, value, full, mark, text, bar| Meter {
        label,
        value,
        full,
        mark,
        text,
        label_style: t.label(),
        bar_style: bar,
        mark_style: t.limit(),
        text_style: t.value(),
        label_width: 9,
        text_width: 20,
    };
    let ratio = b.derating_ratio.map_or(format::UNKNOWN.into(), |r| format!("{:.0} % of rated", r * 100.0));
    f.render_widget(
        meter(
            "now",
            b.deliverable_w,
            b.rated_w * 1.1,
            Some(b.rated_w),
            format!("{} {ratio}", format::electric_power(u, b.deliverable_w)),
            t.ahead(),
        ),
        rows[0],
    );
    f.render_widget(
        meter(
            "needed",
            l.need_w,
            b.rated_w * 1.1,
            Some(b.rated_w),
            format!("{} for target", format::electric_power(u, l.need_w)),
            t.behind(),
        ),
        rows[1],
    );
    // The three limits on how long the pack can still give what the target
    // needs; 0 s on the derating line means it already gives less, not that
    // the pack has stopped.
    let need = format::electric_power(u, l.need_w);
    f.render_widget(Paragraph::new(Line::styled(format!(" boost left at the need ({need}):"), t.label())), rows[2]);
    let lim = |k: BoostLimit, v: Option<f64>| {
        let bind = l.binding == Some(k);
        let below_now = k == BoostLimit::Power && v == Some(0.0);
        let text = match (below_now, bind) {
            (true, _) => "below need now ◀".to_string(),
            (false, true) => format!("{} ◀ binding", format::seconds(v)),
            (false, false) => format::seconds(v),
        };
        let style = if bind { t.limit() } else { t.good() };
        (v.map(|x| x.min(120.0)), text, style)
    };
    for (i, (k, label, v)) in [
        (BoostLimit::Energy, "charge", l.energy_s),
        (BoostLimit::Power, "derating", l.power_s),
        (BoostLimit::Thermal, "heat", l.thermal_s),
    ]
    .into_iter()
    .enumerate()
    {
        let (val, text, style) = lim(k, v);
        f.render_widget(meter(label, val, 120.0, None, text, style), rows[3 + i]);
    }
    // Shorter words where the panel is narrow (80 columns), never cut.
    let curve = match (l.curve_fitted, area.width < 50) {
        (true, _) => Span::styled(" derating curve: fitted ✓", t.good()),
        (false, false) => Span::styled(" derating curve: the vehicle file's (no fit yet)", t.doubtful()),
        (false, true) => Span::styled(" derating: file's curve, no fit yet", t.doubtful()),
    };
    f.render_widget(Paragraph::new(Line::from(curve)), rows[7]);
}

fn draw_curve(f: &mut Frame, area: Rect, app: &App, s: &Snapshot) {
    let t = &app.theme;
    let b = &s.derived.battery;
    // The curves come with the snapshot (the engine's); the measured points
    // are the chart history's.
    let chart = &s.derived.derating_chart;
    let span = chart.span_s;
    let pts: Vec<(f64, f64)> = app.derating.iter().map(|&(x, r)| (x, r * 100.0)).collect();
    let (fitted, prior) = (&chart.fitted, &chart.prior);
    let now: Vec<(f64, f64)> = match b.derating_ratio {
        Some(r) if b.boosting => vec![(b.time_in_boost_s, r * 100.0)],
        _ => vec![],
    };
    let fit_name = match b.fit {
        Some(f) => format!(
            "fit τ {:.0} s, floor {:.0} %{}",
            f.tau_s,
            f.floor * 100.0,
            if f.converged { "" } else { " (unconverged)" }
        ),
        None => "fit: not enough points".into(),
    };
    // The vehicle file's curve as a fine dotted line, the fit as a line,
    // the measured points as bold dots on top.
    let datasets = vec![
        Dataset::default()
            .name("vehicle file ⠄⠄⠄")
            .marker(Marker::Braille)
            .graph_type(GraphType::Scatter)
            .style(t.dim())
            .data(prior),
        Dataset::default()
            .name(fit_name)
            .marker(Marker::Braille)
            .graph_type(GraphType::Line)
            .style(t.good())
            .data(fitted),
        Dataset::default()
            .name("measured •")
            .marker(Marker::Dot)
            .graph_type(GraphType::Scatter)
            .style(t.behind())
            .data(&pts),
        Dataset::default()
            .name("now █")
            .marker(Marker::Block)
            .graph_type(GraphType::Scatter)
            .style(t.limit())
            .data(&now),
    ];
    let chart = Chart::new(datasets)
        .block(
            Block::new()
                .borders(Borders::TOP)
                .title(Span::styled(" deliverable power, % of rated, over time in boost (s) ", t.heading())),
        )
        .x_axis(
            Axis::default()
                .bounds([0.0, span])
                .labels(["0".to_string(), format!("{:.0}", span / 2.0), format!("{span:.0}")])
                .style(t.label()),
        )
        .y_axis(Axis::default().bounds([0.0, 110.0]).labels(["0", "50", "100"]).style(t.label()))
        .legend_position(Some(LegendPosition::TopRight))
        .hidden_legend_constraints((Constraint::Ratio(1, 2), Constraint::Ratio(1, 2)));
    f.render_widget(chart, area);
}
