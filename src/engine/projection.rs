//! Projected peak speed and braking point: the equation of motion
//! integrated forward from the present state at full demand.
//!
//! Power at the wheels is η·(combustion full-load envelope at the road
//! speed + motor power), where the motor follows the battery's deliverable
//! power along the derating curve (anchored at what it delivers now) until
//! the energy above the reserve runs out; drive force is capped by grip.
//! Road load uses the present estimates of CdA and Crr, air density and
//! wind, and the track's grade profile. The run stops where the car must
//! brake: where the distance to stop (or slow to the exit speed) at the
//! configured deceleration, aerodynamic drag included, reaches the stop-by
//! point of the zone.

use super::physics::braking::braking_distance_m;
use super::physics::motion::{MotionParams, StopReason, integrate};
use super::physics::pack::derating_ratio;
use super::physics::roadload::{G_MPS2, RoadLoadInputs, road_load};
use crate::config::{Track, Vehicle};

/// Integration step, s.
pub const STEP_S: f64 = 0.25;
/// Longest look ahead, s.
pub const HORIZON_S: f64 = 180.0;

/// The battery as the projection models it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BoostModel {
    /// Whether boost is available at all (energy above reserve, not disabled).
    pub available: bool,
    /// Terminal power the battery can deliver now, W.
    pub deliverable_w: f64,
    /// Derating curve (time constant, floor as a fraction of rated) and
    /// the time already spent in boost, s.
    pub tau_s: f64,
    pub floor: f64,
    pub time_in_boost_s: f64,
    /// Rated terminal power the curve's ratio refers to, W.
    pub rated_w: f64,
    /// Energy above the reserve, J, and the open-circuit voltage and
    /// resistance that turn terminal power into energy drawn.
    pub energy_j: f64,
    /// How fast the deliverable power falls with the energy drawn, as a
    /// fraction per second at the present draw: the current-limited power
    /// I_max·(OCV − I_max·R) falls with the open-circuit voltage as the
    /// state of charge drops. 0 when the derating curve is a fit of the
    /// measured limit (which has this in it already).
    pub soc_fade_per_s: f64,
}

impl BoostModel {
    /// Deliverable terminal power `dt` seconds from now: the derating curve
    /// from the present time in boost, scaled to pass through what the
    /// battery delivers now.
    pub fn deliverable_after_w(&self, dt: f64) -> f64 {
        if !self.available {
            return 0.0;
        }
        let now = derating_ratio(self.time_in_boost_s, self.tau_s, self.floor);
        let later = derating_ratio(self.time_in_boost_s + dt, self.tau_s, self.floor);
        if now <= 0.0 { 0.0 } else { self.deliverable_w * later / now * (1.0 - self.soc_fade_per_s * dt).max(0.0) }
    }

    /// Deliverable power once the curve has settled at its floor, W.
    pub fn floor_w(&self) -> f64 {
        if !self.available {
            return 0.0;
        }
        let now = derating_ratio(self.time_in_boost_s, self.tau_s, self.floor);
        if now <= 0.0 { 0.0 } else { self.deliverable_w * self.floor / now }
    }
}

/// Everything a projection needs, SI.
#[derive(Clone, Copy, Debug)]
pub struct ProjectionInputs<'a> {
    pub vehicle: &'a Vehicle,
    pub track: &'a Track,
    pub x0_m: f64,
    pub v0_mps: f64,
    pub rho: f64,
    pub wind_mps: f64,
    pub cda_m2: f64,
    pub crr0: f64,
    pub boost: BoostModel,
}

/// A projection's result.
#[derive(Clone, Debug, PartialEq)]
pub struct Projection {
    pub peak_mps: f64,
    pub peak_at_m: f64,
    pub peak_in_s: f64,
    /// Where and when the car must brake (the end of the projection).
    pub brake_at_m: f64,
    pub brake_in_s: f64,
    /// Whether the projection reached the braking point within the horizon.
    pub reaches_braking_point: bool,
    /// First crossing of the target speed before braking: (s from now, m).
    pub target: Option<(f64, f64)>,
    /// Terminal speed on an endless straight with boost at the derating
    /// floor, and with no boost, m/s; `None` when above
    /// [`TERMINAL_BOUND_MPS`].
    pub terminal_mps: Option<f64>,
    pub terminal_no_boost_mps: Option<f64>,
    /// (s from now, m, m/s) every step, for drawing.
    pub points: Vec<(f64, f64, f64)>,
}

/// The battery's deliverable power along the curve, with the curve's value
/// now computed once (the projection asks four times a step).
#[derive(Clone, Copy)]
struct Curve {
    /// deliverable_now / ratio_now, and the curve's shape.
    scale_w: f64,
    t0_s: f64,
    tau_s: f64,
    floor: f64,
    energy_s: f64,
    fade: f64,
}

impl Curve {
    fn new(b: &BoostModel, energy_s: f64) -> Curve {
        let now = derating_ratio(b.time_in_boost_s, b.tau_s, b.floor);
        let scale_w = if b.available && now > 0.0 { b.deliverable_w / now } else { 0.0 };
        Curve { scale_w, t0_s: b.time_in_boost_s, tau_s: b.tau_s, floor: b.floor, energy_s, fade: b.soc_fade_per_s }
    }

    #[inline]
    fn at(&self, t: f64) -> f64 {
        if t >= self.energy_s || self.scale_w == 0.0 {
            return 0.0;
        }
        let ratio = self.floor + (1.0 - self.floor) * (-(self.t0_s + t) / self.tau_s).exp();
        self.scale_w * ratio * (1.0 - self.fade * t).max(0.0)
    }
}

/// Drive power at the wheels at full demand with battery terminal power
/// `batt_w`, W, before the grip cap.
#[inline]
fn drive_power_w(veh: &Vehicle, v: f64, batt_w: f64) -> f64 {
    let motor = (batt_w * veh.motor_efficiency).min(veh.motor_rated_power_w);
    veh.driveline_efficiency * (veh.full_load_power_w(v) + motor)
}

/// Road load at the wheels at `v` on level ground, W.
fn road_load_w(inp: &ProjectionInputs<'_>, v: f64, grade: f64) -> f64 {
    road_load(&RoadLoadInputs {
        v_mps: v,
        wind_mps: inp.wind_mps,
        rho: inp.rho,
        cda_m2: inp.cda_m2,
        crr0: inp.crr0,
        crr2_s2_m2: inp.vehicle.crr2_s2_m2,
        mass_kg: inp.vehicle.mass_kg,
        grade,
    })
    .total_w
}

/// Highest speed the terminal-speed search brackets, m/s (1800 km/h, far
/// above any tyre's rating). A terminal speed above it is reported as
/// "above" this bound (`None`), never as a value.
pub const TERMINAL_BOUND_MPS: f64 = 500.0;

/// The speed at which drive power balances road load on level ground
/// (bisection: drive power varies with speed through the gears, so this is
/// not a pure cubic; with constant power it is the Cardano root, tested).
/// `None` when the car still has a surplus at [`TERMINAL_BOUND_MPS`]: the
/// root is above the bracket, and the bracket is not a root.
pub fn terminal_speed(inp: &ProjectionInputs<'_>, boost_w: f64) -> Option<f64> {
    let surplus = |v: f64| drive_power_w(inp.vehicle, v, boost_w) - road_load_w(inp, v, 0.0);
    let (mut lo, mut hi) = (1.0f64, TERMINAL_BOUND_MPS);
    if surplus(hi) > 0.0 {
        return None;
    }
    if surplus(lo) <= 0.0 {
        return Some(0.0);
    }
    for _ in 0..64 {
        let mid = 0.5 * (lo + hi);
        if surplus(mid) > 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Some(0.5 * (lo + hi))
}

/// Distance to slow from `v` to the exit speed at the track's braking
/// deceleration with aerodynamic drag, m.
pub fn braking_distance(inp: &ProjectionInputs<'_>, v: f64) -> f64 {
    let kappa = 0.5 * inp.rho * inp.cda_m2 / inp.vehicle.mass_kg;
    braking_distance_m(v, inp.track.exit_speed_mps.min(v), inp.track.braking_decel_mps2, kappa)
}

/// Seconds of boost the energy above the reserve lasts at the deliverable
/// power along the curve (terminal power plus resistive loss is roughly
/// terminal power; the small loss is accounted for by the caller's energy).
fn energy_time_s(b: &BoostModel) -> f64 {
    if !b.available || b.deliverable_w <= 0.0 {
        return 0.0;
    }
    // Integrate the curve in 0.5 s steps until the energy is spent.
    let mut e = b.energy_j;
    let mut t = 0.0;
    while t < HORIZON_S {
        let p = b.deliverable_after_w(t);
        if e <= p * 0.5 {
            return t + e / p.max(1.0);
        }
        e -= p * 0.5;
        t += 0.5;
    }
    f64::INFINITY
}

/// Runs the projection.
pub fn project(inp: &ProjectionInputs<'_>) -> Projection {
    let veh = inp.vehicle;
    let track = inp.track;
    let params = MotionParams {
        mass_eff_kg: veh.effective_mass_kg(),
        mass_kg: veh.mass_kg,
        k: 0.5 * inp.rho * inp.cda_m2,
        crr0: inp.crr0,
        crr2_s2_m2: veh.crr2_s2_m2,
        wind_mps: inp.wind_mps,
        grade: 0.0,
    };
    let curve = Curve::new(&inp.boost, energy_time_s(&inp.boost));
    let grip_n = veh.grip_limit_g * G_MPS2 * veh.mass_kg;
    let stop_by = track.stop_by_m();
    let weight_n = veh.mass_kg * G_MPS2;
    let power = |t: f64, x: f64, v: f64| {
        let p = drive_power_w(veh, v, curve.at(t)).min(grip_n * v.max(0.5));
        // The grade enters as power (the motion parameters are level):
        // sin(atan g) = g / √(1 + g²).
        let g = track.grade_at(x);
        p - weight_n * g / (1.0 + g * g).sqrt() * v
    };
    let stop = |_t: f64, x: f64, v: f64| x + braking_distance(inp, v) >= stop_by;
    let traj = integrate(&params, inp.x0_m, inp.v0_mps, STEP_S, HORIZON_S, power, stop);
    let mut peak = (inp.v0_mps, inp.x0_m, 0.0);
    for &(t, x, v) in &traj.points {
        if v > peak.0 {
            peak = (v, x, t);
        }
    }
    let &(t_end, x_end, _) = traj.points.last().unwrap_or(&(0.0, inp.x0_m, inp.v0_mps));
    let target = traj.crossing(track.target_speed_mps).filter(|_| inp.v0_mps < track.target_speed_mps);
    let target = if inp.v0_mps >= track.target_speed_mps { Some((0.0, inp.x0_m)) } else { target };
    Projection {
        peak_mps: peak.0,
        peak_at_m: peak.1,
        peak_in_s: peak.2,
        brake_at_m: x_end,
        brake_in_s: t_end,
        reaches_braking_point: traj.stop == StopReason::Predicate,
        target,
        terminal_mps: terminal_speed(inp, inp.boost.floor_w()),
        terminal_no_boost_mps: terminal_speed(inp, 0.0),
        points: traj.points,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::ConfigSet;
    use crate::engine::physics::motion::terminal_speed_mps;

    fn inputs<'a>(cfg: &'a ConfigSet, v0: f64) -> ProjectionInputs<'a> {
        ProjectionInputs {
            vehicle: &cfg.vehicle,
            track: &cfg.track,
            x0_m: 0.0,
            v0_mps: v0,
            rho: 1.2,
            wind_mps: 0.0,
            cda_m2: 0.8,
            crr0: 0.012,
            boost: BoostModel {
                available: true,
                deliverable_w: 200e3,
                tau_s: 20.0,
                floor: 0.6,
                time_in_boost_s: 0.0,
                rated_w: 250e3,
                energy_j: 20e6,
                soc_fade_per_s: 0.0,
            },
        }
    }

    #[test]
    fn terminal_speed_matches_cardano_for_constant_power() {
        // With a flat combustion curve in power (torque ∝ 1/rpm) the drive
        // power is constant, and the terminal speed must be the real root of
        // k·v³ + c·v − P = 0 (REFERENCES.md, Cardano), with c from Crr.
        let mut cfg = ConfigSet::embedded();
        let c = &mut cfg.vehicle.combustion;
        // Linear interpolation of a 1/rpm torque curve overestimates by about
        // (Δrpm/rpm)²/8 between points: at 10 rpm spacing near 6000 rpm,
        // 3.5e-7 of the power, so about 1e-7 of the speed.
        c.curve_rpm = (100..=9000).step_by(10).map(f64::from).collect();
        c.curve_torque_nm = c.curve_rpm.iter().map(|rpm| 300e3 / (rpm * std::f64::consts::TAU / 60.0)).collect();
        c.redline_rpm = 9000.0;
        cfg.vehicle.crr2_s2_m2 = 0.0;
        cfg.vehicle.rebuild_envelope();
        let inp = inputs(&cfg, 50.0);
        let p_wheel = cfg.vehicle.driveline_efficiency * 300e3;
        let k = 0.5 * 1.2 * 0.8;
        let c0 = 0.012 * cfg.vehicle.mass_kg * G_MPS2;
        let expected = terminal_speed_mps(p_wheel, k, c0);
        let got = terminal_speed(&inp, 0.0).unwrap();
        assert!((got / expected - 1.0).abs() < 1e-6, "{got} vs {expected}");
    }

    #[test]
    fn a_terminal_speed_above_the_bracket_is_not_the_bracket() {
        // Issue 14, item 2: with CdA 0.0077 m² the terminal speed came out
        // exactly 250.0 m/s, the bisection's upper bound printed as a value.
        let mut cfg = ConfigSet::embedded();
        // No speed-squared rolling term: only the air limits the speed.
        cfg.vehicle.crr2_s2_m2 = 0.0;
        let mut inp = inputs(&cfg, 50.0);
        inp.cda_m2 = 0.0077;
        inp.crr0 = 0.0;
        // 300 kW of boost against 0.5·1.2·0.0077·v³ (plus the engine):
        // above the old bound of 250 m/s. Either a true root or "above".
        let v = terminal_speed(&inp, 300e3);
        assert_ne!(v, Some(250.0));
        if let Some(v) = v {
            assert!(v < TERMINAL_BOUND_MPS * (1.0 - 1e-9) && v > 250.0, "{v}");
            let surplus = drive_power_w(inp.vehicle, v, 300e3) - road_load_w(&inp, v, 0.0);
            assert!(surplus.abs() < 1.0, "a root: surplus {surplus} W at {v} m/s");
        }
        // Less drag still: above the bound, said as such.
        inp.cda_m2 = 1e-5;
        assert_eq!(terminal_speed(&inp, 300e3), None);
    }

    #[test]
    fn projection_stops_where_braking_must_start() {
        let cfg = ConfigSet::embedded();
        let inp = inputs(&cfg, 60.0);
        let p = project(&inp);
        assert!(p.reaches_braking_point);
        // At the end, the remaining distance equals the braking distance.
        let &(_, x, v) = p.points.last().unwrap();
        let d = braking_distance(&inp, v);
        assert!(x + d >= cfg.track.stop_by_m() && x + d < cfg.track.stop_by_m() + v * STEP_S + 1.0);
        assert!(p.peak_mps > 60.0 && p.peak_at_m <= p.brake_at_m);
    }

    #[test]
    fn boost_follows_the_curve_from_what_is_delivered_now() {
        let b = BoostModel {
            available: true,
            deliverable_w: 180e3,
            tau_s: 20.0,
            floor: 0.5,
            time_in_boost_s: 10.0,
            rated_w: 250e3,
            energy_j: 1e7,
            soc_fade_per_s: 0.0,
        };
        assert_eq!(b.deliverable_after_w(0.0), 180e3);
        let expected = 180e3 * derating_ratio(30.0, 20.0, 0.5) / derating_ratio(10.0, 20.0, 0.5);
        assert!((b.deliverable_after_w(20.0) - expected).abs() < 1e-6);
        assert!(b.floor_w() < b.deliverable_after_w(1000.0) + 1e-6);
        // Energy time: at a constant 180 kW → 10 MJ lasts 55.6 s; derating
        // lowers the draw so it lasts longer.
        assert!(energy_time_s(&b) > 1e7 / 180e3);
    }

    #[test]
    fn less_drag_means_a_higher_peak() {
        let cfg = ConfigSet::embedded();
        let mut lo = inputs(&cfg, 40.0);
        lo.cda_m2 = 0.7;
        let hi = inputs(&cfg, 40.0);
        assert!(project(&lo).peak_mps > project(&hi).peak_mps);
    }
}
