//! The channels screen: every channel with its value, unit, age, range seen
//! and flags, then every derived quantity of the table
//! (`crate::engine::quantities`) by the name alert rules use; typing after
//! `/` filters by name; stale and out-of-range rows are marked by word as
//! well as style, derived rows by the word DERIVED. Numbers are in the unit
//! set's display units (`u` switches), lined up on their decimal point.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Row, Table};

use crate::engine::derived::Derived;
use crate::engine::quantities::{self, QUANTITIES, Quantity, Reading};
use crate::ui::app::App;
use crate::ui::format::Units;
use crate::units::{self, Measure};

/// A derived quantity's value as the table shows it, and its unit: numbers
/// in the unit set's display unit, words as words, flags as yes/no,
/// counts whole, unknown as a dash.
fn derived_value(q: &Quantity, d: &Derived, u: Units) -> (String, &'static str) {
    if quantities::in_absent_group(q, d) {
        return ("—".into(), "");
    }
    match (q.read)(d) {
        Reading::Num(Some(v)) if v.is_finite() => {
            let shown = units::show(q.measure, u, v, false);
            (shown.number, shown.unit)
        }
        Reading::Num(Some(v)) if v.is_infinite() => (if v > 0.0 { "∞" } else { "-∞" }.into(), ""),
        Reading::Num(_) | Reading::Text(None) => ("—".into(), ""),
        Reading::Count(n) => (n.to_string(), ""),
        Reading::Flag(b) => ((if b { "yes" } else { "no" }).into(), ""),
        Reading::Text(Some(t)) => (t.into(), ""),
    }
}

/// The measure of a channel: by its dimension and name, a plain channel
/// whose values are all whole numbers being a count.
fn channel_measure(c: &crate::engine::ChannelView) -> Measure {
    let whole = [c.value, c.min, c.max].iter().all(|v| !v.is_finite() || v.fract() == 0.0);
    Measure::of_channel(&c.name, c.dimension, whole)
}

/// A channel value in `unit`, or a dash when never seen (min and max start
/// infinite).
fn channel_number(unit: units::DisplayUnit, v: f64) -> String {
    if v.is_finite() { unit.number(v, false) } else { "—".into() }
}

/// Where a cell's decimal point sits: (characters before it, characters
/// from it on), or `None` for a word (left as it is).
fn decimal_parts(cell: &str) -> Option<(usize, usize)> {
    let mut chars = cell.chars();
    let numeric = match chars.next() {
        Some(c) if c.is_ascii_digit() || c == '—' || c == '∞' => true,
        Some('-') => chars.next().is_some_and(|c| c.is_ascii_digit() || c == '∞'),
        _ => false,
    };
    if !numeric {
        return None;
    }
    let n = cell.chars().count();
    let int = cell.chars().position(|c| c == '.').unwrap_or(n);
    Some((int, n - int))
}

/// Pads the numbers of one column so that their decimal points line up
/// (whole numbers end where the others' points are); words stay as they
/// are. Returns the column's width.
fn align_decimals(cells: &mut [&mut String]) -> usize {
    let parts: Vec<Option<(usize, usize)>> = cells.iter().map(|c| decimal_parts(c)).collect();
    let int_w = parts.iter().flatten().map(|p| p.0).max().unwrap_or(0);
    let frac_w = parts.iter().flatten().map(|p| p.1).max().unwrap_or(0);
    for (cell, p) in cells.iter_mut().zip(&parts) {
        if let Some((i, f)) = p {
            **cell = format!("{}{}{}", " ".repeat(int_w - i), cell, " ".repeat(frac_w - f));
        }
    }
    cells.iter().map(|c| c.chars().count()).max().unwrap_or(0).max(int_w + frac_w)
}

pub fn draw(f: &mut Frame, area: Rect, app: &App) {
    let t = &app.theme;
    let u = app.units;
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
    let (n, all, nd) = (shown.len(), s.channels.len(), derived.len());
    // The unit set first: it decides how every number below reads. Where
    // the line does not fit, words get shorter and the figures stay.
    let counts = [
        format!(
            "   {} units (u: {}) · {n} of {all} channels, {stale} stale, {range} out of range; {nd} derived",
            u.name(),
            u.toggle().name(),
        ),
        format!("  {} (u) · {n}/{all} channels · {stale} stale · {range} out of range · {nd} derived", u.name()),
        format!("  {} · {n}/{all} ch · {stale} stale · {range} out of range · {nd} der.", u.name()),
    ];
    let width = top.width as usize;
    let fits = |a: &str, b: &str| a.chars().count() + b.chars().count() <= width;
    let quiet = !app.filtering && app.filter.is_empty();
    let (filter, counts) = counts
        .iter()
        .find(|c| fits(&filter.content, c))
        .map(|c| (filter.clone(), c.clone()))
        .or_else(|| {
            // Editing or holding a filter keeps its words; else the hint shortens.
            let hint = if quiet { Span::styled(" /", t.label()) } else { filter.clone() };
            counts.iter().find(|c| fits(&hint.content, c)).map(|c| (hint, c.clone()))
        })
        .unwrap_or_else(|| (filter.clone(), counts[2].clone()));
    f.render_widget(Paragraph::new(Line::from(vec![filter, Span::styled(counts, t.label())])), top);
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
        // Value, min and max in one display unit, so they compare at a glance.
        let unit = channel_measure(c).unit(u);
        let cells = [
            c.name.to_string(),
            channel_number(unit, c.value),
            unit.symbol.to_string(),
            crate::ui::format::age(c.age_s),
            channel_number(unit, c.min),
            channel_number(unit, c.max),
            c.samples.to_string(),
            flags.join(" "),
        ];
        (cells, style)
    });
    let derived_rows = derived.iter().map(|q| {
        let (value, unit) = derived_value(q, &s.derived, u);
        let cells = [
            q.name.to_string(),
            value,
            unit.to_string(),
            String::new(),
            String::new(),
            String::new(),
            String::new(),
            "DERIVED".to_string(),
        ];
        (cells, t.label())
    });
    let mut rows: Vec<([String; 8], _)> = channel_rows.chain(derived_rows).skip(scroll).take(visible).collect();
    // Numbers right-aligned on their decimal point, column by column.
    let mut widths = [0usize; 3];
    for (w, col) in widths.iter_mut().zip([1, 4, 5]) {
        let mut cells: Vec<&mut String> = rows.iter_mut().map(|(c, _)| &mut c[col]).collect();
        *w = align_decimals(&mut cells);
    }
    // Derived names are longer than channel names: the first column fits
    // the longest name on screen, within reason.
    let name_width = rows.iter().map(|(c, _)| c[0].chars().count()).max().unwrap_or(0).clamp(22, 44) as u16;
    let unit_width = rows.iter().map(|(c, _)| c[2].chars().count()).max().unwrap_or(0).clamp(4, 8) as u16;
    let rows: Vec<Row> = rows.into_iter().map(|(cells, style)| Row::new(cells).style(style)).collect();
    let header = Row::new(["channel", "value", "unit", "age", "min", "max", "samples", "flags"]).style(t.label());
    // (Flags are words, so a row reads without colour: STALE, OUT OF RANGE.)
    let table = Table::new(
        rows,
        [
            Constraint::Length(name_width),
            Constraint::Length(widths[0].clamp(10, 14) as u16),
            Constraint::Length(unit_width),
            Constraint::Length(6),
            Constraint::Length(widths[1].clamp(5, 14) as u16),
            Constraint::Length(widths[2].clamp(5, 14) as u16),
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
        let show = |name: &str| derived_value(quantities::find(name).unwrap(), &d, Units::Metric);
        assert_eq!(show("derived.air.density_kg_m3"), ("1.2041".into(), "kg/m³"));
        assert_eq!(show("derived.air.origin").0, "standard atmosphere");
        assert_eq!(show("derived.battery.boosting").0, "no");
        assert_eq!(show("derived.estimate.samples").0, "0");
        assert_eq!(show("derived.speed_mps").0, "—");
        assert_eq!(show("derived.braking.passed").0, "—", "no braking point: unknown, not no");
    }

    // Issue 15, item 12: derived quantities showed in SI whatever `u` said;
    // a state of charge read `0.3150` with unit `1`.
    #[test]
    fn derived_values_follow_the_unit_set() {
        let mut d = Derived { speed_mps: Some(100.0), ..Derived::default() };
        d.battery.soc = Some(0.315);
        d.battery.power_w = Some(101e3);
        let show = |name: &str, u| derived_value(quantities::find(name).unwrap(), &d, u);
        assert_eq!(show("derived.speed_mps", Units::Metric), ("360.0".into(), "km/h"));
        assert_eq!(show("derived.speed_mps", Units::Imperial), ("223.7".into(), "mph"));
        assert_eq!(show("derived.battery.soc", Units::Imperial), ("31.5".into(), "%"));
        assert_eq!(show("derived.battery.power_w", Units::Imperial), ("101".into(), "kW"));
        assert_eq!(show("derived.distance_m", Units::Imperial), ("0".into(), "ft"));
    }

    // Issue 15, item 12: numbers were left-aligned with varying decimals.
    #[test]
    fn numbers_line_up_on_their_decimal_point() {
        let mut col = ["2.73".to_string(), "984.0".into(), "6".into(), "—".into(), "-1.9417".into(), "yes".into()];
        let mut cells: Vec<&mut String> = col.iter_mut().collect();
        let w = align_decimals(&mut cells);
        assert_eq!(col, ["  2.73  ", "984.0   ", "  6     ", "  —     ", " -1.9417", "yes"]);
        assert_eq!(w, 8);
    }
}
