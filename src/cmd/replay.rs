//! `termvel replay`: a recording or candump log through the engine, on the
//! screens or as headless JSON lines.

use std::process::ExitCode;
use std::sync::Arc;

use super::play::{self, PlaySpec};
use crate::cli::ReplayArgs;
use crate::sources::FileSource;
use crate::ui::app::Mode;

pub fn run(args: ReplayArgs) -> anyhow::Result<ExitCode> {
    let src = match FileSource::open(&args.file) {
        Ok(s) => s,
        Err(e) => return super::unusable(e),
    };
    let (config, origin) = match src.header().config_set(&args.run.config, &args.file) {
        Ok(c) => c,
        Err(e) => return super::unusable(e),
    };
    crate::say!("termvel: replaying {} with config {origin}", args.file.display());
    config.alerts.deprecated.iter().for_each(|w| crate::say!("termvel: {w}"));
    let speed = if args.as_fast_as_possible { Some(f64::INFINITY) } else { args.speed };
    let spec = PlaySpec {
        mode: Mode::Replay { file: args.file.display().to_string() },
        command: "replay",
        run: args.run,
        config: Arc::new(config),
        speed,
        paused: args.paused,
        file: Some(args.file.clone()),
    };
    play::run(src, spec)
}
