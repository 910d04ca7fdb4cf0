//! The derived quantities a snapshot carries, and their computation at each
//! snapshot tick from the channel store and the estimators.

use super::estimators::{DeratingFit, Estimated, PackEstimate, RoadLoadEstimate};
use super::physics::{air, braking, pack as bat, roadload};
use super::power_curve::{self, PowerPoint};
use super::projection::{BoostModel, ProjectionInputs, project};
use crate::config::vehicle::{Battery, CDA_RANGE_M2, CRR_RANGE};
use crate::config::{ConfigSet, Track, Vehicle};

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
    /// Where the CdA and the Crr in use came from (the estimate, or the
    /// vehicle file's value and why).
    pub cda_source: CoefficientSource,
    pub crr_source: CoefficientSource,
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
    /// Terminal speeds, m/s; `None` when above `terminal_bound_mps` (the
    /// root finder's bracket, never reported as a root).
    pub terminal_mps: Option<f64>,
    pub terminal_no_boost_mps: Option<f64>,
    pub terminal_bound_mps: f64,
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
    /// The derating curves over time in boost (the vehicle file's and the
    /// fit's), for the battery screen's chart.
    pub derating_chart: super::derating_chart::DeratingChart,
    /// The run so far: peak, target, phase, the stop against stop-by.
    pub progress: super::progress::ProgressView,
    /// Mean wind along the run the road load uses, m/s, headwind positive.
    pub wind_mps: Option<f64>,
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

/// The air and the road-load coefficients the road load, the boost need
/// and the projection are computed with.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct RoadModel {
    /// Air density, kg/m³.
    pub rho: f64,
    /// Mean wind along the run, m/s, headwind positive.
    pub wind_mps: f64,
    pub cda_m2: f64,
    pub crr: f64,
    /// Whether the road-load estimate has converged (and is in use).
    pub converged: bool,
    /// Where the CdA and the Crr came from.
    pub cda_source: CoefficientSource,
    pub crr_source: CoefficientSource,
}

impl RoadModel {
    /// The road load of `veh` at `v_mps` on `grade` with this air and these
    /// coefficients (`physics::roadload::road_load`).
    pub fn road_load(&self, veh: &Vehicle, v_mps: f64, grade: f64) -> roadload::RoadLoad {
        roadload::road_load(&roadload::RoadLoadInputs {
            v_mps,
            wind_mps: self.wind_mps,
            rho: self.rho,
            cda_m2: self.cda_m2,
            crr0: self.crr,
            crr2_s2_m2: veh.crr2_s2_m2,
            mass_kg: veh.mass_kg,
            grade,
        })
    }
}

/// The derating curve the boost model follows: its time constant, its floor
/// relative to a fresh pack, and whether it is the fit (else the vehicle
/// file's).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DeratingCurve {
    pub tau_s: f64,
    pub floor: f64,
    pub fitted: bool,
}

/// Computes the derived block. Pure: the same inputs give the same output.
///
/// A short sequence of named steps, each a pure function below with its
/// own tests: air, coefficients, battery, the boost model, road load, boost
/// need and boost left, braking or projection, tyre.
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

    let (rho, origin) = air_step(inp.weather, track.elevation_m);
    d.air_density = rho;
    d.air_origin = Some(origin);
    if origin == AirOrigin::Standard {
        stale.push("weather");
    }
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
    let coefficients = coefficients_step(veh, estimate);
    let (cda_m2, crr) = (coefficients.cda_m2, coefficients.crr);
    // Converged only when the converged estimate is what is in use.
    let from_estimate = coefficients.cda_source == CoefficientSource::Estimate
        && coefficients.crr_source == CoefficientSource::Estimate;
    let model = RoadModel {
        rho,
        wind_mps: inp.wind_mps.unwrap_or(0.0),
        cda_m2,
        crr,
        converged: estimate.converged && from_estimate,
        cda_source: coefficients.cda_source,
        crr_source: coefficients.crr_source,
    };

    let bv = battery_step(b, inp, pack, time_in_boost_s, fit, heating);
    if bv.deliverable_w.is_none() {
        stale.push("battery");
    }
    let curve = derating_curve(b, fit);
    let boost = BoostModel {
        soc_fade_per_s: soc_fade_per_s(b, pack, curve.fitted, bv.deliverable_w),
        available: bv.energy_above_reserve_j.unwrap_or(0.0) > 0.0 && bv.deliverable_w.is_some_and(|p| p > 0.0),
        deliverable_w: bv.deliverable_w.unwrap_or(0.0),
        tau_s: curve.tau_s,
        floor: curve.floor,
        time_in_boost_s: if inp.boosting { time_in_boost_s } else { 0.0 },
        rated_w: b.rated_power_w,
        energy_j: bv.energy_above_reserve_j.unwrap_or(0.0),
    };

    // Road load at the present speed and the power-against-speed curve; the
    // motor counts only while boost is available, in both alike.
    let boost_w = boost.available.then_some(boost.deliverable_w);
    d.power_curve =
        power_curve::curve(veh, power_curve::vmax_mps(veh, track.target_speed_mps), rho, cda_m2, crr, boost_w);
    let grade = track.grade_at(inp.distance_m);
    d.road_load = d.speed_mps.map(|v| road_load_step(veh, &model, grade, v, inp, &boost));

    let need_w = boost_need_w(veh, &model, track.target_speed_mps);
    let left = boost_left_step(b, &bv, inp.current_a, &boost, need_w, curve.fitted);

    if let Some(v) = d.speed_mps {
        let stopping = stopping_distance_m(track, &model, veh.mass_kg, v);
        let braking_now = inp.brake.is_some_and(|b| b > 0.1);
        if let Some((view, note)) = braking_step(track, inp.distance_m, stopping, braking_now) {
            d.projection_note = Some(note);
            d.braking = Some(view);
        } else {
            let base = ProjectionInputs {
                vehicle: veh,
                track,
                x0_m: inp.distance_m,
                v0_mps: v,
                rho,
                wind_mps: model.wind_mps,
                cda_m2,
                crr0: crr,
                boost,
            };
            let (projection, braking) =
                projection_step(&base, estimate.cda_m2.sd, model.converged, curve.fitted, stopping);
            d.projection = Some(projection);
            d.braking = Some(braking);
        }
        d.tyre = Some(tyre_step(veh.tyre_rated_mps, v, d.projection.as_ref().map(|p| p.peak_mps)));
    } else {
        d.projection_note = Some("no speed");
    }
    d.stale_inputs = stale;
    d.estimate = *estimate;
    d.battery = bv;
    d.boost_left = left;
    d
}

/// Air density, kg/m³, and where it came from: CIPM-2007 moist air
/// (Picard et al., Metrologia 45, 2008) from the weather channels
/// (temperature °C, pressure Pa, relative humidity 0–1 assumed 0.5 when
/// not measured, age s), else the ISO 2533 standard atmosphere at the
/// track's elevation.
pub fn air_step(weather: Option<(f64, f64, Option<f64>, f64)>, elevation_m: f64) -> (f64, AirOrigin) {
    match weather {
        Some((t_c, p_pa, rh, age_s)) => (
            air::moist_air_density_cipm2007(t_c, p_pa, rh.unwrap_or(0.5)),
            AirOrigin::Measured { age_s, humidity_assumed: rh.is_none() },
        ),
        None => (air::isa_troposphere(air::geopotential_m(elevation_m)).2, AirOrigin::Standard),
    }
}

/// Where a road-load coefficient in use came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum CoefficientSource {
    /// The online estimate: inside the physical bounds and certain enough.
    Estimate,
    /// The vehicle file's value: the estimate is more uncertain than
    /// [`MAX_REL_SD_CDA`] / [`MAX_REL_SD_CRR`] of itself.
    #[default]
    PriorUncertain,
    /// The vehicle file's value: the estimate is outside the range the
    /// vehicle schema allows (not a car's).
    PriorUnphysical,
    /// The vehicle file's value: this estimate would do, but the other
    /// coefficient's would not, and the two are fitted together.
    PriorWithOther,
}

impl CoefficientSource {
    pub fn as_str(self) -> &'static str {
        match self {
            CoefficientSource::Estimate => "estimate",
            CoefficientSource::PriorUncertain => "prior_uncertain",
            CoefficientSource::PriorUnphysical => "prior_unphysical",
            CoefficientSource::PriorWithOther => "prior_with_other",
        }
    }
}

/// Largest relative standard deviation at which the drag-area estimate is
/// used (10 %: the peak speed goes as CdA^(−1/3), so some 3 % of speed).
pub const MAX_REL_SD_CDA: f64 = 0.10;
/// Largest relative standard deviation at which the rolling-coefficient
/// estimate is used (Crr is the weaker-identified of the two; 30 % of it is
/// under 10 % of the road load at speed).
pub const MAX_REL_SD_CRR: f64 = 0.30;

/// The road-load coefficients in use and where each came from.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Coefficients {
    pub cda_m2: f64,
    pub crr: f64,
    pub cda_source: CoefficientSource,
    pub crr_source: CoefficientSource,
}

/// The CdA (m²) and Crr the road load uses: each estimate only inside the
/// vehicle schema's own range and with its standard deviation below a stated
/// fraction of itself; otherwise the vehicle file's value, and which one is
/// said. (An unconverged estimate once drove the projection with CdA
/// 0.0077 ± 0.061 m², below the schema's minimum, to a 727 km/h peak.)
pub fn coefficients_step(veh: &Vehicle, estimate: &RoadLoadEstimate) -> Coefficients {
    let pick = |e: Estimated, (lo, hi): (f64, f64), max_rel: f64, prior: f64| {
        if !(e.value.is_finite() && e.sd.is_finite()) || e.value < lo || e.value > hi {
            (prior, CoefficientSource::PriorUnphysical)
        } else if e.sd > max_rel * e.value.abs() || e.value <= 0.0 {
            (prior, CoefficientSource::PriorUncertain)
        } else {
            (e.value, CoefficientSource::Estimate)
        }
    };
    let (cda_m2, cda_source) = pick(estimate.cda_m2, CDA_RANGE_M2, MAX_REL_SD_CDA, veh.cda_m2);
    let (crr, crr_source) = pick(estimate.crr, CRR_RANGE, MAX_REL_SD_CRR, veh.crr0);
    // The two are fitted together and their errors are strongly
    // correlated (a drag area too high goes with a rolling coefficient too
    // low): one is not used with the other's prior. Each source still
    // says why its own estimate would or would not do.
    if cda_source == CoefficientSource::Estimate && crr_source == CoefficientSource::Estimate {
        Coefficients { cda_m2, crr, cda_source, crr_source }
    } else {
        let held =
            |s: CoefficientSource| if s == CoefficientSource::Estimate { CoefficientSource::PriorWithOther } else { s };
        Coefficients { cda_m2: veh.cda_m2, crr: veh.crr0, cda_source: held(cda_source), crr_source: held(crr_source) }
    }
}

/// The battery now: terminal power P = V·I, the discharge rate, energy
/// above the reserve E = (soc − reserve)·E_pack, and what it can deliver:
/// the battery system's reported limit, else the HPPC maximum from the
/// fitted OCV and R (the vehicle file's R until the fit converges), capped
/// at 1.5 times the rating (a guard against a wild fit or report).
pub fn battery_step(
    b: &Battery,
    inp: &TickInputs,
    pack: Option<PackEstimate>,
    time_in_boost_s: f64,
    fit: Option<DeratingFit>,
    heating: Option<f64>,
) -> BatteryView {
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
    bv
}

/// The derating curve: the fit once converged, else the vehicle file's.
/// The fit's floor is a ratio of rated; the projection's curve is relative
/// to a fresh pack, so it is normalised by the fitted start (floor +
/// amplitude).
pub fn derating_curve(b: &Battery, fit: Option<DeratingFit>) -> DeratingCurve {
    match fit {
        Some(f) if f.converged => {
            let r0 = (f.floor + f.amplitude).max(1e-6);
            DeratingCurve { tau_s: f.tau_s, floor: (f.floor / r0).clamp(0.0, 1.0), fitted: true }
        }
        _ => DeratingCurve { tau_s: b.derate_tau_s, floor: b.derate_floor, fitted: false },
    }
}

/// How fast the deliverable power falls as charge is drawn, fraction per
/// second: with the vehicle file's curve (a ratio), the fall of the HPPC
/// power with the open-circuit voltage, d(ln P)/dt =
/// (dP/dOCV)·(dOCV/dsoc)·(dsoc/dt)/P, with dP/dOCV = I_max when the
/// current limit binds and V_min/R when the voltage limit does, and
/// dsoc/dt = P_deliverable/E_pack. A fitted curve has it in already: 0.
/// The OCV slope is the fitted one when it is tight (sd under 30 %), else
/// 0.8 V per cell from full to empty (common practice for lithium-ion).
pub fn soc_fade_per_s(b: &Battery, pack: Option<PackEstimate>, curve_fitted: bool, deliverable_w: Option<f64>) -> f64 {
    match (curve_fitted, pack, deliverable_w) {
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
    }
}

/// Road load at the present speed `v_mps` (aero ½ρCdA·v_air²·v, rolling,
/// grade: [`roadload::road_load`]), inertial power m_eff·a·v, the measured
/// wheel power η·(engine + motor), and what the powertrain could deliver at
/// the wheels at full demand: η·(full-load envelope + motor), the motor fed
/// by the battery's deliverable power only while boost is available.
pub fn road_load_step(
    veh: &Vehicle,
    model: &RoadModel,
    grade: f64,
    v_mps: f64,
    inp: &TickInputs,
    boost: &BoostModel,
) -> RoadLoadView {
    let v = v_mps;
    let rl = model.road_load(veh, v, grade);
    let inertial = inp.accel.map_or(0.0, |(a, _)| roadload::inertial_power_w(veh.effective_mass_kg(), a, v));
    let wheel_w = match (inp.engine_w, inp.motor_w) {
        (None, None) => None,
        (e, m) => Some(roadload::wheel_power_w(e.unwrap_or(0.0), m.unwrap_or(0.0), veh.driveline_efficiency)),
    };
    let available = power_curve::available_w(veh, v, boost.available.then_some(boost.deliverable_w));
    RoadLoadView {
        aero_w: rl.aero_w,
        rolling_w: rl.rolling_w,
        grade_w: rl.grade_w,
        total_w: rl.total_w,
        inertial_w: inertial,
        demand_w: rl.total_w + inertial,
        wheel_w,
        available_w: available,
        margin_w: available - rl.total_w,
        cda_m2: model.cda_m2,
        crr: model.crr,
        estimate_converged: model.converged,
        cda_source: model.cda_source,
        crr_source: model.crr_source,
    }
}

/// Battery terminal power needed to reach and hold the target speed `vt`,
/// W: the level road load there beyond what the combustion engine gives,
/// through the driveline and the motor, (RL(vt)/η_drive − P_engine(vt))/η_motor,
/// floored at 0.
pub fn boost_need_w(veh: &Vehicle, model: &RoadModel, vt: f64) -> f64 {
    let rl_target = model.road_load(veh, vt, 0.0).total_w;
    ((rl_target / veh.driveline_efficiency - veh.full_load_power_w(vt)) / veh.motor_efficiency).max(0.0)
}

/// Seconds of boost left, three ways, and the limit that binds first:
/// energy (E/(OCV·I), [`bat::energy_limited_time_s`]), power (until the
/// derating curve from what is delivered now falls below `need_w`) and
/// thermal ((T_limit − T)/rate, the measured heating rate after 5 s of
/// boost, else I²R/C). The current is the measured one while boosting
/// above 10 A, else the current at the deliverable power
/// ([`bat::current_at_power_a`]). Empty without a deliverable power and a
/// pack model.
pub fn boost_left_step(
    b: &Battery,
    bv: &BatteryView,
    current_a: Option<f64>,
    boost: &BoostModel,
    need_w: f64,
    curve_fitted: bool,
) -> BoostLeft {
    let mut left = BoostLeft { need_w: Some(need_w), curve_fitted, ..BoostLeft::default() };
    let (Some(p), Some(ocv)) = (bv.deliverable_w, bv.ocv_v) else { return left };
    let (tau, floor) = (boost.tau_s, boost.floor);
    let r = bv.resistance_ohm.filter(|_| bv.model_converged).map_or(b.resistance_ohm, |e| e.value);
    let i_boost = if bv.boosting && current_a.is_some_and(|i| i > 10.0) {
        current_a.unwrap_or(0.0)
    } else {
        bat::current_at_power_a(ocv.value, r, p)
    };
    if bv.energy_above_reserve_j.is_some() {
        left.energy_s = Some(bat::energy_limited_time_s(boost.energy_j, ocv.value, r, i_boost));
    }
    let now = bat::derating_ratio(boost.time_in_boost_s, tau, floor);
    left.power_s = Some(if p < need_w {
        0.0
    } else if now > 0.0 {
        let ratio_needed = need_w / p * now;
        (bat::time_until_ratio_s(ratio_needed, tau, floor) - boost.time_in_boost_s).max(0.0)
    } else {
        0.0
    });
    let rate = match bv.heating_c_per_s {
        Some(h) if bv.boosting && bv.time_in_boost_s >= 5.0 => h,
        _ => i_boost * i_boost * r / b.heat_capacity_j_per_k,
    };
    if let Some(t) = bv.temp_c {
        left.thermal_s = Some(bat::thermal_limited_time_s(t, b.temp_limit_c, rate));
    }
    let mut best: Option<(BoostLimit, f64)> = None;
    for (lim, s) in
        [(BoostLimit::Energy, left.energy_s), (BoostLimit::Power, left.power_s), (BoostLimit::Thermal, left.thermal_s)]
    {
        if let Some(s) = s
            && s.is_finite()
            && best.is_none_or(|(_, b)| s < b)
        {
            best = Some((lim, s));
        }
    }
    left.binding = best.map(|b| b.0);
    left.seconds = best.map(|b| b.1);
    left
}

/// Distance to slow from `v_mps` to the track's exit speed at its braking
/// deceleration with aerodynamic drag (κ = ½ρCdA/m), m:
/// [`braking::braking_distance_m`].
pub fn stopping_distance_m(track: &Track, model: &RoadModel, mass_kg: f64, v_mps: f64) -> f64 {
    let kappa = 0.5 * model.rho * model.cda_m2 / mass_kg;
    braking::braking_distance_m(v_mps, track.exit_speed_mps.min(v_mps), track.braking_decel_mps2, kappa)
}

/// The braking point when there is nothing to project: the driver is
/// braking, or the stop-by point is closer than the stopping distance (the
/// braking point is behind the car). `None` when the projection should run.
pub fn braking_step(
    track: &Track,
    distance_m: f64,
    stopping_m: f64,
    braking_now: bool,
) -> Option<(BrakingView, &'static str)> {
    let to_stop_by = track.stop_by_m() - distance_m;
    if !(braking_now || to_stop_by < stopping_m) {
        return None;
    }
    let view = BrakingView {
        point_m: track.stop_by_m() - stopping_m,
        distance_m: to_stop_by - stopping_m,
        in_s: 0.0,
        stopping_m,
        passed: to_stop_by < stopping_m,
    };
    Some((view, if braking_now { "braking" } else { "past the braking point" }))
}

/// The projection at full demand from the present state, its band with CdA
/// at ±1 standard deviation of the estimate (±10 % before it converges),
/// about 60 trajectory points for drawing, and the braking point where the
/// projection ends.
pub fn projection_step(
    base: &ProjectionInputs<'_>,
    cda_sd: f64,
    estimate_converged: bool,
    curve_fitted: bool,
    stopping_m: f64,
) -> (ProjectionView, BrakingView) {
    let cda = base.cda_m2;
    let p = project(base);
    let sd = cda_sd.max(0.0);
    let band = |dc: f64| project(&ProjectionInputs { cda_m2: (cda + dc).max(0.05), ..*base }).peak_mps;
    let (lo, hi) = if estimate_converged { (band(sd), band(-sd)) } else { (band(0.1 * cda), band(-0.1 * cda)) };
    let step = (p.points.len() / 60).max(1);
    let trajectory: Vec<(f64, f64)> =
        p.points.iter().step_by(step).chain(p.points.last()).map(|&(_, x, v)| (x, v)).collect();
    let braking = BrakingView {
        point_m: p.brake_at_m,
        distance_m: p.brake_at_m - base.x0_m,
        in_s: p.brake_in_s,
        stopping_m,
        passed: false,
    };
    let view = ProjectionView {
        peak_mps: p.peak_mps,
        peak_low_mps: lo.min(p.peak_mps),
        peak_high_mps: hi.max(p.peak_mps),
        peak_at_m: p.peak_at_m,
        peak_in_s: p.peak_in_s,
        terminal_mps: p.terminal_mps,
        terminal_no_boost_mps: p.terminal_no_boost_mps,
        terminal_bound_mps: super::projection::TERMINAL_BOUND_MPS,
        target_mps: base.track.target_speed_mps,
        target_reachable: p.target.is_some(),
        target_in_s: p.target.map(|t| t.0),
        target_at_m: p.target.map(|t| t.1),
        trajectory,
        converged: estimate_converged && curve_fitted,
    };
    (view, braking)
}

/// Tyre speed margin: rated minus present speed, and rated minus the
/// projected peak when there is one, m/s.
pub fn tyre_step(rated_mps: f64, v_mps: f64, peak_mps: Option<f64>) -> TyreView {
    TyreView {
        rated_mps,
        margin_mps: braking::tyre_speed_margin_mps(v_mps, rated_mps),
        peak_margin_mps: peak_mps.map(|p| rated_mps - p),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    /// A vehicle and track with round numbers (the embedded demo with its
    /// battery and track edited): 5 kWh above nothing, 150 kW rated, 80
    /// cells of 3.75 V minimum (300 V), 0.1 Ω, 500 A.
    fn cfg() -> ConfigSet {
        let mut cfg = ConfigSet::embedded();
        let b = &mut cfg.vehicle.battery;
        b.energy_j = 5.0 * 3.6e6;
        b.rated_power_w = 150e3;
        b.soc_reserve = 0.2;
        b.cells_in_series = 80;
        b.cell_min_v = 3.75;
        b.resistance_ohm = 0.1;
        b.max_current_a = 500.0;
        b.heat_capacity_j_per_k = 10_000.0;
        b.temp_limit_c = 60.0;
        cfg.track.zone_length_m = 10_000.0;
        cfg.track.safety_margin_m = 500.0;
        cfg.track.exit_speed_mps = 0.0;
        cfg.track.braking_decel_mps2 = 5.0;
        cfg
    }

    fn pack(ocv_v: f64, r_ohm: f64) -> PackEstimate {
        PackEstimate {
            ocv_v: Estimated { value: ocv_v, sd: 0.1 },
            resistance_ohm: Estimated { value: r_ohm, sd: 0.001 },
            ocv_slope_v: Estimated { value: 0.0, sd: 1.0 },
            converged: true,
        }
    }

    #[test]
    fn air_falls_back_to_the_standard_atmosphere_without_weather() {
        // ISO 2533 sea level: 1.225 kg/m³.
        let (rho, origin) = air_step(None, 0.0);
        assert!(close(rho, 1.225, 1e-3), "{rho}");
        assert_eq!(origin, AirOrigin::Standard);
        // Higher is thinner (ISO 2533 at 1000 m: 1.112 kg/m³).
        assert!(close(air_step(None, 1000.0).0, 1.112, 2e-3));
    }

    #[test]
    fn air_is_measured_when_weather_is_present() {
        // Dry air at 20 °C and 101 325 Pa: 1.204 kg/m³ (common practice).
        let (rho, origin) = air_step(Some((20.0, 101_325.0, Some(0.0), 3.0)), 0.0);
        assert!(close(rho, 1.204, 1e-3), "{rho}");
        assert_eq!(origin, AirOrigin::Measured { age_s: 3.0, humidity_assumed: false });
        // Without humidity, 50 % is assumed and said: moist air is lighter.
        let (moist, origin) = air_step(Some((20.0, 101_325.0, None, 3.0)), 0.0);
        assert!(moist < rho && moist > rho - 0.01, "{moist}");
        assert_eq!(origin, AirOrigin::Measured { age_s: 3.0, humidity_assumed: true });
    }

    #[test]
    fn coefficients_come_from_the_estimate_once_it_is_informative() {
        use CoefficientSource::*;
        let cfg = cfg();
        let veh = &cfg.vehicle;
        let pair = |c: Coefficients| (c.cda_m2, c.crr, c.cda_source, c.crr_source);
        let prior = RoadLoadEstimate::default();
        assert_eq!(
            pair(coefficients_step(veh, &prior)),
            (veh.cda_m2, veh.crr0, PriorUnphysical, PriorUncertain),
            "sd 0 but CdA 0 (below the schema's 0.05 m²) and Crr 0: not informative"
        );
        let tight = RoadLoadEstimate {
            cda_m2: Estimated { value: 0.91, sd: 0.01 },
            crr: Estimated { value: 0.013, sd: 0.5 },
            ..RoadLoadEstimate::default()
        };
        // CdA tight, Crr's sd far over 30 % of itself: both from the file
        // (they are fitted together), and each says why.
        assert_eq!(pair(coefficients_step(veh, &tight)), (veh.cda_m2, veh.crr0, PriorWithOther, PriorUncertain));
        let both = RoadLoadEstimate {
            cda_m2: Estimated { value: 0.91, sd: 0.01 },
            crr: Estimated { value: 0.013, sd: 0.002 },
            ..RoadLoadEstimate::default()
        };
        assert_eq!(pair(coefficients_step(veh, &both)), (0.91, 0.013, Estimate, Estimate));
    }

    #[test]
    fn an_unphysical_or_uncertain_estimate_is_not_used() {
        // Issue 14, item 2: CdA 0.0077 ± 0.061 m² (below the schema's
        // minimum of 0.05 and uncertain by 800 %) was used because the gate
        // was only "sd below half the prior's and value above 0"; the
        // projected peak became 727 km/h.
        use CoefficientSource::*;
        let cfg = cfg();
        let veh = &cfg.vehicle;
        let e = |cda: f64, cda_sd: f64| RoadLoadEstimate {
            cda_m2: Estimated { value: cda, sd: cda_sd },
            crr: Estimated { value: 0.012, sd: 0.001 },
            converged: true,
            ..RoadLoadEstimate::default()
        };
        let c = coefficients_step(veh, &e(0.0077, 0.061));
        assert_eq!((c.cda_m2, c.cda_source), (veh.cda_m2, PriorUnphysical));
        // Inside the bounds but uncertain by 12 %: the prior, said as such.
        let c = coefficients_step(veh, &e(0.5, 0.06));
        assert_eq!((c.cda_m2, c.cda_source), (veh.cda_m2, PriorUncertain));
        // Above the schema's 5 m², however certain: the prior.
        let c = coefficients_step(veh, &e(6.0, 0.01));
        assert_eq!((c.cda_m2, c.cda_source), (veh.cda_m2, PriorUnphysical));
        // A Crr above the schema's 0.1: the prior.
        let mut wild = e(0.8, 0.01);
        wild.crr = Estimated { value: 0.2, sd: 0.001 };
        assert_eq!(coefficients_step(veh, &wild).crr_source, PriorUnphysical);
        // The whole tick: the road load says where its CdA came from, and
        // a converged estimate not in use is not shown as converged.
        let inp = TickInputs { speed: Some((60.0, "vehicle.speed", 0.0)), ..TickInputs::default() };
        let d = compute(&cfg, &inp, &e(0.0077, 0.061), None, 0.0, None, None);
        let rl = d.road_load.unwrap();
        assert_eq!((rl.cda_m2, rl.cda_source, rl.estimate_converged), (veh.cda_m2, PriorUnphysical, false));
        let p = d.projection.expect("a projection");
        assert!(!p.converged);
        assert!(p.terminal_mps.is_none_or(|v| v < p.terminal_bound_mps), "{:?}", p.terminal_mps);
    }

    #[test]
    fn road_load_aero_term_is_half_rho_cda_vair_squared_v() {
        let cfg = cfg();
        let veh = &cfg.vehicle;
        let model =
            RoadModel { rho: 1.2, wind_mps: 5.0, cda_m2: 0.8, crr: 0.012, converged: false, ..RoadModel::default() };
        let inp = TickInputs { accel: Some((0.5, "channel")), ..TickInputs::default() };
        let boost = BoostModel {
            available: false,
            deliverable_w: 0.0,
            tau_s: 20.0,
            floor: 0.6,
            time_in_boost_s: 0.0,
            rated_w: 150e3,
            energy_j: 0.0,
            soc_fade_per_s: 0.0,
        };
        let rl = road_load_step(veh, &model, 0.0, 50.0, &inp, &boost);
        // By hand: ½·1.2·0.8·55²·50 = 0.48·3025·50 = 72 600 W.
        assert!(close(rl.aero_w, 72_600.0, 1e-6), "{}", rl.aero_w);
        assert_eq!(rl.grade_w, 0.0);
        assert!(close(rl.total_w, rl.aero_w + rl.rolling_w, 1e-9));
        // Inertial m_eff·a·v, and no measured wheel power without engine or motor channels.
        assert!(close(rl.inertial_w, veh.effective_mass_kg() * 0.5 * 50.0, 1e-6));
        assert_eq!(rl.wheel_w, None);
        // Boost unavailable: available is the engine alone through the driveline.
        assert!(close(rl.available_w, veh.driveline_efficiency * veh.full_load_power_w(50.0), 1e-6));
        assert!(close(rl.margin_w, rl.available_w - rl.total_w, 1e-9));
        // With boost, the motor adds η_motor·deliverable up to its rating.
        let boosted = BoostModel { available: true, deliverable_w: 10e3, ..boost };
        let with = road_load_step(veh, &model, 0.0, 50.0, &inp, &boosted);
        let motor = (10e3 * veh.motor_efficiency).min(veh.motor_rated_power_w);
        assert!(close(with.available_w - rl.available_w, veh.driveline_efficiency * motor, 1e-6));
    }

    #[test]
    fn battery_discharge_rate_and_hppc_maximum_by_hand() {
        let cfg = cfg();
        let b = &cfg.vehicle.battery;
        let inp =
            TickInputs { voltage_v: Some(400.0), current_a: Some(250.0), soc: Some(0.7), ..TickInputs::default() };
        let bv = battery_step(b, &inp, Some(pack(400.0, 0.1)), 0.0, None, None);
        // P = 400·250 = 100 kW over 5 kWh: 20 kW per kWh.
        assert_eq!(bv.power_w, Some(100e3));
        assert!(close(bv.discharge_rate_kw_per_kwh.unwrap(), 20.0, 1e-12));
        // (0.7 − 0.2)·18 MJ = 9 MJ above the reserve.
        assert!(close(bv.energy_above_reserve_j.unwrap(), 9e6, 1e-6));
        // HPPC: voltage-limited 300·(400 − 300)/0.1 = 300 kW; current-limited
        // 500·(400 − 50) = 175 kW: the current limit binds.
        assert!(close(bv.hppc_max_w.unwrap(), 175e3, 1e-6));
        assert!(close(bv.deliverable_w.unwrap(), 175e3, 1e-6));
        assert!(close(bv.derating_ratio.unwrap(), 175.0 / 150.0, 1e-12));
        // The battery system's own limit wins over the model; a wild one is
        // capped at 1.5 times the rating.
        let reported = TickInputs { power_limit_w: Some(120e3), ..inp };
        assert_eq!(battery_step(b, &reported, Some(pack(400.0, 0.1)), 0.0, None, None).deliverable_w, Some(120e3));
        let wild = TickInputs { power_limit_w: Some(1e9), ..inp };
        assert_eq!(battery_step(b, &wild, None, 0.0, None, None).deliverable_w, Some(225e3));
        assert_eq!(battery_step(b, &TickInputs::default(), None, 0.0, None, None).deliverable_w, None);
    }

    #[test]
    fn a_converged_derating_fit_is_normalised_to_a_fresh_pack() {
        let cfg = cfg();
        let b = &cfg.vehicle.battery;
        let fit = DeratingFit { tau_s: 12.0, floor: 0.4, amplitude: 0.4, converged: true, ..DeratingFit::default() };
        // Floor 0.4 of rated from a start of 0.8: half of a fresh pack.
        assert_eq!(derating_curve(b, Some(fit)), DeratingCurve { tau_s: 12.0, floor: 0.5, fitted: true });
        let unconverged = DeratingFit { converged: false, ..fit };
        assert_eq!(
            derating_curve(b, Some(unconverged)),
            DeratingCurve { tau_s: b.derate_tau_s, floor: b.derate_floor, fitted: false }
        );
        assert_eq!(soc_fade_per_s(b, Some(pack(400.0, 0.1)), true, Some(100e3)), 0.0, "a fit has the fade in it");
        // Current limit binds (175 kW < 300 kW): dP/dOCV = I_max = 500 A; slope
        // 0.8 V per cell ·80 = 64 V; 500·64·100 kW/(18 MJ·175 kW) = 1.0159e-3 /s.
        let fade = soc_fade_per_s(b, Some(pack(400.0, 0.1)), false, Some(100e3));
        assert!(close(fade, 500.0 * 64.0 * 100e3 / (18e6 * 175e3), 1e-12), "{fade}");
    }

    fn boost(energy_j: f64) -> BoostModel {
        BoostModel {
            available: true,
            deliverable_w: 100e3,
            tau_s: 20.0,
            floor: 0.5,
            time_in_boost_s: 0.0,
            rated_w: 150e3,
            energy_j,
            soc_fade_per_s: 0.0,
        }
    }

    fn battery_view(boosting: bool, temp_c: Option<f64>) -> BatteryView {
        BatteryView {
            deliverable_w: Some(100e3),
            ocv_v: Some(Estimated { value: 400.0, sd: 0.1 }),
            resistance_ohm: Some(Estimated { value: 0.1, sd: 0.001 }),
            model_converged: true,
            energy_above_reserve_j: Some(3.6e6),
            boosting,
            temp_c,
            ..BatteryView::default()
        }
    }

    #[test]
    fn boost_left_energy_limited_is_energy_over_draw() {
        let cfg = cfg();
        let b = &cfg.vehicle.battery;
        // Boosting at a measured 250 A: 3.6 MJ/(400 V·250 A) = 36 s. The
        // power limit never binds (no need), no temperature: energy binds.
        let left = boost_left_step(b, &battery_view(true, None), Some(250.0), &boost(3.6e6), 0.0, false);
        assert!(close(left.energy_s.unwrap(), 36.0, 1e-9));
        assert_eq!(left.power_s, Some(f64::INFINITY));
        assert_eq!((left.binding, left.seconds), (Some(BoostLimit::Energy), Some(36.0)));
        assert_eq!(left.need_w, Some(0.0));
    }

    #[test]
    fn boost_left_thermal_and_power_limits_by_hand() {
        let cfg = cfg();
        let b = &cfg.vehicle.battery;
        // Not boosting: the current at the deliverable 100 kW, I = (400 −
        // √(160 000 − 40 000))/0.2 = 267.949 A; heating I²R/C =
        // 71 797.7·0.1/10 000 = 0.717968 °C/s; 1 °C below the limit: 1.3928 s.
        let i = (400.0 - 120_000f64.sqrt()) / 0.2;
        let rate = i * i * 0.1 / 10_000.0;
        let left = boost_left_step(b, &battery_view(false, Some(59.0)), None, &boost(3.6e6), 0.0, false);
        assert!(close(left.thermal_s.unwrap(), 1.0 / rate, 1e-9), "{left:?}");
        assert!(close(left.thermal_s.unwrap(), 1.3928, 1e-4));
        assert!(close(left.energy_s.unwrap(), 3.6e6 / (400.0 * i), 1e-9));
        assert_eq!(left.binding, Some(BoostLimit::Thermal));
        // Needing more than is deliverable: no power-limited time at all.
        let left = boost_left_step(b, &battery_view(false, Some(59.0)), None, &boost(3.6e6), 120e3, false);
        assert_eq!((left.binding, left.seconds), (Some(BoostLimit::Power), Some(0.0)));
        // Needing 75 kW of 100 kW: the curve (floor 0.5, τ 20 s) falls to
        // 0.75 at t = −20·ln((0.75 − 0.5)/0.5) = 20·ln 2 = 13.863 s.
        let left = boost_left_step(b, &battery_view(false, None), None, &boost(3.6e6), 75e3, false);
        assert!(close(left.power_s.unwrap(), 20.0 * 2f64.ln(), 1e-9), "{left:?}");
        // Without a pack model there is nothing to say.
        let none = BatteryView { ocv_v: None, ..battery_view(true, Some(30.0)) };
        assert_eq!(boost_left_step(b, &none, None, &boost(1.0), 0.0, false).seconds, None);
    }

    #[test]
    fn boost_need_is_the_road_load_the_engine_cannot_cover() {
        let cfg = cfg();
        let veh = &cfg.vehicle;
        let model =
            RoadModel { rho: 1.2, wind_mps: 0.0, cda_m2: 0.8, crr: 0.012, converged: false, ..RoadModel::default() };
        let vt = 100.0;
        let rl = roadload::road_load(&roadload::RoadLoadInputs {
            v_mps: vt,
            wind_mps: 0.0,
            rho: 1.2,
            cda_m2: 0.8,
            crr0: 0.012,
            crr2_s2_m2: veh.crr2_s2_m2,
            mass_kg: veh.mass_kg,
            grade: 0.0,
        });
        let by_hand = (rl.total_w / veh.driveline_efficiency - veh.full_load_power_w(vt)) / veh.motor_efficiency;
        assert!(close(boost_need_w(veh, &model, vt), by_hand.max(0.0), 1e-6));
        // A slow target the engine holds alone needs nothing.
        assert_eq!(boost_need_w(veh, &model, 20.0), 0.0);
    }

    #[test]
    fn braking_closed_form_without_drag() {
        let cfg = cfg();
        let track = &cfg.track;
        let no_air = RoadModel { rho: 0.0, ..RoadModel::default() };
        // Closed form at κ = 0: v²/(2a) = 80²/10 = 640 m to a stop.
        let stopping = stopping_distance_m(track, &no_air, 1500.0, 80.0);
        assert!(close(stopping, 640.0, 1e-9), "{stopping}");
        // Stop-by point at 9500 m: from 8000 m there is room, project.
        assert_eq!(braking_step(track, 8000.0, stopping, false), None);
        // From 9000 m the braking point (8860 m) is 140 m behind.
        let (view, note) = braking_step(track, 9000.0, stopping, false).unwrap();
        assert_eq!(note, "past the braking point");
        assert!(view.passed && close(view.point_m, 8860.0, 1e-9) && close(view.distance_m, -140.0, 1e-9));
        // On the brake: no projection, whatever the distance.
        let (view, note) = braking_step(track, 1000.0, stopping, true).unwrap();
        assert_eq!(note, "braking");
        assert!(!view.passed && view.in_s == 0.0);
    }

    #[test]
    fn tyre_margin_now_and_at_the_peak() {
        // 300 km/h rated (83.333 m/s), at 80 m/s and a projected 85 m/s.
        let t = tyre_step(300.0 / 3.6, 80.0, Some(85.0));
        assert!(close(t.margin_mps, 300.0 / 3.6 - 80.0, 1e-12));
        assert!(close(t.peak_margin_mps.unwrap(), 300.0 / 3.6 - 85.0, 1e-12));
        assert_eq!(tyre_step(83.0, 80.0, None).peak_margin_mps, None);
    }

    #[test]
    fn compute_without_speed_says_so_and_lists_stale_inputs() {
        let cfg = cfg();
        let d = compute(&cfg, &TickInputs::default(), &RoadLoadEstimate::default(), None, 0.0, None, None);
        assert_eq!(d.projection_note, Some("no speed"));
        assert_eq!(d.stale_inputs, vec!["weather", "speed", "battery"]);
        assert!(d.road_load.is_none() && d.braking.is_none() && d.tyre.is_none());
        assert_eq!(d.air_origin, Some(AirOrigin::Standard));
    }
}
