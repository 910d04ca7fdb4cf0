//! Is the uncertainty termvel shows honest? Seeded rehearsals of varied
//! cars (mass, drag area, rolling resistance, grip, the vehicle file's
//! priors off by up to 15 %), winds (steady and gusting) and sensor noise,
//! each run through the simulator and the engine in-process. Over them the
//! truth must lie within ±2 standard deviations of the final road-load
//! estimate in at least 90 % of runs, for CdA and for Crr, and no snapshot
//! may say "converged" with the truth outside ±3 standard deviations.
//!
//! CI runs [`REDUCED_RUNS`] rehearsals; the full count
//! (`TERMVEL_CALIBRATION_RUNS=60`, or the ignored test
//! `road_load_uncertainty_is_calibrated_full`) is run by hand and its
//! figures quoted in the estimator's documentation.

use std::sync::Arc;

use termvel::config::run_plan::{BoostStart, Plan};
use termvel::config::{self, ConfigSet};
use termvel::engine::{Engine, EngineOptions};
use termvel::sim::Simulator;
use termvel::sim::rng::Rng;
use termvel::sources::EventSource;

/// Rehearsals in the default (CI) run.
const REDUCED_RUNS: usize = 12;
/// Rehearsals in the full run.
const FULL_RUNS: usize = 60;

/// One rehearsal's outcome.
struct Outcome {
    /// (estimate, sd, truth) at the end, CdA and Crr.
    cda: (f64, f64, f64),
    crr: (f64, f64, f64),
    converged_at_end: bool,
    /// Snapshots that said "converged", and among them those with the
    /// truth outside ±3 sd (CdA or Crr).
    converged_snapshots: u64,
    overclaimed: Vec<String>,
}

/// The `k`-th varied case: its configuration and plan.
fn case(k: usize) -> (ConfigSet, Plan) {
    let (mut plan, mut cfg) = config::load_plan(None, &[]).expect("the embedded plan loads");
    let mut rng = Rng::new(1000 + k as u64);
    let veh = &mut cfg.vehicle;
    veh.mass_kg = rng.range(1300.0, 1900.0);
    veh.cda_m2 = rng.range(0.55, 1.0);
    veh.crr0 = rng.range(0.009, 0.015);
    veh.grip_limit_g = rng.range(0.45, 0.8);
    plan.seed = 7 + k as u64;
    plan.faults.clear();
    plan.car.mass_kg = None;
    plan.car.cda_m2 = Some(veh.cda_m2 * rng.range(0.85, 1.15));
    plan.car.crr0 = Some(veh.crr0 * rng.range(0.85, 1.15));
    let a = &mut plan.ambient;
    a.headwind_mps = rng.range(-3.0, 3.0);
    a.gust_mps = if k.is_multiple_of(3) { 0.0 } else { rng.range(0.0, 1.5) };
    a.gust_period_s = rng.range(6.0, 15.0);
    let noise = rng.range(0.5, 2.0);
    let s = &mut plan.sensors;
    s.noise_speed_mps *= noise;
    s.noise_accel_mps2 *= noise;
    s.noise_power_frac *= noise;
    // A short run: half a second at the line, full throttle (boost from
    // the line or later), and on every other run a coast before braking.
    let d = &mut plan.driver;
    d.hold_s = 0.5;
    d.tail_s = 0.5;
    d.brake_at_m = rng.range(1800.0, 2600.0);
    d.boost_start = BoostStart::AtDistance(rng.range(0.0, 800.0));
    if k % 2 == 1 {
        d.throttle_at_m = vec![0.0, d.brake_at_m - rng.range(500.0, 900.0)];
        d.throttle = vec![1.0, 0.0];
    } else {
        d.throttle_at_m = vec![0.0];
        d.throttle = vec![1.0];
    }
    (cfg, plan)
}

/// Rehearses case `k` through the engine and collects what it showed.
fn rehearse(k: usize) -> Outcome {
    let (cfg, plan) = case(k);
    let (cda_true, crr_true) = (plan.car.cda_m2.unwrap(), plan.car.crr0.unwrap());
    let cfg = Arc::new(cfg);
    let mut sim = Simulator::new(cfg.clone(), Arc::new(plan));
    let mut engine = Engine::new(cfg, EngineOptions::default());
    let (mut converged_snapshots, mut overclaimed) = (0, Vec::new());
    let mut check = |s: termvel::engine::Snapshot| {
        let e = s.derived.estimate;
        if e.converged {
            converged_snapshots += 1;
            let cda_z = (e.cda_m2.value - cda_true) / e.cda_m2.sd;
            let crr_z = (e.crr.value - crr_true) / e.crr.sd;
            if cda_z.abs() > 3.0 || crr_z.abs() > 3.0 {
                overclaimed.push(format!("case {k}: converged with CdA z {cda_z:+.1}, Crr z {crr_z:+.1}: {e:?}"));
            }
        }
    };
    while let Some(ev) = sim.next_event() {
        engine.feed(&ev, sim.sources(), &mut check);
    }
    engine.finish(sim.sources(), &mut check);
    let e = engine.derived().estimate;
    Outcome {
        cda: (e.cda_m2.value, e.cda_m2.sd, cda_true),
        crr: (e.crr.value, e.crr.sd, crr_true),
        converged_at_end: e.converged,
        converged_snapshots,
        overclaimed,
    }
}

/// Runs `n` cases and asserts the calibration; prints the figures.
fn calibration(n: usize) {
    let outcomes: Vec<Outcome> = (0..n).map(rehearse).collect();
    let within = |f: &dyn Fn(&Outcome) -> (f64, f64, f64), m: f64| {
        outcomes
            .iter()
            .filter(|o| {
                let (v, sd, t) = f(o);
                (v - t).abs() <= m * sd
            })
            .count()
    };
    let z = |(v, sd, t): (f64, f64, f64)| (v - t) / sd;
    for (k, o) in outcomes.iter().enumerate() {
        println!(
            "case {k:2}: CdA {:.4} ± {:.4} (truth {:.4}, z {:+.2}); Crr {:.5} ± {:.5} (truth {:.5}, z {:+.2}); converged {}",
            o.cda.0,
            o.cda.1,
            o.cda.2,
            z(o.cda),
            o.crr.0,
            o.crr.1,
            o.crr.2,
            z(o.crr),
            o.converged_at_end
        );
    }
    let (cda2, crr2) = (within(&|o| o.cda, 2.0), within(&|o| o.crr, 2.0));
    let converged: u64 = outcomes.iter().map(|o| o.converged_snapshots).sum();
    let overclaimed: Vec<&String> = outcomes.iter().flat_map(|o| &o.overclaimed).collect();
    let at_end = outcomes.iter().filter(|o| o.converged_at_end).count();
    println!(
        "{n} rehearsals: truth within ±2 sd: CdA {cda2} ({:.0} %), Crr {crr2} ({:.0} %); within ±1 sd: CdA {}, Crr {}; \
         converged at the end in {at_end}; {converged} converged snapshots, {} with the truth outside ±3 sd",
        100.0 * cda2 as f64 / n as f64,
        100.0 * crr2 as f64 / n as f64,
        within(&|o| o.cda, 1.0),
        within(&|o| o.crr, 1.0),
        overclaimed.len()
    );
    assert!(cda2 as f64 >= 0.9 * n as f64, "CdA: truth within ±2 sd in only {cda2} of {n}");
    assert!(crr2 as f64 >= 0.9 * n as f64, "Crr: truth within ±2 sd in only {crr2} of {n}");
    assert!(overclaimed.is_empty(), "converged shown with the truth outside ±3 sd:\n{overclaimed:#?}");
    assert!(at_end > 0, "some rehearsal converges: the test is not vacuous");
}

#[test]
fn road_load_uncertainty_is_calibrated() {
    // Issue 14, item 3: the estimator ended "converged" at 0.5688 ± 0.0005 m²
    // against a true 0.60, Crr 0.0229 ± 0.0002 against 0.012: its standard
    // deviations ignored model mismatch.
    let n = std::env::var("TERMVEL_CALIBRATION_RUNS").ok().and_then(|v| v.parse().ok()).unwrap_or(REDUCED_RUNS);
    calibration(n);
}

#[test]
#[ignore = "the full count: about a minute in release"]
fn road_load_uncertainty_is_calibrated_full() {
    calibration(FULL_RUNS);
}
