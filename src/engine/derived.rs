//! The derived quantities a snapshot carries, and their computation at each
//! snapshot tick from the channel store and the estimators.

use super::estimators::{DeratingFit, Estimated, RoadLoadEstimate, RoadLoadEstimator as RoadLoadEstimatorPrior};
use super::physics::{air, battery as bat, braking, roadload};
use super::power_curve::{self, PowerPoint};
use super::projection::{BoostModel, ProjectionInputs, project};
use crate::config::ConfigSet;

/// Where the air density came from.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum AirOrigin {
    /// CIPM-2007 from the weather channels, with the age of the oldest input, s.
    Measured { age_s: f64, humidity_assumed: bool },
    /// ISO 2533 standard atmosphere at the track's elevation.
    Standard,
}

/// Which limit ends boost first.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum BoostLimit {
    Energy,
    Power,
    Thermal,
}

impl BoostLimit {
    pub fn as_str(self) -> &'static str {
        match self {
            BoostLimit::Energy => "energy",
            BoostLimit::Power => "power",
            BoostLimit::Thermal => "thermal",
        }
    }
}

/// Road-load power at the present speed.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct RoadLoadView {
    pub aero_w: f64,
    pub rolling_w: f64,
    pub grade_w: f64,
    pub total_w: f64,
    /// m_eff·a·v.
    pub inertial_w: f64,
    /// Road load plus inertia: what the powertrain must deliver at the wheels.
    pub demand_w: f64,
    /// Measured powertrain power at the wheels (η·(engine + motor)), if known.
    pub wheel_w: Option<f64>,
    /// What the powertrain could deliver at the wheels now at full demand.
    pub available_w: f64,
    /// Available minus road load: what is left to accelerate with.
    pub margin_w: f64,
    /// The CdA and Crr these use (the estimator's current values) and
    /// whether the estimate has converged.
    pub cda_m2: f64,
    pub crr: f64,
    pub estimate_converged: bool,
}

/// The battery now.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct BatteryView {
    pub power_w: Option<f64>,
    pub discharge_rate_kw_per_kwh: Option<f64>,
    pub soc: Option<f64>,
    pub energy_above_reserve_j: Option<f64>,
    pub temp_c: Option<f64>,
    pub ocv_v: Option<Estimated>,
    pub resistance_ohm: Option<Estimated>,
    pub model_converged: bool,
    /// HPPC maximum discharge power from the fitted model (voltage- and
    /// current-limited), W.
    pub hppc_max_w: Option<f64>,
    /// The battery system's own reported limit, W.
    pub reported_limit_w: Option<f64>,
    /// What the battery can deliver now: the reported limit, else the HPPC value.
    pub deliverable_w: Option<f64>,
    /// The pack's rated discharge power, W.
    pub rated_w: f64,
    pub derating_ratio: Option<f64>,
    pub boosting: bool,
    pub time_in_boost_s: f64,
    pub fit: Option<DeratingFit>,
    pub heating_c_per_s: Option<f64>,
}

/// Seconds of boost left, by limit.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct BoostLeft {
    pub energy_s: Option<f64>,
    pub power_s: Option<f64>,
    pub thermal_s: Option<f64>,
    pub binding: Option<BoostLimit>,
    pub seconds: Option<f64>,
    /// Battery power needed to reach and hold the target speed, W.
    pub need_w: Option<f64>,
    /// Whether the derating curve used is the fitted one (else the vehicle file's).
    pub curve_fitted: bool,
}

/// The projection's answer.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct ProjectionView {
    pub peak_mps: f64,
    /// Peak with CdA at +1 and −1 standard deviation.
    pub peak_low_mps: f64,
    pub peak_high_mps: f64,
    pub peak_at_m: f64,
    pub peak_in_s: f64,
    pub terminal_mps: f64,
    pub terminal_no_boost_mps: f64,
    pub target_mps: f64,
    pub target_reachable: bool,
    pub target_in_s: Option<f64>,
    pub target_at_m: Option<f64>,
    /// (distance m, speed m/s) ahead of the car, for drawing.
    pub trajectory: Vec<(f64, f64)>,
    /// Inputs are converged estimates (else priors: an unconverged projection).
    pub converged: bool,
}

/// The braking point.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct BrakingView {
    /// Where the car must start braking at full demand until then, m.
    pub point_m: f64,
    pub distance_m: f64,
    pub in_s: f64,
    /// Distance needed to slow to the exit speed from the present speed, m.
    pub stopping_m: f64,
    pub passed: bool,
}

/// Tyre speed margin.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct TyreView {
    pub rated_mps: f64,
    pub margin_mps: f64,
    pub peak_margin_mps: Option<f64>,
}

/// Everything the engine derives, at one instant.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Derived {
    pub speed_mps: Option<f64>,
    pub speed_source: &'static str,
    pub distance_m: f64,
    pub accel_mps2: Option<f64>,
    /// `channel` or `from speed`.
    pub accel_source: &'static str,
    pub air_density: f64,
    pub air_origin: Option<AirOrigin>,
    pub road_load: Option<RoadLoadView>,
    pub estimate: RoadLoadEstimate,
    pub battery: BatteryView,
    pub boost_left: BoostLeft,
    pub projection: Option<ProjectionView>,
    /// Why there is no projection, when there is none.
    pub projection_note: Option<&'static str>,
    pub braking: Option<BrakingView>,
    pub tyre: Option<TyreView>,
    /// Inputs that are missing or stale, so predictions say so.
    pub stale_inputs: Vec<&'static str>,
    /// Power at the wheels against speed (road load, available, engine
    /// only) at the present estimates, for the power screen's chart.
    pub power_curve: Vec<PowerPoint>,
}

/// The engine's inputs to a tick, read from the channel store.
#[derive(Clone, Copy, Debug, Default)]
pub struct TickInputs {
    pub speed: Option<(f64, &'static str, f64)>,
    pub distance_m: f64,
    pub accel: Option<(f64, &'static str)>,
    pub weather: Option<(f64, f64, Option<f64>, f64)>,
    pub wind_mps: Option<f64>,
    pub engine_w: Option<f64>,
    pub motor_w: Option<f64>,
    pub voltage_v: Option<f64>,
    pub current_a: Option<f64>,
    pub soc: Option<f64>,
    pub temp_c: Option<f64>,
    pub power_limit_w: Option<f64>,
    pub boosting: bool,
    pub throttle: Option<f64>,
    pub brake: Option<f64>,
}

/// Computes the derived block. Pure: the same inputs give the same output.
pub fn compute(
    cfg: &ConfigSet,
    inp: &TickInputs,
    estimate: &RoadLoadEstimate,
    pack: Option<super::estimators::PackEstimate>,
    time_in_boost_s: f64,
    fit: Option<DeratingFit>,
    heating: Option<f64>,
) -> Derived {
    let veh = &cfg.vehicle;
    let track = &cfg.track;
    let b = &veh.battery;
    let mut d = Derived { distance_m: inp.distance_m, ..Derived::default() };
    let mut stale: Vec<&'static str> = Vec::new();

    // Air density: measured weather (CIPM-2007) or the standard atmosphere.
    match inp.weather {
        Some((t_c, p_pa, rh, age_s)) => {
            d.air_density = air::moist_air_density_cipm2007(t_c, p_pa, rh.unwrap_or(0.5));
            d.air_origin = Some(AirOrigin::Measured { age_s, humidity_assumed: rh.is_none() });
        }
        None => {
            d.air_density = air::isa_troposphere(air::geopotential_m(track.elevation_m)).2;
            d.air_origin = Some(AirOrigin::Standard);
            stale.push("weather");
        }
    }
    let rho = d.air_density;
    let wind = inp.wind_mps.unwrap_or(0.0);
    if let Some((v, src, _)) = inp.speed {
        d.speed_mps = Some(v);
        d.speed_source = src;
    } else {
        stale.push("speed");
    }
    if let Some((a, src)) = inp.accel {
        d.accel_mps2 = Some(a);
        d.accel_source = src;
    }
    // The estimator's current values (its prior, the vehicle file's, blended
    // with the data so far) once the data has told it something: each
    // coefficient's standard deviation under half its prior's. Before that
    // the first seconds of data can mislead more than the file does.
    // Whether the estimate has converged is carried along and shown.
    let informative = |e: super::estimators::Estimated, prior_sd: f64| e.sd < 0.5 * prior_sd && e.value > 0.0;
    let cda = if informative(estimate.cda_m2, RoadLoadEstimatorPrior::cda_sd(veh)) {
        estimate.cda_m2.value
    } else {
        veh.cda_m2
    };
    let crr =
        if informative(estimate.crr, RoadLoadEstimatorPrior::crr_sd(veh)) { estimate.crr.value } else { veh.crr0 };
    let from_estimate = estimate.converged;

    // Battery.
    let rated_w = b.rated_power_w;
    let mut bv = BatteryView {
        rated_w,
        boosting: inp.boosting,
        time_in_boost_s,
        fit,
        heating_c_per_s: heating,
        ..BatteryView::default()
    };
    bv.power_w = inp.voltage_v.zip(inp.current_a).map(|(v, i)| v * i);
    bv.discharge_rate_kw_per_kwh = bv.power_w.map(|p| bat::discharge_rate_kw_per_kwh(p, b.energy_j));
    bv.soc = inp.soc;
    bv.energy_above_reserve_j = inp.soc.map(|s| ((s - b.soc_reserve) * b.energy_j).max(0.0));
    bv.temp_c = inp.temp_c;
    if let Some(p) = pack {
        bv.ocv_v = Some(p.ocv_v);
        bv.resistance_ohm = Some(p.resistance_ohm);
        bv.model_converged = p.converged;
        let r = if p.converged { p.resistance_ohm.value } else { b.resistance_ohm };
        bv.hppc_max_w = Some(bat::max_discharge_power_w(p.ocv_v.value, r, b.pack_min_v(), b.max_current_a));
    }
    bv.reported_limit_w = inp.power_limit_w;
    bv.deliverable_w = inp.power_limit_w.or(bv.hppc_max_w).map(|p| p.min(rated_w * 1.5));
    bv.derating_ratio = bv.deliverable_w.map(|p| p / rated_w);
    if bv.deliverable_w.is_none() {
        stale.push("battery");
    }

    // The derating curve: the fit once converged, else the vehicle file's.
    let (tau, floor, curve_fitted) = match fit {
        Some(f) if f.converged => {
            // The fit's floor is a ratio of rated; the projection's curve is
            // relative to a fresh pack: normalise by the fitted start.
            let r0 = (f.floor + f.amplitude).max(1e-6);
            (f.tau_s, (f.floor / r0).clamp(0.0, 1.0), true)
        }
        _ => (b.derate_tau_s, b.derate_floor, false),
    };
    let energy_j = bv.energy_above_reserve_j.unwrap_or(0.0);
    // With the vehicle file's curve (a ratio), add the fall of the
    // current-limited power with the open-circuit voltage as charge is
    // drawn: d(ln P)/dt = (dP/dOCV)·(dOCV/dsoc)·(dsoc/dt)/P. A fitted curve
    // has it in already.
    let soc_fade_per_s = match (curve_fitted, pack, bv.deliverable_w) {
        (false, Some(p), Some(deliv)) if deliv > 0.0 => {
            let slope = if p.ocv_slope_v.value > 0.0 && p.ocv_slope_v.sd < 0.3 * p.ocv_slope_v.value {
                p.ocv_slope_v.value
            } else {
                0.8 * b.cells_in_series as f64
            };
            let r = if p.converged { p.resistance_ohm.value } else { b.resistance_ohm };
            let (v_lim, i_lim) = (
                bat::voltage_limited_power_w(p.ocv_v.value, r, b.pack_min_v()),
                bat::current_limited_power_w(p.ocv_v.value, r, b.max_current_a),
            );
            let (hppc, dp_docv) = if i_lim <= v_lim { (i_lim, b.max_current_a) } else { (v_lim, b.pack_min_v() / r) };
            if hppc > 0.0 { (dp_docv * slope * deliv / (b.energy_j * hppc)).clamp(0.0, 0.05) } else { 0.0 }
        }
        _ => 0.0,
    };
    let boost = BoostModel {
        soc_fade_per_s,
        available: energy_j > 0.0 && bv.deliverable_w.is_some_and(|p| p > 0.0),
        deliverable_w: bv.deliverable_w.unwrap_or(0.0),
        tau_s: tau,
        floor,
        time_in_boost_s: if inp.boosting { time_in_boost_s } else { 0.0 },
        rated_w,
        energy_j,
    };

    // Road load at the present speed; the motor counts only while boost is
    // available, here and in the curve alike.
    let boost_w = boost.available.then_some(boost.deliverable_w);
    d.power_curve = power_curve::curve(veh, power_curve::vmax_mps(veh, track.target_speed_mps), rho, cda, crr, boost_w);
    let grade = track.grade_at(inp.distance_m);
    let comb_env = |v: f64| veh.full_load_power_w(v);
    if let Some(v) = d.speed_mps {
        let rl = roadload::road_load(&roadload::RoadLoadInputs {
            v_mps: v,
            wind_mps: wind,
            rho,
            cda_m2: cda,
            crr0: crr,
            crr2_s2_m2: veh.crr2_s2_m2,
            mass_kg: veh.mass_kg,
            grade,
        });
        let inertial = d.accel_mps2.map_or(0.0, |a| roadload::inertial_power_w(veh.effective_mass_kg(), a, v));
        let wheel_w = match (inp.engine_w, inp.motor_w) {
            (None, None) => None,
            (e, m) => Some(roadload::wheel_power_w(e.unwrap_or(0.0), m.unwrap_or(0.0), veh.driveline_efficiency)),
        };
        let available = power_curve::available_w(veh, v, boost_w);
        d.road_load = Some(RoadLoadView {
            aero_w: rl.aero_w,
            rolling_w: rl.rolling_w,
            grade_w: rl.grade_w,
            total_w: rl.total_w,
            inertial_w: inertial,
            demand_w: rl.total_w + inertial,
            wheel_w,
            available_w: available,
            margin_w: available - rl.total_w,
            cda_m2: cda,
            crr,
            estimate_converged: from_estimate,
        });
    }

    // Battery power needed to reach and hold the target: road load at the
    // target speed beyond what the combustion engine gives there.
    let vt = track.target_speed_mps;
    let rl_target = roadload::road_load(&roadload::RoadLoadInputs {
        v_mps: vt,
        wind_mps: wind,
        rho,
        cda_m2: cda,
        crr0: crr,
        crr2_s2_m2: veh.crr2_s2_m2,
        mass_kg: veh.mass_kg,
        grade: 0.0,
    })
    .total_w;
    let need_w = ((rl_target / veh.driveline_efficiency - comb_env(vt)) / veh.motor_efficiency).max(0.0);

    // Boost time left, three ways.
    let mut left = BoostLeft { need_w: Some(need_w), curve_fitted, ..BoostLeft::default() };
    if let (Some(p), Some(ocv)) = (bv.deliverable_w, bv.ocv_v) {
        let r = bv.resistance_ohm.filter(|_| bv.model_converged).map_or(b.resistance_ohm, |e| e.value);
        // At the present current while boosting; else at the deliverable power.
        let i_boost = if inp.boosting && inp.current_a.is_some_and(|i| i > 10.0) {
            inp.current_a.unwrap_or(0.0)
        } else {
            let disc = (ocv.value * ocv.value - 4.0 * r * p).max(0.0);
            (ocv.value - disc.sqrt()) / (2.0 * r)
        };
        if bv.energy_above_reserve_j.is_some() {
            left.energy_s = Some(bat::energy_limited_time_s(energy_j, ocv.value, r, i_boost));
        }
        // Power: when the curve from what is delivered now falls below the need.
        let now = bat::derating_ratio(boost.time_in_boost_s, tau, floor);
        left.power_s = Some(if p < need_w {
            0.0
        } else if now > 0.0 {
            let ratio_needed = need_w / p * now;
            (bat::time_until_ratio_s(ratio_needed, tau, floor) - boost.time_in_boost_s).max(0.0)
        } else {
            0.0
        });
        // Thermal: the measured heating rate while boosting, else I²R/C.
        let rate = match heating {
            Some(h) if inp.boosting && time_in_boost_s >= 5.0 => h,
            _ => i_boost * i_boost * r / b.heat_capacity_j_per_k,
        };
        if let Some(t) = inp.temp_c {
            left.thermal_s = Some(bat::thermal_limited_time_s(t, b.temp_limit_c, rate));
        }
        let mut best: Option<(BoostLimit, f64)> = None;
        for (lim, s) in [
            (BoostLimit::Energy, left.energy_s),
            (BoostLimit::Power, left.power_s),
            (BoostLimit::Thermal, left.thermal_s),
        ] {
            if let Some(s) = s
                && s.is_finite()
                && best.is_none_or(|(_, b)| s < b)
            {
                best = Some((lim, s));
            }
        }
        left.binding = best.map(|b| b.0);
        left.seconds = best.map(|b| b.1);
    }

    // Projection and braking point.
    let braking_now = inp.brake.is_some_and(|b| b > 0.1);
    if let Some(v) = d.speed_mps {
        let base = ProjectionInputs {
            vehicle: veh,
            track,
            x0_m: inp.distance_m,
            v0_mps: v,
            rho,
            wind_mps: wind,
            cda_m2: cda,
            crr0: crr,
            boost,
        };
        let kappa = 0.5 * rho * cda / veh.mass_kg;
        let stopping = braking::braking_distance_m(v, track.exit_speed_mps.min(v), track.braking_decel_mps2, kappa);
        let to_stop_by = track.stop_by_m() - inp.distance_m;
        if braking_now || to_stop_by < stopping {
            d.projection_note = Some(if braking_now { "braking" } else { "past the braking point" });
            d.braking = Some(BrakingView {
                point_m: track.stop_by_m() - stopping,
                distance_m: to_stop_by - stopping,
                in_s: 0.0,
                stopping_m: stopping,
                passed: to_stop_by < stopping,
            });
        } else {
            let p = project(&base);
            let sd = estimate.cda_m2.sd.max(0.0);
            let band = |dc: f64| project(&ProjectionInputs { cda_m2: (cda + dc).max(0.05), ..base }).peak_mps;
            let (lo, hi) = if from_estimate { (band(sd), band(-sd)) } else { (band(0.1 * cda), band(-0.1 * cda)) };
            let step = (p.points.len() / 60).max(1);
            let trajectory: Vec<(f64, f64)> =
                p.points.iter().step_by(step).chain(p.points.last()).map(|&(_, x, v)| (x, v)).collect();
            d.braking = Some(BrakingView {
                point_m: p.brake_at_m,
                distance_m: p.brake_at_m - inp.distance_m,
                in_s: p.brake_in_s,
                stopping_m: stopping,
                passed: false,
            });
            d.projection = Some(ProjectionView {
                peak_mps: p.peak_mps,
                peak_low_mps: lo.min(p.peak_mps),
                peak_high_mps: hi.max(p.peak_mps),
                peak_at_m: p.peak_at_m,
                peak_in_s: p.peak_in_s,
                terminal_mps: p.terminal_mps,
                terminal_no_boost_mps: p.terminal_no_boost_mps,
                target_mps: vt,
                target_reachable: p.target.is_some(),
                target_in_s: p.target.map(|t| t.0),
                target_at_m: p.target.map(|t| t.1),
                trajectory,
                converged: from_estimate && curve_fitted,
            });
        }
        d.tyre = Some(TyreView {
            rated_mps: veh.tyre_rated_mps,
            margin_mps: braking::tyre_speed_margin_mps(v, veh.tyre_rated_mps),
            peak_margin_mps: d.projection.as_ref().map(|p| veh.tyre_rated_mps - p.peak_mps),
        });
    } else {
        d.projection_note = Some("no speed");
    }
    d.stale_inputs = stale;
    d.estimate = *estimate;
    d.battery = bv;
    d.boost_left = left;
    d
}
