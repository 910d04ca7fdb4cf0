//! Drawing cost: one frame of each screen at 200×60 into ratatui's
//! TestBackend, from the demo 60 s in (target: the run screen in ≤ 2 ms).
//! `cargo bench --bench render`.

use std::sync::{Arc, LazyLock};

use divan::Bencher;
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use termvel::config::ConfigSet;
use termvel::engine::{Engine, EngineOptions};
use termvel::sources::{EventSource, FileSource};
use termvel::stream::StreamStatus;
use termvel::ui::app::{App, Mode, Screen, SessionInfo, UiFrame};
use termvel::ui::theme::Theme;

fn main() {
    divan::main();
}

struct Frames(Vec<Arc<UiFrame>>, Arc<ConfigSet>);

static FRAMES: LazyLock<Frames> = LazyLock::new(|| {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("replays/demo.tvrec");
    let mut src = FileSource::open(&path).unwrap();
    let texts = src.header().configs.iter().map(|c| (c.origin.clone(), c.text.clone())).collect();
    let cfg = Arc::new(ConfigSet::from_texts(texts).unwrap());
    let mut engine = Engine::new(cfg.clone(), EngineOptions::default());
    let mut frames = Vec::new();
    let mut t0 = None;
    while let Some(ev) = src.next_event() {
        let start = *t0.get_or_insert(ev.t_ns);
        if ev.t_ns - start > 60_000_000_000 {
            break;
        }
        let mut snaps = Vec::new();
        engine.feed(&ev, src.sources(), &mut |s| snaps.push(s));
        for s in snaps {
            let status = StreamStatus {
                start_ns: Some(start),
                position_ns: Some(s.t_ns),
                speed: 1.0,
                paused: false,
                finished: false,
                recording: None,
                record_failures: 0,
                events_fed: 0,
                ..StreamStatus::default()
            };
            frames.push(Arc::new(UiFrame { snapshot: Arc::new(s), status }));
        }
    }
    Frames(frames, cfg)
});

fn app() -> App {
    let f = &*FRAMES;
    let mut app = App::new(SessionInfo { mode: Mode::Live, config: f.1.clone() }, Theme { color: true });
    for fr in &f.0 {
        app.on_frame(fr.clone());
    }
    app
}

#[divan::bench(args = [Screen::Run, Screen::Power, Screen::Battery, Screen::Feed, Screen::Channels])]
fn draw_200x60(bencher: Bencher, screen: Screen) {
    let mut app = app();
    app.screen = screen;
    let mut term = Terminal::new(TestBackend::new(200, 60)).unwrap();
    bencher.bench_local(|| {
        term.draw(|f| termvel::ui::draw(f, &app)).unwrap();
    });
}
