//! `termvel replay`: a recording or candump log through the engine, on the
//! screens or as headless JSON lines.

use std::path::Path;
use std::process::ExitCode;
use std::sync::Arc;

use super::session::{self, SessionSpec};
use crate::cli::{ReplayArgs, RunOpts};
use crate::config::ConfigSet;
use crate::record::Header;
use crate::sources::FileSource;
use crate::ui::app::Mode;

/// The config set for a replay: `--config` if given, else the recording's
/// own embedded set, else (a candump log) the built-in demo set.
pub fn resolve_config(run: &RunOpts, header: &Header, file: &Path) -> Result<(ConfigSet, String), String> {
    if !run.config.is_empty() {
        return ConfigSet::load(&run.config).map(|c| (c, "from --config".into())).map_err(|e| e.to_string());
    }
    if header.is_termvel && !header.configs.is_empty() {
        let texts = header
            .configs
            .iter()
            .map(|c| (format!("{} (embedded in {})", c.origin, file.display()), c.text.clone()))
            .collect();
        return ConfigSet::from_texts(texts)
            .map(|c| (c, "embedded in the recording".into()))
            .map_err(|e| format!("{e}\nthe recording's embedded config is not valid for this build; give --config"));
    }
    Ok((ConfigSet::embedded(), "the built-in demo set (the log carries no config; give --config for your car)".into()))
}

pub fn run(args: ReplayArgs) -> anyhow::Result<ExitCode> {
    let src = match FileSource::open(&args.file) {
        Ok(s) => s,
        Err(e) => return super::unusable(e),
    };
    let (config, origin) = match resolve_config(&args.run, src.header(), &args.file) {
        Ok(c) => c,
        Err(e) => return super::unusable(e),
    };
    crate::say!("termvel: replaying {} with config {origin}", args.file.display());
    config.alerts.deprecated.iter().for_each(|w| crate::say!("termvel: {w}"));
    let speed = if args.as_fast_as_possible { Some(f64::INFINITY) } else { args.speed };
    let spec = SessionSpec {
        mode: Mode::Replay { file: args.file.display().to_string() },
        command: "replay",
        run: args.run,
        config: Arc::new(config),
        speed,
        paused: args.paused,
        file: Some(args.file.clone()),
    };
    session::run(src, spec)
}
