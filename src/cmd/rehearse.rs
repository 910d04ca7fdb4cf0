//! `termvel rehearse [PLAN]` (and `termvel` with no arguments): the
//! simulator runs the plan and feeds the real pipeline, on the screens or
//! headless, recorded like a live run.

use std::process::ExitCode;
use std::sync::Arc;

use super::play::{self, PlaySpec};
use crate::cli::RehearseArgs;
use crate::config;
use crate::sim::Simulator;
use crate::ui::app::Mode;

pub fn run(args: RehearseArgs) -> anyhow::Result<ExitCode> {
    let (plan, cfg) = match config::load_plan(args.plan.as_deref(), &args.run.config) {
        Ok(p) => p,
        Err(e) => return super::unusable(e),
    };
    let name = args.plan.as_ref().map_or_else(|| "the built-in demo plan".to_string(), |p| p.display().to_string());
    crate::say!("termvel: rehearsing {name}: {}", plan.name);
    cfg.alerts.deprecated.iter().for_each(|w| crate::say!("termvel: {w}"));
    let cfg = Arc::new(cfg);
    let sim = Simulator::new(cfg.clone(), Arc::new(plan));
    let speed = if args.as_fast_as_possible { Some(f64::INFINITY) } else { args.speed };
    let spec = PlaySpec {
        mode: Mode::Rehearsal { plan: name },
        command: "rehearse",
        run: args.run,
        config: cfg,
        speed,
        paused: args.paused,
        file: None,
    };
    play::run(sim, spec)
}
