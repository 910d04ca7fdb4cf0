//! The channels screen: every channel with its value, unit, age, range seen
//! and flags, then every derived quantity of the table
//! (`crate::engine::quantities`) by the name alert rules use; typing after
//! `/` filters by name; stale and out-of-range rows are marked by word as
//! well as style, derived rows by the word DERIVED.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Row, Table};

use crate::engine::derived::Derived;
use crate::engine::quantities::{self, QUANTITIES, Quantity, Reading};
use crate::ui::app::App;

/// A derived quantity's value as the table shows it: words as words, flags
/// as yes/no, unknown as a dash.
fn derived_value(q: &Quantity, d: &Derived) -> String {
    if quantities::in_absent_group(q, d) {
        return "—".into();
    }
    match (q.read)(d) {
        Reading::Num(Some(v)) => value(v),
        Reading::Num(None) | Reading::Text(None) => "—".into(),
        Reading::Count(n) => n.to_string(),
        Reading::Flag(b) => (if b { "yes" } else { "no" }).into(),
        Reading::Text(Some(t)) => t.into(),
    }
}

/// A value in at most ten characters with about six significant digits.
fn value(v: f64) -> String {
    if !v.is_finite() {
        "—".into()
    } else if v == 0.0 {
        "0".into()
    } else if v.abs() >= 1e7 || v.abs() < 1e-3 {
        format!("{v:.3e}")
    } else {
        let decimals = (5 - v.abs().log10().floor() as i32).clamp(0, 4) as usize;
        format!("{v:.decimals$}")
    }
}

pub fn draw(f: &mut Frame, area: Rect, app: &App) {
    let t = &app.theme;
    let Some(s) = app.snapshot() else {
        f.render_widget(Paragraph::new("waiting for the first snapshot…").style(t.dim()), area);
        return;
    };
    let [top, table_area] = Layout::vertical([Constraint::Length(1), Constraint::Min(3)]).areas(area);
    let shown: Vec<_> =
        s.channels.iter().filter(|c| app.filter.is_empty() || c.name.contains(app.filter.as_str())).collect();
    let derived: Vec<&Quantity> =
        QUANTITIES.iter().filter(|q| app.filter.is_empty() || q.name.contains(app.filter.as_str())).collect();
    let filter = if app.filtering {
        Span::styled(format!(" filter: {}▏ (Enter keeps it, Esc clears)", app.filter), t.value())
    } else if app.filter.is_empty() {
        Span::styled(" / filters by name", t.label())
    } else {
        Span::styled(format!(" filter: {}  (Esc clears)", app.filter), t.value())
    };
    let stale = shown.iter().filter(|c| c.stale).count();
    let range = shown.iter().filter(|c| c.out_of_range).count();
    f.render_widget(
        Paragraph::new(Line::from(vec![
            filter,
            Span::styled(
                format!(
                    "   {} of {} channels, {stale} stale, {range} out of range; {} derived; SI units",
                    shown.len(),
                    s.channels.len(),
                    derived.len()
                ),
                t.label(),
            ),
        ])),
        top,
    );
    let visible = table_area.height.saturating_sub(1) as usize;
    let total = shown.len() + derived.len();
    let scroll = app.scroll.min(total.saturating_sub(visible));
    let channel_rows = shown.iter().map(|c| {
        let mut flags = Vec::new();
        if c.stale {
            flags.push("STALE");
        }
        if c.out_of_range {
            flags.push("OUT OF RANGE");
        }
        let style = if c.out_of_range {
            t.severity(crate::config::Severity::Caution)
        } else if c.stale {
            t.doubtful()
        } else {
            t.value()
        };
        let cells = [
            c.name.to_string(),
            value(c.value),
            c.unit.to_string(),
            crate::ui::format::age(c.age_s),
            value(c.min),
            value(c.max),
            c.samples.to_string(),
            flags.join(" "),
        ];
        (cells, style)
    });
    let derived_rows = derived.iter().map(|q| {
        let cells = [
            q.name.to_string(),
            derived_value(q, &s.derived),
            q.unit.to_string(),
            String::new(),
            String::new(),
            String::new(),
            String::new(),
            "DERIVED".to_string(),
        ];
        (cells, t.label())
    });
    let rows: Vec<([String; 8], _)> = channel_rows.chain(derived_rows).skip(scroll).take(visible).collect();
    // Derived names are longer than channel names: the first column fits
    // the longest name on screen, within reason.
    let name_width = rows.iter().map(|(c, _)| c[0].chars().count()).max().unwrap_or(0).clamp(22, 44) as u16;
    let rows: Vec<Row> = rows.into_iter().map(|(cells, style)| Row::new(cells).style(style)).collect();
    let header = Row::new(["channel", "value", "unit", "age", "min", "max", "samples", "flags"]).style(t.label());
    // (Flags are words, so a row reads without colour: STALE, OUT OF RANGE.)
    let table = Table::new(
        rows,
        [
            Constraint::Length(name_width),
            Constraint::Length(10),
            Constraint::Length(4),
            Constraint::Length(6),
            Constraint::Length(10),
            Constraint::Length(10),
            Constraint::Length(7),
            Constraint::Min(5),
        ],
    )
    .header(header);
    f.render_widget(table, table_area);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn derived_values_read_as_words_flags_and_numbers() {
        let d = Derived { air_density: 1.2041, ..Derived::default() };
        let show = |name: &str| derived_value(quantities::find(name).unwrap(), &d);
        assert_eq!(show("derived.air.density_kg_m3"), "1.2041");
        assert_eq!(show("derived.air.origin"), "standard atmosphere");
        assert_eq!(show("derived.battery.boosting"), "no");
        assert_eq!(show("derived.estimate.samples"), "0");
        assert_eq!(show("derived.speed_mps"), "—");
        assert_eq!(show("derived.braking.passed"), "—", "no braking point: unknown, not no");
    }

    #[test]
    fn values_fit_ten_characters() {
        for (v, s) in [
            (539_260.0, "539260"),
            (100.6833, "100.683"),
            (0.395, "0.3950"),
            (98_400.0, "98400.0"),
            (1.5e9, "1.500e9"),
            (-1.9417, "-1.9417"),
        ] {
            assert_eq!(value(v), s);
            assert!(value(v).chars().count() <= 10);
        }
    }
}
