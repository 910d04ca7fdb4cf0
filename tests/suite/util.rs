//! Helpers shared by the integration tests.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::Arc;

use termvel::config::ConfigSet;
use termvel::engine::{Engine, EngineOptions};
use termvel::headless::snapshot_json;
use termvel::sources::EventSource;

/// The repository root.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The bundled demo recording.
pub fn demo() -> PathBuf {
    root().join("replays").join(termvel::sim::demo::DEMO_FILE)
}

/// Runs the termvel binary with `args` in the repository root.
pub fn termvel(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_termvel")).args(args).current_dir(root()).output().expect("termvel runs")
}

pub fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Feeds every event of `src` to a fresh engine and returns the headless
/// JSON lines of its snapshots.
pub fn snapshots_of(mut src: impl EventSource, config: Arc<ConfigSet>) -> Vec<String> {
    let mut engine = Engine::new(config, EngineOptions::default());
    let mut out = Vec::new();
    while let Some(ev) = src.next_event() {
        engine.feed(&ev, src.sources(), &mut |s| out.push(snapshot_json(&s).to_string()));
    }
    engine.finish(src.sources(), &mut |s| out.push(snapshot_json(&s).to_string()));
    out
}

/// Writes `text` to a file in `dir`.
pub fn write(dir: &Path, name: &str, text: impl AsRef<[u8]>) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).expect("write test file");
    p
}
