//! `termvel envelope [PLAN]`: before the run, what it takes to reach a
//! speed. Turns the arguments into [`envelope::Inputs`] (which air, wind,
//! grade, charge and braking point, and where each came from), computes,
//! and prints text or JSON and writes the plots.

use std::process::ExitCode;

use crate::cli::EnvelopeArgs;
use crate::config::{self, ConfigSet, run_plan::Plan};
use crate::envelope::{self, Air, AirSource, BrakeAt, Inputs};

/// The plan (if any) and the config set: a plan given, or a config set
/// given without a plan, or the built-in demo plan and its set.
fn load(args: &EnvelopeArgs) -> Result<(Option<Plan>, ConfigSet), config::ConfigErrors> {
    match (&args.plan, args.config.is_empty()) {
        (Some(p), _) => config::load_plan(Some(p), &args.config).map(|(p, c)| (Some(p), c)),
        (None, false) => ConfigSet::load(&args.config).map(|c| (None, c)),
        (None, true) => config::load_plan(None, &[]).map(|(p, c)| (Some(p), c)),
    }
}

/// The air: a density given; or the standard atmosphere when asked for or
/// when there is no plan and nothing given; or weather from the command
/// line with gaps filled from the plan (or the standard atmosphere, dry);
/// or the plan's weather.
fn air(args: &EnvelopeArgs, plan: Option<&Plan>, elevation_m: f64) -> Result<Air, String> {
    if let Some(rho) = args.air_density {
        return Air::density(rho).map_err(|e| e.to_string());
    }
    let isa = Air::standard(elevation_m);
    if args.standard_air {
        return Ok(isa);
    }
    let given = args.air_temp_c.is_some() || args.air_pressure_hpa.is_some() || args.humidity_pct.is_some();
    let (t, p, h) = match plan {
        Some(pl) => (pl.ambient.temp_c, pl.ambient.pressure_pa, pl.ambient.humidity),
        None => (isa.temp_c.unwrap_or(15.0), isa.pressure_pa.unwrap_or(101_325.0), 0.0),
    };
    if !given {
        return Ok(match plan {
            Some(_) => Air::weather(AirSource::PlanWeather, t, p, h),
            None => isa,
        });
    }
    let t = args.air_temp_c.unwrap_or(t);
    let p = args.air_pressure_hpa.map_or(p, |x| x * 100.0);
    let h = args.humidity_pct.map_or(h, |x| x / 100.0);
    if !(-60.0..=70.0).contains(&t) {
        return Err(format!("--air-temp-c: expected −60 to 70 °C, found {t}"));
    }
    if !(300e2..=1200e2).contains(&p) {
        return Err(format!("--air-pressure-hpa: expected 300 to 1200 hPa, found {}", p / 100.0));
    }
    if !(0.0..=1.0).contains(&h) {
        return Err(format!("--humidity-pct: expected 0 to 100 %, found {}", h * 100.0));
    }
    Ok(Air::weather(AirSource::CommandLine, t, p, h))
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
