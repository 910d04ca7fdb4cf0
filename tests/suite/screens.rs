//! The screens rendered into ratatui's TestBackend from a fixed point of the
//! demo run (60 s in: mid-pull, boosting, derating), at 80×24 and 160×48,
//! compared with snapshots (insta; the .snap files are committed).

use std::sync::Arc;

use ratatui::Terminal;
use ratatui::backend::TestBackend;
use termvel::config::ConfigSet;
use termvel::engine::{Engine, EngineOptions};
use termvel::sources::{EventSource, FileSource};
use termvel::stream::StreamStatus;
use termvel::ui::app::{App, Mode, Screen, SessionInfo, UiFrame};
use termvel::ui::theme::Theme;

use crate::util::demo;

/// The app as a screen would hold it `secs` into the demo, with every
/// snapshot up to then seen.
pub fn demo_app(secs: f64, color: bool) -> App {
    let mut src = FileSource::open(&demo()).unwrap();
    let end_ns = termvel::record::reader::last_event_time(&demo());
    let texts = src.header().configs.iter().map(|c| (c.origin.clone(), c.text.clone())).collect();
    let cfg = Arc::new(ConfigSet::from_texts(texts).unwrap());
    let mut app = App::new(
        SessionInfo { mode: Mode::Replay { file: "demo.tvrec".into() }, config: cfg.clone() },
        Theme { color },
    );
    let mut engine = Engine::new(cfg, EngineOptions::default());
    let mut start = None;
    let mut snaps = Vec::new();
    let mut snapshots = 0;
    while let Some(ev) = src.next_event() {
        let t0 = *start.get_or_insert(ev.t_ns);
        if (ev.t_ns - t0) as f64 * 1e-9 > secs {
            break;
        }
        engine.feed(&ev, src.sources(), &mut |s| snaps.push(s));
        for s in snaps.drain(..) {
            snapshots += 1;
            let status = StreamStatus {
                start_ns: Some(t0),
                position_ns: Some(s.t_ns),
                end_ns,
                speed: 4.0,
                paused: false,
                finished: false,
                recording: Some("/rec/termvel-20260314-074210-replay.tvrec".into()),
                record_failures: 0,
                events_fed: 0,
                snapshots,
                recorded_to_ns: Some(s.t_ns),
                ..StreamStatus::default()
            };
            app.on_frame(Arc::new(UiFrame { snapshot: Arc::new(s), status }));
        }
    }
    app
}

pub fn render(app: &App, w: u16, h: u16) -> String {
    let mut term = Terminal::new(TestBackend::new(w, h)).unwrap();
    term.draw(|f| termvel::ui::draw(f, app)).unwrap();
    let buf = term.backend().buffer().clone();
    let mut out = String::new();
    for y in 0..h {
        for x in 0..w {
            out.push_str(buf[(x, y)].symbol());
        }
        out.push('\n');
    }
    out
}

/// Every screen at both sizes, without colour (what `NO_COLOR` shows).
#[test]
fn screens_match_their_snapshots() {
    let mut app = demo_app(60.0, false);
    for s in Screen::ALL {
        app.screen = s;
        for (w, h) in [(80, 24), (160, 48)] {
            insta::assert_snapshot!(format!("{}_{w}x{h}", s.name()), render(&app, w, h));
        }
    }
}

/// The text is the same with colour: colour only adds to words and marks.
#[test]
fn colour_adds_nothing_the_text_lacks() {
    let mut plain = demo_app(60.0, false);
    let mut coloured = demo_app(60.0, true);
    for s in Screen::ALL {
        plain.screen = s;
        coloured.screen = s;
        assert_eq!(render(&plain, 80, 24), render(&coloured, 80, 24), "{}", s.name());
    }
}

/// Below 80×24 the screen says what it hides.
#[test]
fn a_small_terminal_says_what_it_hides() {
    let app = demo_app(60.0, false);
    let text = render(&app, 60, 16);
    assert!(text.contains("is below 80×24"), "{text}");
    assert!(text.contains("SPEED"), "{text}");
    assert!(text.contains("Advisory only"), "the caution stays: {text}");
}

/// Before any data, every screen waits politely rather than panics.
#[test]
fn screens_before_the_first_snapshot() {
    let mut app = demo_app(-1.0, false);
    for s in Screen::ALL {
        app.screen = s;
        let text = render(&app, 80, 24);
        assert!(text.contains("Advisory only"), "{}: {text}", s.name());
    }
}

#[test]
#[ignore]
fn print_screens() {
    let mut app = demo_app(60.0, false);
    for s in Screen::ALL {
        app.screen = s;
        println!("{}", render(&app, 80, 24));
        println!("{}", render(&app, 160, 48));
    }
}

/// The lines of `text` that contain `needle`, for messages.
fn lines_with<'a>(text: &'a str, needle: &str) -> Vec<&'a str> {
    text.lines().filter(|l| l.contains(needle)).collect()
}

// Issue 15, item 6: text was cut at every size (`139 kW for the targe`,
// `(CIPM-20`, `fi`, `curren`, `syste`): words shorten, figures and units stay.
#[test]
fn battery_and_power_text_fits_at_80_columns() {
    let mut app = demo_app(60.0, false);
    for (w, h) in [(80, 24), (120, 40), (200, 60)] {
        app.screen = Screen::Battery;
        let text = render(&app, w, h);
        let needed = lines_with(&text, "needed");
        assert!(needed.iter().any(|l| l.contains("kW for target")), "{w}×{h}: {needed:?}");
        // Each note is whole, in its long or short form.
        for (row, whole) in [
            ("HPPC max", &["current-limited", "V- and I-limited"][..]),
            ("reported", &["by the battery system", "by the pack"][..]),
            ("model ", &["fitted ✓", " ✓", "not converged", " ?"][..]),
        ] {
            let l = lines_with(&text, row);
            assert!(l.iter().any(|l| whole.iter().any(|w| l.contains(w))), "{w}×{h}: {row} cut: {l:?}");
        }
        app.screen = Screen::Power;
        let text = render(&app, w, h);
        assert!(lines_with(&text, " air ").iter().any(|l| l.contains("kg/m³")), "{w}×{h}:\n{text}");
        assert!(text.contains(" old"), "{w}×{h}: the air's age is cut:\n{text}");
    }
}

// Issue 15, item 8: the power chart's legend named series with no sample,
// drew `engine only ···` as scattered dots and `now ■` as `█`, and covered
// data. Now a legend line above the chart shows each series' own mark.
#[test]
fn the_power_chart_legend_shows_the_marks_it_uses() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Power;
    let text = render(&app, 120, 40);
    let legend = lines_with(&text, "road load  ");
    assert_eq!(legend.len(), 1, "{text}");
    for sample in ["⣀⣀ road load", "•• available", "▄▄ engine only"] {
        assert!(legend[0].contains(sample), "{sample} missing: {legend:?}");
    }
    // The chart below uses those marks: dots for available, low bars for the
    // engine alone, braille for the road load.
    let chart: String = text.lines().skip_while(|l| !l.contains("road load  ")).skip(1).collect();
    assert!(chart.contains('•') && chart.contains('▄') && chart.contains('⣀'), "{chart}");
}

// Issue 15, item 8, on the battery screen too: its derating chart's legend
// said `now ■` while the point is drawn `█`.
#[test]
fn the_derating_chart_legend_shows_the_mark_it_draws() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Battery;
    assert!(app.snapshot().is_some_and(|s| s.derived.battery.boosting), "boosting at 60 s");
    let text = render(&app, 160, 48);
    let chart: Vec<&str> = text.lines().skip_while(|l| !l.contains("deliverable power, % of rated")).collect();
    let all: String = chart.join("\n");
    assert!(all.contains("now █") && !all.contains('■'), "{all}");
    // The mark in the legend and at least one in the plot itself.
    assert!(all.matches('█').count() >= 2, "the present point is drawn with the legend's mark: {all}");
}

// Issue 15, items 13 and 15: `power 0.0 s` read as "boost over" while the
// pack still delivered; the `┃` on the meters was not labelled.
#[test]
fn boost_left_and_meter_markers_say_what_they_are() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Battery;
    let text = render(&app, 80, 24);
    assert!(text.contains("┃ rated"), "{text}");
    assert!(text.contains("boost left at the need ("), "{text}");
    assert!(text.contains("charge") && text.contains("derating") && text.contains("heat"), "{text}");
    app.screen = Screen::Power;
    assert!(render(&app, 80, 24).contains("┃ available"));
}

// Issue 15, item 16: at 80×24 the help lost its last line and the caution
// and could not scroll.
#[test]
fn help_keeps_the_caution_and_scrolls_at_80x24() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Help;
    let text = render(&app, 80, 24);
    assert!(text.contains("not a safety system, not a braking cue of record"), "{text}");
    assert!(text.contains("substitute for marshals"), "{text}");
    assert!(text.contains("PgUp PgDn scroll"), "no sign of more: {text}");
    assert!(!text.contains("0 s on the derating line"), "the end should be below the fold: {text}");
    app.scroll = 100;
    let text = render(&app, 80, 24);
    assert!(text.contains("0 s on the derating line"), "scrolled to the end: {text}");
    assert!(text.contains("Meters: █ filled"), "{text}");
    assert!(text.contains("substitute for marshals"), "{text}");
}

// Issue 15, item 10: with a serial source that would not open, the feed
// screen said `last error —` while the alert said why.
#[test]
fn the_feed_screen_says_why_a_source_is_down() {
    use termvel::event::{Event, LinkState, Payload, SourceKind, SourceTable};
    let cfg = Arc::new(ConfigSet::embedded());
    let mut sources = SourceTable::default();
    let gnss = sources.intern("gnss0", SourceKind::Nmea);
    let mut engine = Engine::new(cfg.clone(), EngineOptions::default());
    let why = "cannot open /dev/nosuchtty: No such file or directory";
    let t0 = 1_700_000_000_000_000_000;
    let mut snaps = Vec::new();
    engine.feed(&Event::new(t0, gnss, Payload::Link(LinkState::Down, why.into())), &sources, &mut |s| snaps.push(s));
    engine.feed(
        &Event::new(t0 + 500_000_000, gnss, Payload::Link(LinkState::Retrying, why.into())),
        &sources,
        &mut |s| snaps.push(s),
    );
    engine.finish(&sources, &mut |s| snaps.push(s));
    let mut app = App::new(SessionInfo { mode: Mode::Live, config: cfg }, Theme { color: false });
    let last = snaps.pop().expect("a snapshot");
    app.on_frame(Arc::new(UiFrame { snapshot: Arc::new(last), status: StreamStatus::default() }));
    app.screen = Screen::Feed;
    let text = render(&app, 200, 40);
    let row = lines_with(&text, "gnss0");
    assert!(row.iter().any(|l| l.contains("cannot open /dev/nosuchtty")), "{text}");
    // Narrow, the fixed columns leave no room for it: the reason goes
    // whole under the table (it was cut to nothing at 80 columns).
    for (w, h) in [(80, 24), (100, 30)] {
        let text = render(&app, w, h);
        assert!(text.contains(&format!(" gnss0: {why}")), "{w}×{h}:\n{text}");
    }
}

// Issue 15, item 6: at 80 columns the channels screen's top line was cut
// to `… 43 of 43 channels, 0 stale, 0 `, losing its words and the derived
// count; its words shorten instead, at every width.
#[test]
fn the_channels_top_line_keeps_every_figure_with_its_word() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Channels;
    let derived = format!("{} der", termvel::engine::quantities::QUANTITIES.len());
    for w in [80, 100, 120, 200] {
        let text = render(&app, w, 24);
        let top = text.lines().nth(1).expect("the top line");
        assert!(top.contains("43 channels") || top.contains("43/43 ch"), "{w}: {top}");
        assert!(top.contains("0 stale") && top.contains("0 out of range") && top.contains(&derived), "{w}: {top}");
    }
}

// Issue 15, item 14: `CAUTN`, an unlabelled `4.3 s`, a 28-column panel at
// 120 columns, and active and cleared alerts told apart only by a word.
#[test]
fn alerts_say_their_state_and_age_in_words_and_marks() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Run;
    let text = render(&app, 120, 40);
    assert!(!text.contains("CAUTN"), "{text}");
    assert!(text.contains("! CAUTION"), "{text}");
    let states: Vec<&str> = text.lines().filter(|l| l.contains("● active ·") || l.contains("○ cleared ·")).collect();
    assert!(!states.is_empty() && states.iter().all(|l| l.contains(" ago")), "{text}");
    // The panel is a third of the width from 120 columns: its title starts
    // before column 84 (120 − 28 − a little).
    let title = text.lines().find(|l| l.contains("alerts · a acknowledges")).expect("the alerts panel");
    let at = title.chars().position(|c| c == '┌').expect("the panel's corner");
    assert!(at <= 84, "the alerts panel starts at column {at}: {title}");
}

// Issue 15, items 5, 18 and 22: once braking, the braking line contradicted
// itself, PEAK showed `— (braking)` and TARGET went blank, so the run ended
// with no verdict; the stopping distance was for the exit speed, unsaid; the
// run screen lacked the distance, GNSS against wheel speed and the wind.
#[test]
fn the_run_screen_ends_with_a_verdict_and_says_what_it_compares() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Run;
    let text = render(&app, 80, 24);
    assert!(text.contains(" at ") && text.contains(" km "), "no present distance: {text}");
    assert!(text.contains("GNSS +") || text.contains("GNSS -"), "{text}");
    assert!(text.contains(" head ") || text.contains(" tail "), "no wind: {text}");
    let brake = lines_with(&text, " BRAKE ");
    // Braking from the point ends at the stop-by line at the exit speed:
    // the line names both, and nothing on it runs past stop-by (it once
    // printed a stopping distance from today's speed after the point:
    // `at 6.08 km · to 80 km/h in 734 m`, 6.81 km against a 6.80 km line).
    let line = brake.iter().find(|l| l.contains(" BRAKE  in ")).expect("the braking line before braking");
    assert!(line.contains("· 80 km/h by 6.80 km"), "the exit speed and the stop-by line: {line}");
    let at: f64 = line
        .split(" · at ")
        .nth(1)
        .and_then(|r| r.split(" km").next())
        .and_then(|n| n.trim().parse().ok())
        .unwrap_or_else(|| panic!("the braking point: {line}"));
    assert!(at > 1.0 && at < 6.80, "the braking point {at} km lies before stop-by: {line}");
    // The end of the demo run: stopped, with the peak, the verdict and the
    // stop against the stop-by line, none of them blank or contradictory.
    let mut app = demo_app(1e9, false);
    app.screen = Screen::Run;
    let text = render(&app, 80, 24);
    let peak = lines_with(&text, " PEAK ");
    assert!(peak.iter().any(|l| l.contains("km/h reached at") && l.contains(" km")), "{peak:?}");
    let target = lines_with(&text, " TARGET ");
    assert!(target.iter().any(|l| l.contains("MISSED by") || l.contains("REACHED at")), "{target:?}");
    let brake = lines_with(&text, " BRAKE ");
    assert!(brake.iter().any(|l| l.contains("STOPPED") && l.contains("stop-by 6.80 km")), "{brake:?}");
    assert!(!text.contains("(braking)") && !text.contains("in 0.0 s"), "{text}");
}

// Issue 13, item 1: a recording whose file stopped taking writes showed
// `● REC` as if all were well.
#[test]
fn the_status_line_says_when_the_recording_fails() {
    let mut app = demo_app(5.0, false);
    let engine = Engine::new(Arc::new(ConfigSet::embedded()), EngineOptions::default());
    let snap = engine.snapshot_at(0, &termvel::event::SourceTable::default());
    let status = StreamStatus {
        recording: Some("/rec/r.tvrec".into()),
        record_error: Some("/rec/r.tvrec: write failed: No space left on device".into()),
        record_held: 1234,
        record_failures: 1,
        ..StreamStatus::default()
    };
    app.on_frame(Arc::new(UiFrame { snapshot: Arc::new(snap), status }));
    let text = render(&app, 160, 48);
    assert!(text.contains("● REC FAILING") && text.contains("1234 held, 0 dropped"), "{text}");
}

// Issue 13, item 14: a log naming tens of thousands of interfaces cost that
// many source views at every snapshot (replay grew faster than the log); a
// snapshot views at most MAX_SOURCE_VIEWS and counts the rest, which the
// feed screen says.
#[test]
fn a_snapshot_views_a_bounded_number_of_sources_and_counts_the_rest() {
    use termvel::engine::snapshot::MAX_SOURCE_VIEWS;
    use termvel::event::{CanFrame, CanId, DataFrame, Event, Payload, SourceKind, SourceTable};
    let cfg = Arc::new(ConfigSet::embedded());
    let mut sources = SourceTable::default();
    let mut engine = Engine::new(cfg.clone(), EngineOptions::default());
    let extra = 76;
    let t0 = 1_700_000_000_000_000_000;
    let mut snaps = Vec::new();
    for i in 0..MAX_SOURCE_VIEWS + extra {
        let id = sources.intern(&format!("c{i}"), SourceKind::Can);
        let frame = CanFrame::Data(DataFrame::new(CanId::standard(0x123).unwrap(), &[0; 8]).unwrap());
        engine.feed(&Event::new(t0 + i as i64 * 1000, id, Payload::Can(frame)), &sources, &mut |s| snaps.push(s));
    }
    engine.finish(&sources, &mut |s| snaps.push(s));
    let last = snaps.pop().expect("a snapshot");
    assert_eq!(last.sources.len(), MAX_SOURCE_VIEWS);
    assert_eq!(last.sources_hidden, extra as u64);
    let mut app = App::new(SessionInfo { mode: Mode::Live, config: cfg }, Theme { color: false });
    app.on_frame(Arc::new(UiFrame { snapshot: Arc::new(last), status: StreamStatus::default() }));
    app.screen = Screen::Feed;
    assert!(render(&app, 120, 40).contains("(76 more not listed)"));
}

// Issue 15, item 12: the channels screen always said `SI units`, even after
// `u`; pressures were raw pascals, charge `0.3150` with unit `1`, counts had
// decimals and numbers were left-aligned with varying decimals.
#[test]
fn the_channels_screen_reads_in_the_chosen_units() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Channels;
    let row = |text: &str, name: &str| -> String {
        text.lines()
            .find(|l| l.starts_with(&format!("{name} ")))
            .unwrap_or_else(|| panic!("{name}: {text}"))
            .to_string()
    };
    let metric = render(&app, 160, 48);
    assert!(metric.contains("metric units (u: imperial)") && !metric.contains("SI units"), "{metric}");
    let cells = |l: &str| l.split_whitespace().map(str::to_string).collect::<Vec<_>>();
    assert_eq!(cells(&row(&metric, "tyre.fl.pressure"))[1..3], ["2.73", "bar"]);
    assert_eq!(cells(&row(&metric, "ambient.pressure"))[1..3], ["984.0", "hPa"]);
    assert_eq!(cells(&row(&metric, "battery.soc"))[1..3], ["39.5", "%"]);
    assert_eq!(cells(&row(&metric, "gearbox.gear"))[1], "6");
    // Decimal points line up down the value column.
    let point = |name: &str| {
        let l = row(&metric, name);
        let value_from = l.find(' ').unwrap();
        value_from + l[value_from..].find('.').unwrap()
    };
    assert_eq!(point("vehicle.speed"), point("tyre.fl.pressure"));
    assert_eq!(point("ambient.pressure"), point("battery.cell_min_v"));
    app.on_key(crossterm::event::KeyEvent::new(
        crossterm::event::KeyCode::Char('u'),
        crossterm::event::KeyModifiers::NONE,
    ));
    let imperial = render(&app, 160, 48);
    assert!(imperial.contains("imperial units (u: metric)"), "{imperial}");
    // 273 060 Pa = 39.6 psi; 98 400 Pa = 29.06 inHg; 100.68 m/s = 225.2 mph.
    assert_eq!(cells(&row(&imperial, "tyre.fl.pressure"))[1..3], ["39.6", "psi"]);
    assert_eq!(cells(&row(&imperial, "ambient.pressure"))[1..3], ["29.06", "inHg"]);
    assert_eq!(cells(&row(&imperial, "vehicle.speed"))[2], "mph");
    assert_eq!(cells(&row(&imperial, "battery.temp"))[1..3], ["99.5", "°F"]);
    insta::assert_snapshot!("channels_imperial_120x40", render(&app, 120, 40));
}

// Issue 15, item 12: after `u` the chart title said `(mph, km)` with its
// axis in km while BRAKE said `0.67 mi to go`; battery power turned to hp
// while kWh stayed; alert texts stayed in km/h.
#[test]
fn the_run_screen_after_u_reads_in_one_set() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Run;
    let metric = render(&app, 160, 48);
    // Issue 15, item 13: the boost alert says what the pack gives against
    // the target's need, not `boost left 0.0 s (power limit)`.
    assert!(metric.contains("pack gives 110 kW, short of the 139 kW the target"), "{metric}");
    assert!(!metric.contains("boost left 0.0 s"), "{metric}");
    assert!(metric.contains("target 365 km/h out of reach: projected peak 362"), "{metric}");
    app.on_key(crossterm::event::KeyEvent::new(
        crossterm::event::KeyCode::Char('u'),
        crossterm::event::KeyModifiers::NONE,
    ));
    let text = render(&app, 160, 48);
    assert!(text.contains("speed over distance (mph, mi)"), "{text}");
    assert!(!text.contains("km") && !text.contains(" m "), "a metric unit left after `u`: {text}");
    // The pack in kW (as US practice), the car's power in hp.
    assert!(text.contains("kW of") && text.contains(" hp of "), "{text}");
    // 365 km/h = 226.8 mph.
    assert!(text.contains("target 227 mph out of reach: projected peak 225"), "{text}");
    let brake = lines_with(&text, " BRAKE ");
    assert!(brake.iter().any(|l| l.contains(" mi to go") && l.contains("· 50 mph by ")), "{brake:?}");
    // The zone (7.2 km = 4.47 mi) on the axis in miles.
    assert!(text.lines().any(|l| l.trim_start().starts_with("0.0") && l.trim_end().ends_with("4.5│")), "{text}");
    insta::assert_snapshot!("run_imperial_160x48", text);
}

// Issue 15, item 12: after `u` the battery's power turned to hp while its
// kWh stayed, and the power screen wrote `−0 kW` beside `-6 hp`.
#[test]
fn battery_and_power_after_u_read_in_one_set() {
    let mut app = demo_app(60.0, false);
    app.units = termvel::units::UnitSet::Imperial;
    app.screen = Screen::Battery;
    let text = render(&app, 80, 24);
    // The pack in kW and kWh (as US practice), its temperature in °F.
    assert!(text.contains("power       112 kW") && text.contains("1.76 kWh"), "{text}");
    assert!(text.contains(" °F") && !text.contains("°C") && !text.contains(" hp"), "{text}");
    app.screen = Screen::Power;
    let text = render(&app, 80, 24);
    assert!(text.contains("739 hp") && text.contains(" ft²") && text.contains(" mph"), "{text}");
    assert!(!text.contains(" kW") && !text.contains(" m/s") && !text.contains("km/h"), "{text}");
    assert!(!text.contains('−') && !text.contains("-0 "), "one sign glyph, no negative zero: {text}");
}

/// `app` with its latest frame changed by `edit` (a hand-made state on a
/// real snapshot).
fn with_frame(app: &mut App, edit: impl FnOnce(&mut termvel::engine::Snapshot, &mut StreamStatus)) {
    let f = app.frame.clone().expect("a frame");
    let (mut snap, mut status) = ((*f.snapshot).clone(), f.status.clone());
    edit(&mut snap, &mut status);
    app.frame = Some(Arc::new(UiFrame { snapshot: Arc::new(snap), status }));
}

/// The rows of the run chart from its title to the x axis (the legend, then
/// the plot).
fn plot_rows(text: &str) -> Vec<&str> {
    text.lines().skip_while(|l| !l.contains("speed over distance")).take_while(|l| !l.contains('└')).collect()
}

/// The plot's rows alone: those with the y axis at column 3.
fn plot_only(text: &str) -> Vec<&str> {
    plot_rows(text).into_iter().filter(|l| l.chars().nth(3) == Some('│')).collect()
}

// Issue 15, item 8: on the run chart `target` and `driven` had no sample,
// `brake ┆` and `stop by ┊` showed glyphs the chart did not use, the
// braking point and the projection were both `•`, and the legend box covered
// the brake and stop-by lines. Now a legend line above the chart shows each
// series' own mark, every mark differs, and no box sits on the data.
#[test]
fn the_run_chart_legend_shows_the_marks_it_uses() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Run;
    for (w, h) in [(80, 24), (120, 40), (200, 60)] {
        let text = render(&app, w, h);
        let rows = plot_rows(&text);
        let legend: String = rows.iter().take(3).copied().collect();
        for sample in ["⣀⡠ driven", "••• projected", "╌╌ target", "┆ brake", "┊ stop-by 6.80 km"] {
            assert!(legend.contains(sample), "{w}×{h}: {sample} missing: {legend}");
        }
        let plot: String = plot_only(&text).join("\n");
        // The marks the legend shows are the chart's: the braking point a
        // column of ┆ (not the projection's •), stop-by of ┊, the target ╌.
        for mark in ['┆', '┊', '╌', '•'] {
            assert!(plot.contains(mark), "{w}×{h}: {mark} not on the chart:\n{plot}");
        }
        let brake_col = |l: &str| l.chars().position(|c| c == '┆');
        let cols: Vec<usize> = plot.lines().filter_map(brake_col).collect();
        assert!(cols.len() >= 3 && cols.iter().all(|c| *c == cols[0]), "{w}×{h}: the brake line: {cols:?}");
        // No legend box on the data (ratatui's: `│target`, `│projected`).
        assert!(!plot.contains("│projected") && !plot.contains("│target"), "{w}×{h}:\n{plot}");
    }
    // Help names every mark of the run chart.
    app.screen = Screen::Help;
    app.scroll = 100;
    let help = render(&app, 120, 40);
    for mark in ["⣀⡠ driven", "••• projected", "╌╌ target speed", "┆ braking point", "┊ stop-by line", "▼ a mark"]
    {
        assert!(help.contains(mark), "help lacks {mark}: {help}");
    }
    // Nothing hides data: the reference lines go only into empty cells, so
    // the trace and the projection have the same cells with the braking
    // line as without it.
    app.screen = Screen::Run;
    let data = |t: &str| {
        plot_only(t).iter().map(|l| l.chars().filter(|c| ('⠁'..='⣿').contains(c) || *c == '•').count()).sum::<usize>()
    };
    let with = render(&app, 120, 40);
    with_frame(&mut app, |snap, _| snap.derived.braking = None);
    let without = render(&app, 120, 40);
    assert!(with.contains('┆') && !plot_only(&without).join("").contains('┆'));
    assert!(data(&with) > 50 && data(&with) == data(&without), "{with}\n{without}");
}

// Issue 15, item 9: a 79×24 terminal was called `terminal 79×23`; the
// reduced screen dropped the speed's age, the PAUSED state and the
// acknowledged marks; its speed unit is the screen's one display unit.
#[test]
fn a_79x24_terminal_keeps_age_pause_and_acknowledgements() {
    let mut app = demo_app(60.0, false);
    with_frame(&mut app, |snap, status| {
        status.paused = true;
        snap.alerts[0].acked = true;
    });
    let text = render(&app, 79, 24);
    assert!(text.contains("terminal 79×24 is below 80×24"), "{text}");
    assert!(lines_with(&text, "SPEED").iter().any(|l| l.contains("km/h") && l.contains(" old")), "{text}");
    assert!(text.contains("‖ PAUSED") && text.contains(" / 1:44.6"), "{text}");
    assert!(text.contains("✓"), "the acknowledged alert: {text}");
    assert!(text.contains("Advisory only"), "{text}");
    app.units = app.units.toggle();
    let text = render(&app, 79, 24);
    assert!(lines_with(&text, "SPEED").iter().any(|l| l.contains("mph")), "{text}");
}

// Issue 15, item 10: with no battery data the boost meter read
// `— no limit (prior)`, which reads as unlimited boost.
#[test]
fn no_battery_data_is_said_on_the_boost_meter() {
    let mut app = demo_app(60.0, false);
    with_frame(&mut app, |snap, _| {
        snap.derived.battery = Default::default();
        snap.derived.boost_left = Default::default();
    });
    app.screen = Screen::Run;
    let text = render(&app, 80, 24);
    let boost = lines_with(&text, " boost ");
    assert!(boost.iter().any(|l| l.contains("— no battery data")), "{boost:?}");
    assert!(!text.contains("no limit"), "{text}");
}

// Issue 15, item 13: the run screen's boost meter said `boost 0.0 s power`
// while the battery screen said `boosting now`: it says the time the pack
// can still give what the target needs, at that power, or that it gives
// less already.
#[test]
fn the_boost_meter_says_what_its_figure_is() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Run;
    let text = render(&app, 80, 24);
    let boost = lines_with(&text, " boost ");
    assert!(boost.iter().any(|l| l.contains("below 139 kW need now")), "{boost:?}");
    assert!(!text.contains("0.0 s power"), "{text}");
    let mut app = demo_app(35.0, false);
    app.screen = Screen::Run;
    let text = render(&app, 80, 24);
    let boost = lines_with(&text, " boost ");
    assert!(boost.iter().any(|l| l.contains(" s at ") && l.contains(" kW, ")), "{boost:?}");
}

// Issue 15, item 15: the `┃` on each run-screen meter meant a different
// thing per row and was not labelled: each row names it with the same
// glyph, and help explains it.
#[test]
fn each_meter_names_its_marker() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Run;
    for (w, h) in [(80, 24), (200, 60)] {
        let text = render(&app, w, h);
        for (row, name) in [
            ("demand", "┃581 kW avail."),
            ("road", "┃ avail."),
            ("charge", "┃reserve 12 %"),
            ("battery", "┃245 kW rated"),
        ] {
            let l = lines_with(&text, &format!(" {row} "));
            assert!(l.iter().any(|l| l.contains(name)), "{w}×{h}: {row}: {l:?}");
        }
    }
    app.screen = Screen::Help;
    app.scroll = 100;
    let text = render(&app, 80, 24);
    assert!(text.contains("charge ┃ reserve") && text.contains("┃ rated"), "{text}");
}

// Issue 15, item 17: below 200 columns the header dropped the car, course
// and target; a replay's status had no total length.
#[test]
fn the_header_keeps_car_course_and_target_and_the_status_the_total() {
    let mut app = demo_app(60.0, false);
    for s in [Screen::Run, Screen::Help] {
        app.screen = s;
        for (w, h) in [(80, 24), (120, 40), (160, 48), (200, 60)] {
            let text = render(&app, w, h);
            let head = text.lines().next().unwrap();
            assert!(head.contains("Brisk BT-03") && head.contains("Orrin Flats"), "{w}: {head}");
            assert!(head.contains("target 365 km/h"), "{w}: {head}");
            let status = text.lines().last().unwrap();
            assert!(status.contains(" / 1:44.6"), "{w}: {status}");
        }
    }
}

// Issue 15, item 19: marks were never shown on any screen; now the run chart
// has each at its distance and the latest with its note.
#[test]
fn marks_are_shown_on_the_run_chart() {
    use termvel::engine::snapshot::MarkPlace;
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Run;
    with_frame(&mut app, |snap, _| {
        snap.mark_places = Arc::new(vec![
            MarkPlace { t_ns: snap.t_ns - 20_000_000_000, distance_m: 1500.0, text: "launch".into() },
            MarkPlace { t_ns: snap.t_ns, distance_m: 4200.0, text: "boost felt late".into() },
        ]);
    });
    for (w, h) in [(80, 24), (120, 40)] {
        let text = render(&app, w, h);
        let rows = plot_rows(&text);
        assert!(rows.iter().any(|l| l.contains("▼ mark boost felt late at 4.20 km")), "{w}×{h}: {rows:?}");
        let top = plot_only(&text)[0];
        assert_eq!(top.matches('▼').count(), 2, "{w}×{h}: both marks on the chart's top row: {top}");
    }
}

// Issue 15, item 19: a long note at 80 columns ran off and hid the status
// line, while typed and once made.
#[test]
fn a_long_note_leaves_the_status_line_readable() {
    let mut app = demo_app(60.0, false);
    with_frame(&mut app, |_, status| status.paused = true);
    let note = "boost came on late and the right rear felt light past the four kilometre board";
    app.prompt = Some(note.into());
    let text = render(&app, 80, 24);
    let status = text.lines().last().unwrap();
    assert!(status.contains("mark: …") && status.contains("kilometre board▏"), "the end of the note: {status}");
    assert!(status.contains(" / 1:44.6") && status.contains("PAUSED"), "{status}");
    app.prompt = None;
    app.message = Some((format!("marked: {note}"), 10));
    let status = render(&app, 80, 24).lines().last().unwrap().to_string();
    assert!(status.contains("marked: boost") && status.contains("…"), "{status}");
    assert!(status.contains(" / 1:44.6") && status.contains("PAUSED"), "{status}");
}

// Issue 15, item 6: at 80×24 the feed screen's bus-load line was cut
// (`500 k`) and the recording's name in the status line: figures and units
// stay whole, words shorten.
#[test]
fn bus_load_and_the_recordings_name_keep_their_figures() {
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Feed;
    let text = render(&app, 80, 24);
    assert!(text.contains("390 frames/s, 500 kbit/s"), "{text}");
    for s in Screen::ALL {
        app.screen = s;
        let status = render(&app, 80, 24).lines().last().unwrap().to_string();
        assert!(status.contains("● REC") && status.contains("20260314-074210-replay "), "{}: {status}", s.name());
    }
}

// Issue 14, item 2 (the screen says which): an estimate certain enough is
// used before it counts as converged, yet the power screen said `not
// converged: the vehicle file's values are used` until then; it says what
// the road load uses and, when it is the file's, why.
#[test]
fn the_estimate_panel_says_which_coefficients_the_road_load_uses() {
    use termvel::engine::derived::CoefficientSource as S;
    let mut app = demo_app(60.0, false);
    app.screen = Screen::Power;
    let base = app.snapshot().expect("a snapshot").clone();
    let show = |app: &mut App, cda: S, crr: S, converged: bool, w: u16, h: u16| {
        let mut s = base.clone();
        let rl = s.derived.road_load.as_mut().expect("a road load at 60 s");
        rl.cda_source = cda;
        rl.crr_source = crr;
        s.derived.estimate.converged = converged;
        app.on_frame(Arc::new(UiFrame { snapshot: Arc::new(s), status: StreamStatus::default() }));
        render(app, w, h)
    };
    let text = show(&mut app, S::Estimate, S::Estimate, false, 160, 48);
    assert!(text.contains("in use, certain enough though not yet converged"), "{text}");
    assert!(!text.contains("file's values"), "{text}");
    // The run screen's PEAK line says the same (it said `using priors`).
    for (w, h) in [(160, 48), (80, 24)] {
        app.screen = Screen::Run;
        let run = render(&app, w, h);
        let peak = lines_with(&run, " PEAK ");
        assert!(peak.iter().any(|l| l.contains("drag: estimate") || l.contains("drag est.")), "{w}: {peak:?}");
        assert!(!run.contains("priors"), "{run}");
        app.screen = Screen::Power;
    }
    let text = show(&mut app, S::Estimate, S::Estimate, true, 160, 48);
    assert!(text.contains("converged ✓ · in use"), "{text}");
    let text = show(&mut app, S::PriorUncertain, S::PriorUncertain, false, 160, 48);
    assert!(text.contains("the vehicle file's values are used: CdA estimate too uncertain"), "{text}");
    app.screen = Screen::Run;
    let peak = lines_with(&render(&app, 80, 24), " PEAK ").join("\n");
    assert!(peak.contains("drag file"), "{peak}");
    app.screen = Screen::Power;
    let text = show(&mut app, S::PriorWithOther, S::PriorUnphysical, false, 160, 48);
    assert!(text.contains("the vehicle file's values are used: Crr estimate outside a car's range"), "{text}");
    let text = show(&mut app, S::PriorUnphysical, S::PriorWithOther, false, 80, 24);
    assert!(text.contains("file values: CdA not a car's"), "{text}");
}

// Issue 13, item 12, on the screens: a source's name and its reason come
// from outside (a log's interface names, a device's error text); an escape
// sequence or a bidirectional override in them is shown escaped, never
// passed to the terminal.
#[test]
fn names_and_reasons_from_outside_are_escaped_on_the_screens() {
    use termvel::event::{Event, LinkState, Payload, SourceKind, SourceTable};
    let cfg = Arc::new(ConfigSet::embedded());
    let mut sources = SourceTable::default();
    let bad = sources.intern("gn\u{1b}[2Jss", SourceKind::Nmea);
    let mut engine = Engine::new(cfg.clone(), EngineOptions::default());
    let why = "cannot open \u{202e}yttsohc/ved/";
    let t0 = 1_700_000_000_000_000_000;
    let mut snaps = Vec::new();
    engine.feed(&Event::new(t0, bad, Payload::Link(LinkState::Down, why.into())), &sources, &mut |s| snaps.push(s));
    engine.finish(&sources, &mut |s| snaps.push(s));
    let mut app = App::new(SessionInfo { mode: Mode::Live, config: cfg }, Theme { color: false });
    app.on_frame(Arc::new(UiFrame {
        snapshot: Arc::new(snaps.pop().expect("a snapshot")),
        status: StreamStatus::default(),
    }));
    for screen in [Screen::Feed, Screen::Run] {
        app.screen = screen;
        for (w, h) in [(200, 40), (80, 24)] {
            let text = render(&app, w, h);
            assert!(!text.contains('\u{1b}') && !text.contains('\u{202e}'), "{screen:?} {w}×{h}:\n{text}");
        }
    }
    app.screen = Screen::Feed;
    let text = render(&app, 200, 40);
    assert!(text.contains("gn\\x1b[2Jss"), "the name, escaped:\n{text}");
    assert!(text.contains("cannot open \\u{202e}yttsohc"), "the reason, escaped:\n{text}");
}
