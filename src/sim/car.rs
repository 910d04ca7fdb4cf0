//! The simulated car: the truth a rehearsal runs on.
//!
//! Longitudinal dynamics with its own model, independent of the engine's
//! estimators: full-load torque by engine speed through the gears with
//! timed upshifts and a slipping-clutch launch, tractive force capped by
//! grip, an electric motor fed by a battery with open-circuit voltage by
//! state of charge, internal resistance, Joule heating and a derating law
//! over time in boost (with a thermal cut-back near the temperature limit),
//! and road load with wind and grade. The engine never sees this state;
//! only the frames built from it.

use crate::config::ConfigSet;
use crate::config::run_plan::{BoostStart, Plan};
use crate::engine::physics::{air, pack as bat};
use crate::units::G0;

/// Lowest engine speed during a launch: the clutch slips above it.
const LAUNCH_RPM: f64 = 3200.0;
const IDLE_RPM: f64 = 950.0;
/// Pack cooling, W per K above ambient.
const COOLING_W_PER_K: f64 = 90.0;
/// Time-in-boost recovers at this fraction of real time when not boosting.
const DERATE_RECOVERY: f64 = 0.2;
/// Thermal cut-back starts this far below the pack limit, °C.
const THERMAL_CUTBACK_C: f64 = 4.0;

/// Where the run is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Phase {
    /// Stationary at the line.
    Hold,
    /// Driving to the brake point.
    Run,
    Braking,
    Stopped,
}

/// The car's fixed parameters, from the vehicle file and the plan's truth.
#[derive(Clone, Debug)]
pub struct CarParams {
    pub mass_kg: f64,
    pub m_eff_kg: f64,
    pub cda_m2: f64,
    pub crr0: f64,
    pub crr2: f64,
    pub eta: f64,
    pub motor_rated_w: f64,
    pub motor_eff: f64,
    pub cells: f64,
    pub r_pack: f64,
    pub i_max: f64,
    pub capacity_c: f64,
    pub energy_j: f64,
    pub heat_cap: f64,
    pub temp_limit_c: f64,
    pub derate_tau_s: f64,
    pub derate_floor: f64,
    pub cell_min_v: f64,
    /// Drive force limit, in g (the vehicle file's `grip_limit_g`).
    pub grip_g: f64,
    /// Current the auxiliaries draw from the pack, A.
    pub aux_current_a: f64,
}

/// Open-circuit voltage of one cell by state of charge (a smooth curve for
/// a high-power lithium-ion cell; simulator truth, not a datasheet).
pub fn cell_ocv_v(soc: f64) -> f64 {
    let s = soc.clamp(0.0, 1.0);
    3.30 + 0.85 * s - 0.25 * (1.0 - s).powi(6) + 0.05 * (s - 0.5).powi(3)
}

/// The car's state.
#[derive(Clone, Debug)]
pub struct CarState {
    pub t_s: f64,
    pub x_m: f64,
    pub v_mps: f64,
    pub a_mps2: f64,
    pub phase: Phase,
    pub stopped_at_s: f64,
    pub gear: usize,
    pub shift_left_s: f64,
    pub throttle: f64,
    pub brake: f64,
    pub boosting: bool,
    pub boost_time_s: f64,
    pub engine_rpm: f64,
    pub engine_torque_nm: f64,
    pub engine_power_w: f64,
    pub motor_power_w: f64,
    pub motor_rpm: f64,
    pub motor_temp_c: f64,
    pub coolant_c: f64,
    pub soc: f64,
    pub pack_temp_c: f64,
    pub pack_ocv_v: f64,
    pub pack_v: f64,
    pub pack_a: f64,
    pub power_limit_w: f64,
    pub rho: f64,
    pub wind_mps: f64,
    /// Derating speed-up from an injected fault (1 = as planned).
    pub derate_speedup: f64,
    /// Power at the wheels, W (for ground-truth checks).
    pub wheel_power_w: f64,
}

/// The car and what it is doing.
#[derive(Clone, Debug)]
pub struct Car {
    pub p: CarParams,
    pub s: CarState,
    cfg: std::sync::Arc<ConfigSet>,
    plan: std::sync::Arc<Plan>,
    gust_phase: f64,
    /// Temperature of the air the car runs in, °C: the plan's, or the
    /// standard atmosphere's at the track's elevation when it gives none.
    air_temp_c: f64,
}

impl Car {
    pub fn new(cfg: std::sync::Arc<ConfigSet>, plan: std::sync::Arc<Plan>, gust_phase: f64) -> Car {
        let v = &cfg.vehicle;
        let b = &v.battery;
        let mass = plan.car.mass_kg.unwrap_or(v.mass_kg);
        let nominal_v = b.cells_in_series as f64 * 3.7;
        let p = CarParams {
            mass_kg: mass,
            m_eff_kg: mass * v.rotating_mass_factor,
            cda_m2: plan.car.cda_m2.unwrap_or(v.cda_m2),
            crr0: plan.car.crr0.unwrap_or(v.crr0),
            crr2: v.crr2_s2_m2,
            eta: v.driveline_efficiency,
            motor_rated_w: v.motor_rated_power_w,
            motor_eff: v.motor_efficiency,
            cells: b.cells_in_series as f64,
            r_pack: b.resistance_ohm,
            i_max: b.max_current_a,
            capacity_c: b.energy_j / nominal_v,
            energy_j: b.energy_j,
            heat_cap: b.heat_capacity_j_per_k,
            temp_limit_c: b.temp_limit_c,
            derate_tau_s: plan.car.derate_tau_s.unwrap_or(b.derate_tau_s),
            derate_floor: plan.car.derate_floor.unwrap_or(b.derate_floor),
            cell_min_v: b.cell_min_v,
            grip_g: v.grip_limit_g,
            aux_current_a: b.auxiliary_current_a,
        };
        let soc = plan.car.soc_start;
        let ocv = cell_ocv_v(soc) * p.cells;
        let a = &plan.ambient;
        // Without the plan's weather the car runs in the standard
        // atmosphere at the track's elevation, the engine's own stand-in
        // (and no weather is put on the wire).
        let (air_temp_c, rho) = match a.weather {
            Some(w) => (w.temp_c, air::moist_air_density_cipm2007(w.temp_c, w.pressure_pa, w.humidity)),
            None => {
                let (t_k, _, rho) = air::isa_troposphere(air::geopotential_m(cfg.track.elevation_m));
                (t_k - air::ZERO_C_K, rho)
            }
        };
        let s = CarState {
            t_s: 0.0,
            x_m: 0.0,
            v_mps: 0.0,
            a_mps2: 0.0,
            phase: Phase::Hold,
            stopped_at_s: 0.0,
            gear: 0,
            shift_left_s: 0.0,
            throttle: 0.0,
            brake: 0.0,
            boosting: false,
            boost_time_s: 0.0,
            engine_rpm: IDLE_RPM,
            engine_torque_nm: 0.0,
            engine_power_w: 0.0,
            motor_power_w: 0.0,
            motor_rpm: 0.0,
            motor_temp_c: air_temp_c + 25.0,
            coolant_c: 86.0,
            soc,
            pack_temp_c: plan.car.pack_temp_start_c,
            pack_ocv_v: ocv,
            pack_v: ocv,
            pack_a: 0.0,
            power_limit_w: 0.0,
            rho,
            wind_mps: a.headwind_mps,
            derate_speedup: 1.0,
            wheel_power_w: 0.0,
        };
        Car { p, s, cfg, plan, gust_phase, air_temp_c }
    }

    /// Whether the run is over (stopped and the tail has passed).
    pub fn finished(&self) -> bool {
        self.s.phase == Phase::Stopped && self.s.t_s >= self.s.stopped_at_s + self.plan.driver.tail_s
    }

    /// The power the battery could deliver at its terminals now, W: the
    /// HPPC limit (voltage- and current-limited) times the derating law.
    pub fn battery_limit_w(&self) -> f64 {
        let s = &self.s;
        let p = &self.p;
        let hppc = bat::max_discharge_power_w(s.pack_ocv_v, p.r_pack, p.cell_min_v * p.cells, p.i_max);
        let tau = p.derate_tau_s / s.derate_speedup;
        let mut ratio = bat::derating_ratio(s.boost_time_s, tau, p.derate_floor);
        let hot = s.pack_temp_c - (p.temp_limit_c - THERMAL_CUTBACK_C);
        if hot > 0.0 {
            ratio *= (1.0 - 0.7 * hot / THERMAL_CUTBACK_C).max(0.3);
        }
        // What the battery system reports: its own capability, whatever
        // the motor could take.
        hppc * ratio
    }

    /// Advances the car by `dt` seconds.
    pub fn step(&mut self, dt: f64) {
        let plan = self.plan.clone();
        let d = &plan.driver;
        let veh = &self.cfg.vehicle;
        let comb = &veh.combustion;
        let r_tyre = veh.tyre_radius_m;
        let a = &plan.ambient;
        self.s.pack_ocv_v = cell_ocv_v(self.s.soc) * self.p.cells;
        let limit = self.battery_limit_w();
        let s = &mut self.s;
        s.t_s += dt;
        s.wind_mps =
            a.headwind_mps + a.gust_mps * (std::f64::consts::TAU * s.t_s / a.gust_period_s + self.gust_phase).sin();

        // The driver.
        match s.phase {
            Phase::Hold => {
                s.throttle = 0.0;
                if s.t_s >= d.hold_s {
                    s.phase = Phase::Run;
                }
            }
            Phase::Run => {
                s.throttle = d.throttle_at(s.x_m);
                let start = match d.boost_start {
                    BoostStart::AtDistance(m) => s.x_m >= m,
                    BoostStart::AtSpeed(v) => s.v_mps >= v,
                };
                let ended = d.boost_end_m.is_some_and(|e| s.x_m >= e);
                s.boosting = (s.boosting || start) && !ended && s.throttle > 0.0;
                if s.x_m >= d.brake_at_m {
                    s.phase = Phase::Braking;
                }
            }
            Phase::Braking => {
                s.throttle = 0.0;
                s.boosting = false;
                s.brake = 1.0;
                if s.v_mps <= 0.3 {
                    s.v_mps = 0.0;
                    s.brake = 0.3;
                    s.phase = Phase::Stopped;
                    s.stopped_at_s = s.t_s;
                }
            }
            Phase::Stopped => {
                s.throttle = 0.0;
                s.boosting = false;
            }
        }

        // Combustion engine through the gearbox.
        let wheel_rpm_of = |g: usize, v: f64| comb.rpm_at(g, v, r_tyre);
        let mut rpm = wheel_rpm_of(s.gear, s.v_mps);
        if s.shift_left_s <= 0.0 && rpm >= comb.upshift_rpm && s.gear + 1 < comb.ratios.len() {
            s.gear += 1;
            s.shift_left_s = comb.shift_time_s;
            rpm = wheel_rpm_of(s.gear, s.v_mps);
        }
        let slipping = s.throttle > 0.0 && rpm < LAUNCH_RPM;
        s.engine_rpm = if slipping { LAUNCH_RPM } else { rpm.max(IDLE_RPM) };
        let shifting = s.shift_left_s > 0.0;
        s.shift_left_s -= dt;
        s.engine_torque_nm = if shifting { 0.0 } else { s.throttle * comb.torque_nm(s.engine_rpm) };
        s.engine_power_w = s.engine_torque_nm * s.engine_rpm * std::f64::consts::TAU / 60.0;
        let gear_ratio = comb.ratios[s.gear] * comb.final_drive;
        let f_comb = s.engine_torque_nm * gear_ratio / r_tyre * self.p.eta;

        // Battery and motor: what the motor asks of the battery.
        let p = &self.p;
        let reserve_ok = s.soc > veh.battery.soc_reserve;
        s.power_limit_w = if reserve_ok { limit } else { 0.0 };
        let want_terminal = if s.boosting && reserve_ok { s.throttle * p.motor_rated_w / p.motor_eff } else { 0.0 };
        let mut p_term = want_terminal.min(s.power_limit_w);

        // Traction control keeps the drive force within grip: it trims the
        // engine's torque first, then, if the motor alone exceeds grip, the
        // motor's. Every power reported (engine, motor, battery) is then
        // what reaches the road, as on a car with launch control.
        // The coolant model takes the engine's power before the trim: it
        // is a display channel no estimate reads, and keeping it so keeps
        // the demo recording's coolant trace as it was.
        let coolant_heat_w = s.engine_power_w;
        let v_force = s.v_mps.max(2.0);
        let f_motor_want = p_term * p.motor_eff * p.eta / v_force;
        let grip = p.grip_g * G0 * p.mass_kg;
        let f_comb = if f_comb + f_motor_want > grip && f_comb > 0.0 {
            let keep = ((grip - f_motor_want) / f_comb).clamp(0.0, 1.0);
            s.engine_torque_nm *= keep;
            s.engine_power_w *= keep;
            f_comb * keep
        } else {
            f_comb
        };
        if f_motor_want > grip {
            p_term *= grip / f_motor_want;
        }
        let ocv = s.pack_ocv_v;
        let i_motor = if p_term > 0.0 { bat::current_at_power_a(ocv, p.r_pack, p_term) } else { 0.0 };
        s.pack_a = i_motor + p.aux_current_a;
        s.pack_v = ocv - s.pack_a * p.r_pack;
        s.motor_power_w = p_term * p.motor_eff;
        s.motor_rpm = s.v_mps / r_tyre * comb.final_drive * 2.1 * 60.0 / std::f64::consts::TAU;
        if s.boosting && p_term > 0.0 {
            s.boost_time_s += dt;
        } else {
            s.boost_time_s = (s.boost_time_s - DERATE_RECOVERY * dt).max(0.0);
        }
        s.soc -= s.pack_a * dt / p.capacity_c;
        let heat = s.pack_a * s.pack_a * p.r_pack - COOLING_W_PER_K * (s.pack_temp_c - self.air_temp_c);
        s.pack_temp_c += heat * dt / p.heat_cap;
        // Windings settle near 140 °C at 200 kW, coolant near 100 °C at 400 kW.
        s.motor_temp_c += (s.motor_power_w * 9e-6 - (s.motor_temp_c - self.air_temp_c - 25.0) * 0.02) * dt;
        s.coolant_c += (coolant_heat_w * 1.05e-6 - (s.coolant_c - 86.0) * 0.03) * dt;

        // Forces and motion.
        let f_motor = s.motor_power_w * p.eta / v_force;
        let f_drive = (f_comb + f_motor).min(grip);
        s.wheel_power_w = f_drive * s.v_mps;
        let grade = self.cfg.track.grade_at(s.x_m);
        let theta = grade.atan();
        let v_air = s.v_mps + s.wind_mps;
        let f_aero = 0.5 * s.rho * p.cda_m2 * v_air * v_air.abs();
        let f_roll =
            if s.v_mps > 0.0 { (p.crr0 + p.crr2 * s.v_mps * s.v_mps) * p.mass_kg * G0 * theta.cos() } else { 0.0 };
        let f_grade = p.mass_kg * G0 * theta.sin();
        let f_brake = s.brake * self.cfg.track.braking_decel_mps2 * p.mass_kg;
        let mut acc = (f_drive - f_aero - f_roll - f_grade - f_brake) / p.m_eff_kg;
        if s.phase == Phase::Hold || (s.phase == Phase::Stopped && s.v_mps <= 0.0) {
            acc = 0.0;
        }
        s.a_mps2 = acc;
        s.v_mps = (s.v_mps + acc * dt).max(0.0);
        s.x_m += s.v_mps * dt;
    }

    /// The truth value of a channel in SI units, if the car has it.
    pub fn channel(&self, name: &str) -> Option<f64> {
        let s = &self.s;
        let a = &self.plan.ambient;
        let p = &self.p;
        Some(match name {
            "vehicle.speed" => s.v_mps,
            "vehicle.accel" => s.a_mps2,
            "driver.throttle" => s.throttle,
            "driver.brake" => s.brake,
            "driver.boost" => f64::from(u8::from(s.boosting)),
            "gearbox.gear" => (s.gear + 1) as f64,
            "engine.rpm" => s.engine_rpm,
            "engine.torque" => s.engine_torque_nm,
            "engine.power" => s.engine_power_w,
            "motor.power" => s.motor_power_w,
            "motor.rpm" => s.motor_rpm,
            "motor.temp" => s.motor_temp_c,
            "coolant.temp" => s.coolant_c,
            "battery.voltage" => s.pack_v,
            "battery.current" => s.pack_a,
            "battery.soc" => s.soc,
            "battery.temp" => s.pack_temp_c,
            "battery.power_limit" => s.power_limit_w,
            "battery.cell_min_v" => s.pack_v / p.cells - 0.012,
            "battery.cell_max_v" => s.pack_v / p.cells + 0.009,
            "battery.cell_min_temp" => s.pack_temp_c - 1.5,
            "battery.cell_max_temp" => s.pack_temp_c + 2.0,
            "battery.cell_spread" => 0.021 + s.pack_a * 2e-5,
            "battery.balance_events" => 1200.0 + (s.t_s / 7.0).floor(),
            "ambient.temp" => a.weather?.temp_c,
            "ambient.pressure" => a.weather?.pressure_pa,
            "ambient.humidity" => a.weather?.humidity,
            "ambient.wind" => s.wind_mps,
            "tyre.fl.temp" | "tyre.fr.temp" => 38.0 + s.x_m * 0.0015,
            "tyre.rl.temp" | "tyre.rr.temp" => 41.0 + s.x_m * 0.0022,
            "tyre.fl.pressure" | "tyre.fr.pressure" => 265e3 + s.v_mps * 80.0,
            "tyre.rl.pressure" | "tyre.rr.pressure" => 275e3 + s.v_mps * 90.0,
            _ => return None,
        })
    }

    /// Energy above the reserve now, J (truth).
    pub fn energy_above_reserve_j(&self) -> f64 {
        ((self.s.soc - self.cfg.vehicle.battery.soc_reserve) * self.p.energy_j).max(0.0)
    }
}

#[cfg(test)]
mod tests {
    //! The simulated car against its own vehicle file.

    use super::*;
    use crate::config;
    use std::sync::Arc;

    /// The demo plan and vehicle with a low grip limit (0.3 g) and an
    /// auxiliary load of 7 A, boost from the line.
    fn car() -> Car {
        let (mut plan, mut cfg) = config::load_plan(None, &[]).unwrap();
        cfg.vehicle.grip_limit_g = 0.3;
        cfg.vehicle.battery.auxiliary_current_a = 7.0;
        plan.driver.boost_start = BoostStart::AtDistance(0.0);
        plan.ambient.gust_mps = 0.0;
        Car::new(Arc::new(cfg), Arc::new(plan), 0.0)
    }

    #[test]
    fn the_simulator_follows_the_vehicle_file_and_reports_what_the_wheels_got() {
        // Issue 14, item 4: grip was a constant 0.62 g whatever the vehicle
        // file said; when the motor alone exceeded grip its power was still
        // reported in full (traction control trimmed only the engine); the
        // auxiliary current was a constant 3 A.
        let mut c = car();
        let grip_n = 0.3 * G0 * c.p.mass_kg;
        let (mut max_force_n, mut motor_trimmed, mut idle_checked) = (0.0f64, 0, 0);
        let dt = 1e-3;
        while c.s.t_s < 40.0 && c.s.phase != Phase::Braking {
            let idle = !c.s.boosting;
            c.step(dt);
            let s = &c.s;
            if idle && !s.boosting {
                assert!((s.pack_a - 7.0).abs() < 1e-9, "at {:.3} s: {} A with the motor idle", s.t_s, s.pack_a);
                idle_checked += 1;
            }
            if s.phase != Phase::Run || s.v_mps < 5.0 {
                continue;
            }
            // Wheel power is taken at the speed before the step.
            let force_n = s.wheel_power_w / s.v_mps;
            max_force_n = max_force_n.max(force_n);
            // What the powertrain reports is what reached the road: the
            // reported engine and motor power through the driveline is the
            // wheel power (outside shifts and the slipping clutch, whose
            // engine power is at the clutch, not the road).
            let motor_force_n = s.motor_power_w * c.p.eta / s.v_mps;
            assert!(motor_force_n <= grip_n * (1.0 + 1e-9), "at {:.3} s: motor {motor_force_n} N", s.t_s);
            if s.engine_power_w == 0.0 && s.motor_power_w > 0.0 {
                assert!((s.wheel_power_w / (c.p.eta * s.motor_power_w) - 1.0).abs() < 1e-9, "at {:.3} s", s.t_s);
            }
            if s.boosting && s.motor_power_w < 0.999 * c.p.motor_rated_w.min(s.power_limit_w * c.p.motor_eff) {
                motor_trimmed += 1;
            }
            // The battery's current is the current of the power the motor used.
            let i_motor = s.pack_a - 7.0;
            let p_term = s.motor_power_w / c.p.motor_eff;
            let expected = if p_term > 0.0 { bat::current_at_power_a(s.pack_ocv_v, c.p.r_pack, p_term) } else { 0.0 };
            assert!((i_motor - expected).abs() < 1e-6, "at {:.3} s: {i_motor} A for {p_term} W", s.t_s);
        }
        assert!(idle_checked > 100, "the motor was idle at the line");
        assert!(motor_trimmed > 100, "the motor alone exceeded grip for a while: {motor_trimmed} steps");
        assert!(
            (max_force_n / grip_n - 1.0).abs() < 1e-4,
            "the drive force peaks at the vehicle file's grip: {max_force_n} N against {grip_n} N"
        );
    }
}
