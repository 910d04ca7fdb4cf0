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
                speed: 4.0,
                paused: false,
                finished: false,
                recording: Some("/rec/termvel-20260314-074210-replay.tvrec".into()),
                record_failures: 0,
                events_fed: 0,
                snapshots,
                recorded_to_ns: Some(s.t_ns),
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
