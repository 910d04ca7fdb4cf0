//! `termvel plan [PLAN]`: the run predicted before it is made, the boost
//! start that gives the most speed by the brake point, and a Monte Carlo
//! over the plan's uncertainty ranges.

use std::process::ExitCode;

use serde_json::json;

use crate::cli::PlanArgs;
use crate::config::{self, run_plan::BoostStart};
use crate::envelope::AirSource;
use crate::planner::{self, Conditions, RunResult};

fn kmh(v: f64) -> f64 {
    v * 3.6
}

fn run_json(r: &RunResult) -> serde_json::Value {
    json!({
        "peak_mps": r.peak_mps,
        "peak_at_m": r.peak_at_m,
        "peak_t_s": r.peak_t_s,
        "target_reached": r.target.is_some(),
        "target_t_s": r.target.map(|t| t.0),
        "target_at_m": r.target.map(|t| t.1),
        "brake_at_m": r.brake_at_m,
        "brake_speed_mps": r.brake_speed_mps,
        "stopping_m": r.stopping_m,
        "overrun": r.overrun,
        "boost_from_mps": r.boost_from_mps,
        "boost_s": r.boost_s,
        "energy_used_j": r.energy_used_j,
    })
}

pub fn run(args: PlanArgs) -> anyhow::Result<ExitCode> {
    let (plan, cfg) = match config::load_plan(args.plan.as_deref(), &args.config) {
        Ok(p) => p,
        Err(e) => return super::unusable(e),
    };
    let veh = &cfg.vehicle;
    let track = &cfg.track;
    let c = Conditions::nominal(&cfg, &plan);
    let brake = Some(plan.driver.brake_at_m);
    let planned = planner::run(veh, track, &c, plan.driver.boost_start, brake);
    let latest = planner::run(veh, track, &c, plan.driver.boost_start, None);
    let (best_m, best) = planner::best_boost_start(veh, track, &c, brake);
    let best_boost = BoostStart::AtDistance(best_m);
    let no_boost = planner::run(veh, track, &c, BoostStart::AtDistance(f64::INFINITY), brake);
    let seed = args.seed.unwrap_or(plan.seed);
    let threads = args.threads.unwrap_or_else(|| std::thread::available_parallelism().map_or(2, |n| n.get()));
    let t0 = std::time::Instant::now();
    let mc = planner::monte_carlo(&cfg, &plan, best_boost, brake, args.trials as usize, seed, threads);
    // The same trials with the plan's own boost start, so the probability the
    // engineer reads first is for the run as planned; the best start's beside it.
    let mc_planned =
        planner::monte_carlo(&cfg, &plan, plan.driver.boost_start, brake, args.trials as usize, seed, threads);
    let mc_s = t0.elapsed().as_secs_f64();
    let rho = c.air_density();
    let planned_boost = match plan.driver.boost_start {
        BoostStart::AtDistance(m) => format!("from {:.2} km", m / 1000.0),
        BoostStart::AtSpeed(v) => format!("from {:.0} km/h", kmh(v)),
    };

    if args.json {
        let out = json!({
            "plan": plan.name,
            "vehicle": veh.name,
            "track": track.name,
            "air_density_kg_m3": rho,
            "air": {
                "source": c.air.source.key(),
                "temp_c": c.temp_c,
                "pressure_pa": c.air.pressure_pa,
                "humidity": c.air.humidity,
                "density_kg_m3": rho,
                "track_elevation_m": track.elevation_m,
            },
            "target_mps": track.target_speed_mps,
            "planned": { "boost_start_m": match plan.driver.boost_start { BoostStart::AtDistance(m) => Some(m), _ => None },
                         "boost_start_mps": match plan.driver.boost_start { BoostStart::AtSpeed(v) => Some(v), _ => None },
                         "run": run_json(&planned) },
            "latest_braking": run_json(&latest),
            "without_boost": run_json(&no_boost),
            "best_boost": { "start_m": best_m, "start_mps": best.boost_from_mps, "run": run_json(&best) },
            "monte_carlo": {
                "trials": mc.trials, "seed": mc.seed,
                "p_target": mc.p_target, "p_overrun": mc.p_overrun,
                "peak_mps": { "p5": mc.peak_percentiles[0], "p25": mc.peak_percentiles[1], "p50": mc.peak_percentiles[2], "p75": mc.peak_percentiles[3], "p95": mc.peak_percentiles[4], "mean": mc.peak_mean },
                "boost_start_m": best_m,
                "as_planned": { "p_target": mc_planned.p_target, "p_overrun": mc_planned.p_overrun },
            },
            "caution": crate::CAUTION,
        });
        crate::out!("{}", serde_json::to_string_pretty(&out)?);
        return Ok(ExitCode::SUCCESS);
    }

    let target = kmh(track.target_speed_mps);
    crate::out!("plan: {}", plan.name);
    crate::out!("car: {}   course: {}   target {target:.0} km/h", veh.name, track.name);
    let elevation = match c.air.source {
        AirSource::StandardAtmosphere => format!(" ({:.0} m)", track.elevation_m),
        _ => String::new(),
    };
    crate::out!(
        "conditions: {:.1} °C, {:.0} hPa, {:.0} % RH → air {rho:.4} kg/m³ from {}{elevation}; headwind {:.1} m/s; charge {:.0} %",
        c.temp_c,
        c.air.pressure_pa.unwrap_or(f64::NAN) / 100.0,
        c.air.humidity.unwrap_or(f64::NAN) * 100.0,
        c.air.source.describe(),
        plan.ambient.headwind_mps,
        plan.car.soc_start * 100.0
    );
    crate::out!(
        "model: the vehicle file's drag area {:.3} m², Crr {:.4}, derating τ {:.0} s to {:.0} %",
        c.cda_m2,
        c.crr0,
        c.derate_tau_s,
        c.derate_floor * 100.0
    );
    crate::out!();
    let verdict = |r: &RunResult| match r.target {
        Some((t, x)) => format!("target reached at {:.2} km, {t:.1} s after the launch", x / 1000.0),
        None => format!("target not reached (short by {:.1} km/h)", target - kmh(r.peak_mps)),
    };
    crate::out!("as planned (boost {planned_boost}, brake at {:.2} km):", plan.driver.brake_at_m / 1000.0);
    crate::out!(
        "  peak {:.1} km/h at {:.2} km, {:.1} s after the launch; {}",
        kmh(planned.peak_mps),
        planned.peak_at_m / 1000.0,
        planned.peak_t_s,
        verdict(&planned)
    );
    crate::out!(
        "  braking there from {:.1} km/h needs {:.0} m to slow to {:.0} km/h: {}",
        kmh(planned.brake_speed_mps),
        planned.stopping_m,
        kmh(track.exit_speed_mps),
        if planned.overrun {
            "MORE than the zone has left: the plan brakes too late".to_string()
        } else {
            format!(
                "{:.0} m to spare before the stop-by point",
                track.stop_by_m() - planned.brake_at_m - planned.stopping_m
            )
        }
    );
    crate::out!(
        "  the latest braking point at full demand: {:.2} km (peak {:.1} km/h there)",
        latest.brake_at_m / 1000.0,
        kmh(latest.peak_mps)
    );
    crate::out!("  without boost: peak {:.1} km/h", kmh(no_boost.peak_mps));
    crate::out!();
    crate::out!(
        "best boost start: at {:.2} km (at {:.0} km/h): peak {:.1} km/h ({:+.1} km/h on the plan); {}",
        best_m / 1000.0,
        kmh(best.boost_from_mps.unwrap_or(0.0)),
        kmh(best.peak_mps),
        kmh(best.peak_mps - planned.peak_mps),
        verdict(&best)
    );
    crate::out!();
    let u = &plan.uncertainty;
    let mut over = Vec::new();
    let range = |name: &str, r: Option<(f64, f64)>, unit: &str, digits: usize| {
        // "to", not a dash: a range may start below zero (a tailwind).
        r.map(|(a, b)| format!("{name} {a:.digits$} to {b:.digits$}{unit}"))
    };
    for s in [
        range("CdA", u.cda_m2, " m²", 3),
        range("Crr", u.crr0, "", 4),
        range("mass", u.mass_kg, " kg", 0),
        range("temperature", u.temp_c, " °C", 0),
        range("headwind", u.headwind_mps, " m/s", 1),
        range("derating τ", u.derate_tau_s, " s", 0),
        range("floor", u.derate_floor, "", 2),
    ]
    .into_iter()
    .flatten()
    {
        over.push(s);
    }
    crate::out!(
        "Monte Carlo: {} trials (seed {}, {:.2} s) for each boost start, over {}",
        mc.trials,
        mc.seed,
        mc_s,
        if over.is_empty() { "nothing (no ranges in the plan)".into() } else { over.join(", ") }
    );
    crate::out!(
        "  probability of reaching {target:.0} km/h: {:.1} % as planned (boost {planned_boost}); {:.1} % with the best start ({:.2} km)",
        mc_planned.p_target * 100.0,
        mc.p_target * 100.0,
        best_m / 1000.0
    );
    crate::out!("  with the best start:");
    let p = mc.peak_percentiles;
    crate::out!(
        "    peak speed, km/h: 5 % {:.1} · 25 % {:.1} · median {:.1} · 75 % {:.1} · 95 % {:.1}",
        kmh(p[0]),
        kmh(p[1]),
        kmh(p[2]),
        kmh(p[3]),
        kmh(p[4])
    );
    crate::out!(
        "  probability of passing the stop-by point above {:.0} km/h when braking at {:.2} km: {:.1} % as planned, {:.1} % with the best start",
        kmh(track.exit_speed_mps),
        plan.driver.brake_at_m / 1000.0,
        mc_planned.p_overrun * 100.0,
        mc.p_overrun * 100.0
    );
    crate::out!();
    crate::out!("{}", crate::CAUTION);
    crate::out!("A plan is a model: check it against the run director's limits and the track's own figures.");
    Ok(ExitCode::SUCCESS)
}
