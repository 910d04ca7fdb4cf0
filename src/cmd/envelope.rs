//! `termvel envelope [PLAN]`: before the run, what it takes to reach a
//! speed. Turns the arguments into [`envelope::Inputs`] (which air, wind,
//! grade, charge and braking point, and where each came from), computes,
//! and prints text or JSON and writes the plots.

use std::process::ExitCode;

use crate::cli::EnvelopeArgs;
use crate::config::{self, ConfigSet, run_plan::Plan};
use crate::envelope::{self, Air, AirArgs, BrakeAt, Inputs};

/// The plan (if any) and the config set: a plan given, or a config set
/// given without a plan, or the built-in demo plan and its set.
fn load(args: &EnvelopeArgs) -> Result<(Option<Plan>, ConfigSet), config::ConfigErrors> {
    match (&args.plan, args.config.is_empty()) {
        (Some(p), _) => config::load_plan(Some(p), &args.config).map(|(p, c)| (Some(p), c)),
        (None, false) => ConfigSet::load(&args.config).map(|c| (None, c)),
        (None, true) => config::load_plan(None, &[]).map(|(p, c)| (Some(p), c)),
    }
}

/// The air, by the rule `termvel plan` shares ([`Air::of_the_day`]).
fn air(args: &EnvelopeArgs, plan: Option<&Plan>, elevation_m: f64) -> Result<Air, String> {
    let given = AirArgs {
        density_kg_m3: args.air_density,
        standard: args.standard_air,
        temp_c: args.air_temp_c,
        pressure_hpa: args.air_pressure_hpa,
        humidity_pct: args.humidity_pct,
    };
    Air::of_the_day(&given, plan.and_then(|p| p.ambient.weather), elevation_m).map_err(|e| e.to_string())
}

pub fn run(args: EnvelopeArgs) -> anyhow::Result<ExitCode> {
    let (plan, cfg) = match load(&args) {
        Ok(x) => x,
        Err(e) => return super::unusable(e),
    };
    let (veh, track) = (&cfg.vehicle, &cfg.track);
    let air = match air(&args, plan.as_ref(), track.elevation_m) {
        Ok(a) => a,
        Err(e) => return super::unusable(e),
    };
    let between = match (args.from, args.to) {
        (None, None) => None,
        (a, b) => Some((a.unwrap_or(0.0) / 3.6, b.map_or(track.target_speed_mps, |v| v / 3.6))),
    };
    let inputs = Inputs {
        air,
        headwind_mps: args.wind_mps.or(plan.as_ref().map(|p| p.ambient.headwind_mps)).unwrap_or(0.0),
        grade: if args.level { 0.0 } else { Inputs::mean_grade(track) },
        grade_is_track_mean: !args.level,
        soc_start: plan.as_ref().map_or(veh.battery.soc_max, |p| p.car.soc_start),
        target_mps: args.target_kmh.map_or(track.target_speed_mps, |v| v / 3.6),
        margin_mps: args.margin_kmh / 3.6,
        step_mps: args.step / 3.6,
        brake_at: plan.as_ref().map_or(BrakeAt::Latest, |p| BrakeAt::Distance(p.driver.brake_at_m)),
        between,
    };
    let e = match envelope::compute(veh, track, &inputs) {
        Ok(e) => e,
        Err(err) => return super::unusable(err),
    };
    let plan_name = plan.as_ref().map(|p| p.name.as_str());
    if let Some(dir) = &args.plots {
        let written = match envelope::render_svg::write(dir, &e, veh) {
            Ok(w) => w,
            // The message names the file and what failed.
            Err(e) => return super::failed(e),
        };
        for p in written {
            crate::say!("wrote {}", p.display());
        }
    }
    if args.json {
        let doc = envelope::render_json::document(&e, &veh.name, &track.name, plan_name);
        crate::out!("{}", serde_json::to_string_pretty(&doc)?);
    } else {
        crate::out!("{}", envelope::render_text::render(&e, veh, track, plan_name).trim_end());
    }
    Ok(ExitCode::SUCCESS)
}
