//! The envelope before the run: what it takes to reach a speed.
//!
//! From a vehicle, a track and the air of the day this module answers the
//! questions an engineer asks before deciding to attempt a speed: the power
//! at the wheels the speed needs, split by cause; the power available from
//! the engine alone, with the battery at its rated power and with the
//! battery at its derating floor; how fast each gets the car and how long it
//! takes between any two speeds; what the battery must give and whether it
//! can; and how much a little more drag, mass, wind or heat costs at the
//! braking point.
//!
//! The model is the planner's (see [`crate::planner`]): full-load engine
//! power through the best gear, driveline efficiency, the motor fed by the
//! battery (its rated power, capped by the current-limited HPPC power at the
//! starting charge and by the motor's rating), derating
//! r(t) = floor + (1 − floor)·e^(−t/τ), the drive force capped by grip, and
//! road load with wind and a constant grade. Each power case is a power
//! that depends on speed only, so time and distance between two speeds are
//! integrals over speed, t = ∫ m_eff/F(v) dv and x = ∫ m_eff·v/F(v) dv,
//! done here by adaptive Simpson quadrature (to about 1e-9 relative). The
//! standing-start run to the braking point, where the pack derates with time
//! in boost, uses the engine's RK4 integrator ([`motion::integrate`]).
//!
//! Pure: no I/O. Rendering is in [`text`], [`json`] and [`plots`].

pub mod render_json;
pub mod render_svg;
pub mod render_text;

use crate::config::run_plan::Weather;
use crate::config::{Track, Vehicle};
use crate::engine::physics::motion::{self, MotionParams, TRACTION_SPEED_FLOOR_MPS};
use crate::engine::physics::{air, braking, pack as bat, roadload};
use crate::units::G0;

/// Highest speed the root finders search, m/s (900 km/h). A terminal speed
/// above it is reported as "above" this bound, never as a value.
pub const SPEED_BOUND_MPS: f64 = 250.0;
/// Time step of the standing-start run to the braking point, s.
pub const RUN_STEP_S: f64 = 0.02;
/// Longest standing-start run modelled, s.
pub const RUN_HORIZON_S: f64 = 900.0;
/// Speed grid the quadrature splits its intervals on, m/s: the step of the
/// vehicle's tabulated engine envelope, so the kinks of the interpolated
/// table (and of gear changes) fall on piece boundaries.
const PIECE_MPS: f64 = crate::config::vehicle::ENVELOPE_STEP_MPS;

/// Why the envelope cannot be computed.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum EnvelopeError {
    /// The table step is not a positive speed.
    #[error("the speed step must be above 0 km/h, found {step_kmh}")]
    BadStep { step_kmh: f64 },
    /// The two speeds of `--from`/`--to` are not in increasing order.
    #[error("expected the first speed below the second, found {from_kmh} km/h and {to_kmh} km/h")]
    SpeedsNotIncreasing { from_kmh: f64, to_kmh: f64 },
    /// A speed outside what the root finders search.
    #[error("speeds from 0 to {bound_kmh:.0} km/h only, found {kmh}")]
    SpeedOutOfRange { kmh: f64, bound_kmh: f64 },
    /// The air density is not a positive finite number.
    #[error("the air density must be a positive number of kg/m³, found {rho}")]
    BadAirDensity { rho: f64 },
    /// A temperature, pressure or humidity given for the air is out of range.
    #[error("{option}: expected {expected}, found {found}")]
    AirOutOfRange { option: &'static str, expected: &'static str, found: f64 },
}

/// What the command line says about the air (every part optional).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct AirArgs {
    /// A density, kg/m³, instead of temperature, pressure and humidity.
    pub density_kg_m3: Option<f64>,
    /// The standard atmosphere even when there is weather.
    pub standard: bool,
    pub temp_c: Option<f64>,
    pub pressure_hpa: Option<f64>,
    pub humidity_pct: Option<f64>,
}

/// Where the air density came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum AirSource {
    /// The plan's weather, by the CIPM-2007 equation.
    PlanWeather,
    /// Temperature, pressure and humidity from the command line (any not
    /// given taken from the plan's weather, or from the standard atmosphere
    /// and dry air), by the CIPM-2007 equation.
    CommandLine,
    /// A density given directly on the command line.
    GivenDensity,
    /// The ISA troposphere at the track's elevation (dry air).
    StandardAtmosphere,
}

impl AirSource {
    pub fn describe(self) -> &'static str {
        match self {
            AirSource::PlanWeather => "the plan's weather (CIPM-2007)",
            AirSource::CommandLine => "the command line (CIPM-2007)",
            AirSource::GivenDensity => "a density given on the command line",
            AirSource::StandardAtmosphere => "the standard atmosphere (ISA) at the track's elevation",
        }
    }
    pub fn key(self) -> &'static str {
        match self {
            AirSource::PlanWeather => "plan_weather",
            AirSource::CommandLine => "command_line",
            AirSource::GivenDensity => "given_density",
            AirSource::StandardAtmosphere => "standard_atmosphere",
        }
    }
}

/// The air of the day.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Air {
    pub source: AirSource,
    /// Temperature, pressure and relative humidity (0..1) where known.
    pub temp_c: Option<f64>,
    pub pressure_pa: Option<f64>,
    pub humidity: Option<f64>,
    pub density_kg_m3: f64,
}

/// Temperature assumed when only a density is given, °C (the ISA sea-level
/// temperature): used only to scale the density for the +10 °C sensitivity.
const ASSUMED_TEMP_C: f64 = 15.0;

impl Air {
    /// Moist air by the CIPM-2007 equation.
    pub fn weather(source: AirSource, temp_c: f64, pressure_pa: f64, humidity: f64) -> Air {
        Air {
            source,
            temp_c: Some(temp_c),
            pressure_pa: Some(pressure_pa),
            humidity: Some(humidity),
            density_kg_m3: air::moist_air_density_cipm2007(temp_c, pressure_pa, humidity),
        }
    }

    /// The ISA troposphere at a geometric elevation, as the engine uses
    /// without weather data (the elevation converted to geopotential).
    pub fn standard(elevation_m: f64) -> Air {
        let (t_k, p_pa, rho) = air::isa_troposphere(air::geopotential_m(elevation_m));
        Air {
            source: AirSource::StandardAtmosphere,
            temp_c: Some(t_k - air::ZERO_C_K),
            pressure_pa: Some(p_pa),
            humidity: Some(0.0),
            density_kg_m3: rho,
        }
    }

    /// The air of the day, one rule for `termvel envelope` and `termvel
    /// plan`: a density given; or the standard atmosphere when asked for,
    /// or when there is no weather and nothing given (as the engine does
    /// without weather data); or weather from the command line with its
    /// gaps filled from the plan's weather (or the standard atmosphere,
    /// dry); or the plan's weather.
    pub fn of_the_day(args: &AirArgs, weather: Option<Weather>, elevation_m: f64) -> Result<Air, EnvelopeError> {
        if let Some(rho) = args.density_kg_m3 {
            return Air::density(rho);
        }
        let isa = Air::standard(elevation_m);
        if args.standard {
            return Ok(isa);
        }
        let given = args.temp_c.is_some() || args.pressure_hpa.is_some() || args.humidity_pct.is_some();
        let (t, p, h) = match weather {
            Some(w) => (w.temp_c, w.pressure_pa, w.humidity),
            None => (isa.temp_c.unwrap_or(15.0), isa.pressure_pa.unwrap_or(101_325.0), 0.0),
        };
        if !given {
            return Ok(match weather {
                Some(_) => Air::weather(AirSource::PlanWeather, t, p, h),
                None => isa,
            });
        }
        let t = args.temp_c.unwrap_or(t);
        let p = args.pressure_hpa.map_or(p, |x| x * 100.0);
        let h = args.humidity_pct.map_or(h, |x| x / 100.0);
        let out = |option, expected, found| Err(EnvelopeError::AirOutOfRange { option, expected, found });
        if !(-60.0..=70.0).contains(&t) {
            return out("--air-temp-c", "−60 to 70 °C", t);
        }
        if !(300e2..=1200e2).contains(&p) {
            return out("--air-pressure-hpa", "300 to 1200 hPa", p / 100.0);
        }
        if !(0.0..=1.0).contains(&h) {
            return out("--humidity-pct", "0 to 100 %", h * 100.0);
        }
        Ok(Air::weather(AirSource::CommandLine, t, p, h))
    }

    /// The same air at `temp_c` and the same pressure: by CIPM-2007 for
    /// weather; for the standard atmosphere and a bare density by the ideal
    /// gas law (a bare density assumed at 15 °C). The planner's Monte Carlo
    /// draws the temperature with this.
    pub fn at_temp_c(&self, temp_c: f64) -> Air {
        match (self.source, self.temp_c, self.pressure_pa, self.humidity) {
            (AirSource::PlanWeather | AirSource::CommandLine, Some(_), Some(p), Some(h)) => {
                Air::weather(self.source, temp_c, p, h)
            }
            _ => {
                let t_k = self.temp_c.unwrap_or(ASSUMED_TEMP_C) + air::ZERO_C_K;
                Air {
                    temp_c: Some(temp_c),
                    density_kg_m3: self.density_kg_m3 * t_k / (temp_c + air::ZERO_C_K),
                    ..*self
                }
            }
        }
    }

    /// A density given as it is.
    pub fn density(rho: f64) -> Result<Air, EnvelopeError> {
        if !(rho.is_finite() && rho > 0.0) {
            return Err(EnvelopeError::BadAirDensity { rho });
        }
        Ok(Air { source: AirSource::GivenDensity, temp_c: None, pressure_pa: None, humidity: None, density_kg_m3: rho })
    }

    /// The same air `dt_c` warmer at the same pressure: by CIPM-2007 for
    /// weather; for the standard atmosphere and a bare density by the ideal
    /// gas law, ρ·T/(T + ΔT) (a bare density assumed at 15 °C).
    pub fn warmer(&self, dt_c: f64) -> Air {
        match (self.source, self.temp_c, self.pressure_pa, self.humidity) {
            (AirSource::PlanWeather | AirSource::CommandLine, Some(t), Some(p), Some(h)) => {
                Air::weather(self.source, t + dt_c, p, h)
            }
            _ => {
                let t_k = self.temp_c.unwrap_or(ASSUMED_TEMP_C) + air::ZERO_C_K;
                Air {
                    temp_c: self.temp_c.map(|t| t + dt_c),
                    density_kg_m3: self.density_kg_m3 * t_k / (t_k + dt_c),
                    ..*self
                }
            }
        }
    }
}

/// Where the car brakes, for the speed reached there.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum BrakeAt {
    /// At a distance from the start line, m (the plan's braking point).
    Distance(f64),
    /// At the latest point from which the car stops by the stop-by point
    /// (the track's braking deceleration plus drag), found on the nominal
    /// full-power run and then held for the sensitivities.
    Latest,
}

/// One power case: what drives the car.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Case {
    /// The combustion engine alone.
    Engine,
    /// Engine plus the battery at its rated power (fresh).
    Rated,
    /// Engine plus the battery derated to its floor.
    Floor,
}

impl Case {
    pub const ALL: [Case; 3] = [Case::Engine, Case::Rated, Case::Floor];
    pub fn key(self) -> &'static str {
        match self {
            Case::Engine => "engine",
            Case::Rated => "rated",
            Case::Floor => "floor",
        }
    }
    pub fn label(self) -> &'static str {
        match self {
            Case::Engine => "engine alone",
            Case::Rated => "engine + pack at rated",
            Case::Floor => "engine + pack at floor",
        }
    }
}

/// Everything the envelope is computed from, SI.
#[derive(Clone, Debug, PartialEq)]
pub struct Inputs {
    pub air: Air,
    /// Wind along the run, headwind positive, m/s.
    pub headwind_mps: f64,
    /// Constant grade used throughout (rise over run) and whether it is the
    /// track's mean (true) or level by choice (false).
    pub grade: f64,
    pub grade_is_track_mean: bool,
    /// State of charge at the start (0..1), for the pack's open-circuit voltage and energy.
    pub soc_start: f64,
    pub target_mps: f64,
    /// The second speed the power to hold is given for: target plus a margin, m/s.
    pub margin_mps: f64,
    /// Step of the speed table, m/s.
    pub step_mps: f64,
    pub brake_at: BrakeAt,
    /// Speeds to give the time and distance between, m/s.
    pub between: Option<(f64, f64)>,
}

impl Inputs {
    /// Mean grade of the track from the start line to the stop-by point,
    /// (1/L)·∫ grade(x) dx, by the trapezoid rule on a 1 m grid (the profile
    /// is piecewise linear, so the rule is exact up to the grid's end).
    pub fn mean_grade(track: &Track) -> f64 {
        let end = track.stop_by_m().max(1.0);
        let n = end.ceil() as usize;
        let h = end / n as f64;
        let sum: f64 = (0..=n)
            .map(|i| {
                let w = if i == 0 || i == n { 0.5 } else { 1.0 };
                w * track.grade_at(i as f64 * h)
            })
            .sum();
        sum * h / end
    }
}

/// The car on the day, as the power cases and the run see it. Copied and
/// altered for the sensitivities.
#[derive(Clone, Copy, Debug)]
pub struct Model<'a> {
    pub veh: &'a Vehicle,
    pub mass_kg: f64,
    pub cda_m2: f64,
    pub rho_kg_m3: f64,
    pub headwind_mps: f64,
    pub grade: f64,
    /// Power added at the wheels in every case, W (for the +10 kW sensitivity).
    pub extra_wheel_w: f64,
    pub derate_tau_s: f64,
    pub derate_floor: f64,
    /// The pack's open-circuit voltage at the starting charge, V.
    pub ocv_v: f64,
    /// Terminal power the fresh pack delivers, W: its rating, or the
    /// current-limited HPPC power at the starting charge when lower.
    pub pack_w: f64,
}

impl<'a> Model<'a> {
    pub fn new(veh: &'a Vehicle, inputs: &Inputs) -> Model<'a> {
        let b = &veh.battery;
        let ocv_v = crate::planner::pack_ocv_v(veh, inputs.soc_start);
        let hppc_w = bat::max_discharge_power_w(ocv_v, b.resistance_ohm, b.pack_min_v(), b.max_current_a);
        Model {
            veh,
            mass_kg: veh.mass_kg,
            cda_m2: veh.cda_m2,
            rho_kg_m3: inputs.air.density_kg_m3,
            headwind_mps: inputs.headwind_mps,
            grade: inputs.grade,
            extra_wheel_w: 0.0,
            derate_tau_s: b.derate_tau_s,
            derate_floor: b.derate_floor,
            ocv_v,
            pack_w: b.rated_power_w.min(hppc_w),
        }
    }

    pub fn params(&self) -> MotionParams {
        MotionParams {
            mass_eff_kg: self.mass_kg * self.veh.rotating_mass_factor,
            mass_kg: self.mass_kg,
            k: 0.5 * self.rho_kg_m3 * self.cda_m2,
            crr0: self.veh.crr0,
            crr2_s2_m2: self.veh.crr2_s2_m2,
            wind_mps: self.headwind_mps,
            grade: self.grade,
        }
    }

    /// Largest drive force the tyres transmit, N.
    pub fn grip_n(&self) -> f64 {
        self.veh.grip_limit_g * G0 * self.mass_kg
    }

    pub fn road_load(&self, v_mps: f64) -> roadload::RoadLoad {
        roadload::road_load(&roadload::RoadLoadInputs {
            v_mps,
            wind_mps: self.headwind_mps,
            rho: self.rho_kg_m3,
            cda_m2: self.cda_m2,
            crr0: self.veh.crr0,
            crr2_s2_m2: self.veh.crr2_s2_m2,
            mass_kg: self.mass_kg,
            grade: self.grade,
        })
    }

    /// Battery terminal power at derating ratio `ratio`, W, capped by what
    /// the motor can take (its rating over its efficiency), as the planner.
    pub fn pack_terminal_w(&self, ratio: f64) -> f64 {
        (self.pack_w * ratio).min(self.veh.motor_rated_power_w / self.veh.motor_efficiency)
    }

    /// Derating ratio of a power case (None: no battery).
    pub fn ratio(&self, case: Case) -> Option<f64> {
        match case {
            Case::Engine => None,
            Case::Rated => Some(1.0),
            Case::Floor => Some(self.derate_floor),
        }
    }

    /// Power at the wheels with the battery at `ratio` (None: engine alone), W,
    /// before the grip limit.
    pub fn wheel_power_at_ratio_w(&self, ratio: Option<f64>, v_mps: f64) -> f64 {
        let motor_w = ratio.map_or(0.0, |r| self.pack_terminal_w(r) * self.veh.motor_efficiency);
        self.veh.driveline_efficiency * (self.veh.full_load_power_w(v_mps) + motor_w) + self.extra_wheel_w
    }

    pub fn wheel_power_w(&self, case: Case, v_mps: f64) -> f64 {
        self.wheel_power_at_ratio_w(self.ratio(case), v_mps)
    }

    /// Power that reaches the road, W: the wheel power with the drive force
    /// capped by grip (below 0.5 m/s the force is taken at 0.5 m/s, as the
    /// engine's integrator does, so launches are finite).
    pub fn grip_limited_w(&self, p_w: f64, v_mps: f64) -> f64 {
        p_w.min(self.grip_n() * v_mps.max(TRACTION_SPEED_FLOOR_MPS))
    }

    /// Net accelerating force, N.
    pub fn net_force_n(&self, case: Case, v_mps: f64) -> f64 {
        let p = self.grip_limited_w(self.wheel_power_w(case, v_mps), v_mps);
        p / v_mps.max(TRACTION_SPEED_FLOOR_MPS) - self.params().resisting_force_n(v_mps)
    }

    pub fn acceleration_mps2(&self, case: Case, v_mps: f64) -> f64 {
        self.net_force_n(case, v_mps) / self.params().mass_eff_kg
    }

    /// The speed a power case tends to from below: the first speed at which
    /// the net force reaches zero, scanning up from standstill on the
    /// envelope's grid and refining by bisection.
    pub fn terminal(&self, case: Case) -> Terminal {
        let f = |v: f64| self.net_force_n(case, v);
        if f(0.0) <= 0.0 {
            return Terminal::At(0.0);
        }
        let mut lo = 0.0;
        while lo < SPEED_BOUND_MPS {
            let hi = (lo + PIECE_MPS).min(SPEED_BOUND_MPS);
            if f(hi) <= 0.0 {
                let (mut a, mut b) = (lo, hi);
                for _ in 0..80 {
                    let m = 0.5 * (a + b);
                    if f(m) > 0.0 { a = m } else { b = m }
                }
                return Terminal::At(0.5 * (a + b));
            }
            lo = hi;
        }
        Terminal::Above(SPEED_BOUND_MPS)
    }

    /// Time and distance from `v0` to `v1` under a power case, (s, m), or
    /// None when the case never gets there (the net force reaches zero on
    /// the way).
    pub fn between(&self, case: Case, v0: f64, v1: f64) -> Option<(f64, f64)> {
        if v1 <= v0 {
            return Some((0.0, 0.0));
        }
        match self.terminal(case) {
            Terminal::At(vt) if vt <= v1 => return None,
            _ => {}
        }
        Some(self.integrate_speed(case, v0, v1))
    }

    /// Time and distance from `v0` to `v1`, (s, m), for speeds the case is
    /// known to reach (below its terminal speed).
    fn integrate_speed(&self, case: Case, v0: f64, v1: f64) -> (f64, f64) {
        let m_eff = self.params().mass_eff_kg;
        let inv = |v: f64| m_eff / self.net_force_n(case, v);
        let (mut t, mut x) = (0.0, 0.0);
        // Pieces on the envelope grid, so every kink is at a boundary.
        let mut a = v0;
        while a < v1 {
            let b = (((a / PIECE_MPS).floor() + 1.0) * PIECE_MPS).min(v1);
            t += adaptive_simpson(&inv, a, b, 1e-11);
            x += adaptive_simpson(&|v: f64| v * inv(v), a, b, 1e-11);
            a = b;
        }
        (t, x)
    }

    /// The standing start of a power case as (time s, distance m, speed m/s)
    /// every `dv_mps`, up to 99.5 % of its terminal speed (or the search
    /// bound), for the plots.
    pub fn standing_start(&self, case: Case, dv_mps: f64) -> Vec<(f64, f64, f64)> {
        let top = self.terminal(case).value().map_or(SPEED_BOUND_MPS, |v| 0.995 * v);
        let mut out = vec![(0.0, 0.0, 0.0)];
        let (mut t, mut x, mut v) = (0.0, 0.0, 0.0);
        while v < top {
            let next = (v + dv_mps).min(top);
            let (dt, dx) = self.integrate_speed(case, v, next);
            (t, x, v) = (t + dt, x + dx, next);
            out.push((t, x, v));
        }
        out
    }

    /// The first speed at which grip no longer limits `ratio`'s full power
    /// (the battery is switched on there in the standing-start run: below
    /// it, its power cannot reach the road), m/s.
    fn grip_free_speed_mps(&self, ratio: Option<f64>) -> f64 {
        let limited = |v: f64| self.wheel_power_at_ratio_w(ratio, v) > self.grip_n() * v.max(TRACTION_SPEED_FLOOR_MPS);
        let mut v = 0.0;
        while v < SPEED_BOUND_MPS && limited(v) {
            v += 0.05;
        }
        v
    }

    /// A standing start at full power, braking at `brake`: boost (when
    /// `boost`) switched on where grip stops limiting the full power, the
    /// pack derating from then on and stopping when the charge above the
    /// reserve is used; the speed where the car brakes.
    pub fn run_to_brake(&self, track: &Track, soc_start: f64, boost: bool, brake: BrakeAt) -> BrakeRun {
        let p = self.params();
        let b = &self.veh.battery;
        let kappa = p.k / self.mass_kg;
        let stop_by = track.stop_by_m();
        // g(x, v) ≥ 0: the car brakes here. For the latest point, the
        // distance it needs to stop reaches the stop-by point.
        let g = |x: f64, v: f64| match brake {
            BrakeAt::Distance(d) => x - d,
            BrakeAt::Latest => {
                x + braking::braking_distance_m(v, track.exit_speed_mps.min(v), track.braking_decel_mps2, kappa)
                    - stop_by
            }
        };
        let ratio0 = boost.then_some(1.0);
        let v_on = self.grip_free_speed_mps(ratio0);
        // Phase 1: to the switch-on speed; the grip cap makes the power the
        // same with or without boost there.
        let traj1 = motion::integrate(
            &p,
            0.0,
            0.0,
            RUN_STEP_S,
            RUN_HORIZON_S,
            |_, _, v| self.grip_limited_w(self.wheel_power_at_ratio_w(ratio0, v), v),
            |_, x, v| (boost && v >= v_on) || g(x, v) >= 0.0,
        );
        let &(t1, x1, v1) = traj1.points.last().expect("at least the start");
        let braked = g(x1, v1) >= 0.0;
        if braked || !boost {
            let (t, x, v) = crossing(&traj1.points, &g);
            return BrakeRun { speed_mps: v, brake_at_m: x, t_s: t, boost_on_mps: None, boost_s: 0.0, energy_j: 0.0 };
        }
        // Phase 2: the pack from fresh, its power a function of time in
        // boost alone until the charge above the reserve is used.
        let budget_j = ((soc_start - b.soc_reserve) * b.energy_j).max(0.0);
        let boost_end_s = self.boost_end_s(budget_j);
        let traj2 = motion::integrate(
            &p,
            x1,
            v1,
            RUN_STEP_S,
            RUN_HORIZON_S - t1,
            |t, _, v| {
                let ratio = (t < boost_end_s).then(|| bat::derating_ratio(t, self.derate_tau_s, self.derate_floor));
                let wheel = match ratio {
                    Some(r) => self.wheel_power_at_ratio_w(Some(r), v),
                    None => self.wheel_power_at_ratio_w(None, v),
                };
                self.grip_limited_w(wheel, v)
            },
            |_, x, v| g(x, v) >= 0.0,
        );
        let (t2, x, v) = crossing(&traj2.points, &g);
        let boost_s = t2.min(boost_end_s);
        BrakeRun {
            speed_mps: v,
            brake_at_m: x,
            t_s: t1 + t2,
            boost_on_mps: Some(v1),
            boost_s,
            energy_j: self.cells_energy_j(boost_s),
        }
    }

    /// Energy drawn from the cells in `t_s` of boost from fresh, J: OCV·I
    /// at the terminal power of the moment (the cells give the terminal
    /// power plus I²R), by the trapezoid rule on a 0.01 s grid.
    pub fn cells_energy_j(&self, t_s: f64) -> f64 {
        let rate = |t: f64| {
            let p = self.pack_terminal_w(bat::derating_ratio(t, self.derate_tau_s, self.derate_floor));
            bat::current_at_power_checked_a(self.ocv_v, self.veh.battery.resistance_ohm, p)
                .map_or(p, |i| self.ocv_v * i)
        };
        let n = (t_s / 0.01).ceil().max(1.0) as usize;
        let h = t_s / n as f64;
        (0..n).map(|i| 0.5 * h * (rate(i as f64 * h) + rate((i + 1) as f64 * h))).sum()
    }

    /// Time in boost until `budget_j` is drawn from the cells, s (infinite
    /// when the run horizon is reached first).
    fn boost_end_s(&self, budget_j: f64) -> f64 {
        let (mut lo, mut hi) = (0.0, RUN_HORIZON_S);
        if self.cells_energy_j(hi) <= budget_j {
            return f64::INFINITY;
        }
        for _ in 0..50 {
            let m = 0.5 * (lo + hi);
            if self.cells_energy_j(m) < budget_j { lo = m } else { hi = m }
        }
        0.5 * (lo + hi)
    }
}

/// Where g(x, v) crosses zero on a trajectory, interpolated linearly within
/// the last step; the last point when it never does.
fn crossing(points: &[(f64, f64, f64)], g: &impl Fn(f64, f64) -> f64) -> (f64, f64, f64) {
    let last = *points.last().expect("at least the start");
    if points.len() < 2 || g(last.1, last.2) < 0.0 {
        return last;
    }
    let a = points[points.len() - 2];
    let (ga, gb) = (g(a.1, a.2), g(last.1, last.2));
    let f = if gb > ga { (-ga / (gb - ga)).clamp(0.0, 1.0) } else { 1.0 };
    (a.0 + f * (last.0 - a.0), a.1 + f * (last.1 - a.1), a.2 + f * (last.2 - a.2))
}

/// Adaptive Simpson quadrature of `f` over [a, b] to absolute tolerance
/// `tol` (relative to the size of the first estimate), with Richardson's
/// correction (common practice; e.g. Burden & Faires, *Numerical
/// Analysis*, §4.6).
pub fn adaptive_simpson(f: &impl Fn(f64) -> f64, a: f64, b: f64, tol: f64) -> f64 {
    // The recursion carries the three samples and the estimate it already
    // has, so each level evaluates f only twice.
    #[allow(clippy::too_many_arguments)]
    fn step(
        f: &impl Fn(f64) -> f64,
        a: f64,
        b: f64,
        fa: f64,
        fm: f64,
        fb: f64,
        whole: f64,
        tol: f64,
        depth: u32,
    ) -> f64 {
        let m = 0.5 * (a + b);
        let (lm, rm) = (0.5 * (a + m), 0.5 * (m + b));
        let (flm, frm) = (f(lm), f(rm));
        let left = (m - a) / 6.0 * (fa + 4.0 * flm + fm);
        let right = (b - m) / 6.0 * (fm + 4.0 * frm + fb);
        let delta = left + right - whole;
        if depth == 0 || delta.abs() <= 15.0 * tol {
            left + right + delta / 15.0
        } else {
            step(f, a, m, fa, flm, fm, left, 0.5 * tol, depth - 1)
                + step(f, m, b, fm, frm, fb, right, 0.5 * tol, depth - 1)
        }
    }
    if b <= a {
        return 0.0;
    }
    let (fa, fm, fb) = (f(a), f(0.5 * (a + b)), f(b));
    let whole = (b - a) / 6.0 * (fa + 4.0 * fm + fb);
    step(f, a, b, fa, fm, fb, whole, tol * whole.abs().max(1e-300), 40)
}

/// A terminal speed, or the bound the search stopped at.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Terminal {
    At(f64),
    /// Above this speed, m/s: not found below the search bound.
    Above(f64),
}

impl Terminal {
    pub fn value(self) -> Option<f64> {
        match self {
            Terminal::At(v) => Some(v),
            Terminal::Above(_) => None,
        }
    }
}

/// The standing-start run to the braking point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BrakeRun {
    /// Speed where the car brakes, m/s.
    pub speed_mps: f64,
    pub brake_at_m: f64,
    /// Time from the launch, s.
    pub t_s: f64,
    /// Speed boost was switched on at (None: no boost).
    pub boost_on_mps: Option<f64>,
    /// Time in boost by the braking point, s.
    pub boost_s: f64,
    /// Energy drawn from the cells by then, J.
    pub energy_j: f64,
}

/// One row of the speed table.
#[derive(Clone, Debug, PartialEq)]
pub struct Row {
    pub speed_mps: f64,
    pub load: roadload::RoadLoad,
    pub cases: [RowCase; 3],
}

/// One power case in a row.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RowCase {
    /// Power at the wheels, W (before the grip limit).
    pub available_w: f64,
    /// Available less road load, W.
    pub margin_w: f64,
    /// With the rotating-mass factor and the grip limit, m/s².
    pub accel_mps2: f64,
    /// From the previous row (standstill for the first), (s, m); None: not reached.
    pub from_previous: Option<(f64, f64)>,
}

/// The battery's figures.
#[derive(Clone, Debug, PartialEq)]
pub struct PackFigures {
    /// Rated power over capacity, kW per kWh.
    pub rate_kw_per_kwh: f64,
    /// Share of the usable window (soc_max − reserve) one minute at rated power uses, 0..1.
    pub usable_share_per_min: f64,
    /// Energy above the reserve at the starting charge, J.
    pub available_j: f64,
    pub ocv_v: f64,
    /// Terminal power the fresh pack delivers (rated, or HPPC when lower), W.
    pub deliverable_w: f64,
    /// Terminal power at the derating floor, W.
    pub floor_w: f64,
    /// Battery terminal power needed (with the engine at full load) to hold the target, W (≤ 0: the engine alone holds it).
    pub needed_w: f64,
    /// Time in boost until derating takes the pack below `needed_w`, s:
    /// 0 when even the fresh pack cannot, infinite when the floor suffices.
    pub time_to_short_s: f64,
    /// Engine-only speed at the braking point, m/s.
    pub engine_only_at_brake_mps: f64,
    /// Terminal energy from there to the target at rated and at floor power, J, and the time it takes, s (None: not reached).
    pub to_target_rated: Option<(f64, f64)>,
    pub to_target_floor: Option<(f64, f64)>,
    /// Whether the derated pack supplies it: the floor case reaches the
    /// target and its energy is within what is above the reserve.
    pub floor_supplies: bool,
    /// Current and terminal voltage at rated power and at the power needed.
    pub at_rated: Option<Electric>,
    pub at_needed: Option<Electric>,
}

/// Current and voltage at a terminal power.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Electric {
    pub power_w: f64,
    pub current_a: f64,
    pub pack_v: f64,
    pub cell_v: f64,
    pub over_current: bool,
    pub under_voltage: bool,
}

/// One sensitivity of the speed at the braking point.
#[derive(Clone, Debug, PartialEq)]
pub struct Sensitivity {
    pub key: &'static str,
    pub label: &'static str,
    pub speed_mps: f64,
    pub delta_mps: f64,
}

/// The whole answer.
#[derive(Clone, Debug, PartialEq)]
pub struct Envelope {
    pub inputs: Inputs,
    pub mass_eff_kg: f64,
    pub k_kg_m: f64,
    pub rows: Vec<Row>,
    pub terminal: [Terminal; 3],
    /// Power at the wheels to hold the target and the target plus the margin, W.
    pub hold_target: roadload::RoadLoad,
    pub hold_margin: roadload::RoadLoad,
    pub between: Option<[Option<(f64, f64)>; 3]>,
    pub pack: PackFigures,
    /// The nominal full-power run to the braking point.
    pub run: BrakeRun,
    pub sensitivities: Vec<Sensitivity>,
}

fn check_speed(v: f64) -> Result<(), EnvelopeError> {
    if !(0.0..=SPEED_BOUND_MPS).contains(&v) {
        return Err(EnvelopeError::SpeedOutOfRange { kmh: v * 3.6, bound_kmh: SPEED_BOUND_MPS * 3.6 });
    }
    Ok(())
}

fn electric(veh: &Vehicle, ocv_v: f64, p_w: f64) -> Option<Electric> {
    let b = &veh.battery;
    let i = bat::current_at_power_checked_a(ocv_v, b.resistance_ohm, p_w)?;
    let pack_v = ocv_v - i * b.resistance_ohm;
    Some(Electric {
        power_w: p_w,
        current_a: i,
        pack_v,
        cell_v: pack_v / b.cells_in_series as f64,
        over_current: i > b.max_current_a,
        under_voltage: pack_v < b.pack_min_v(),
    })
}

/// Computes the envelope.
pub fn compute(veh: &Vehicle, track: &Track, inputs: &Inputs) -> Result<Envelope, EnvelopeError> {
    if !(inputs.step_mps.is_finite() && inputs.step_mps > 0.0) {
        return Err(EnvelopeError::BadStep { step_kmh: inputs.step_mps * 3.6 });
    }
    Air::density(inputs.air.density_kg_m3)?;
    check_speed(inputs.target_mps)?;
    check_speed(inputs.target_mps + inputs.margin_mps)?;
    if let Some((a, b)) = inputs.between {
        check_speed(a)?;
        check_speed(b)?;
        if b <= a {
            return Err(EnvelopeError::SpeedsNotIncreasing { from_kmh: a * 3.6, to_kmh: b * 3.6 });
        }
    }
    let model = Model::new(veh, inputs);
    let terminal = Case::ALL.map(|c| model.terminal(c));

    // The table runs to the target plus the margin, or to the highest
    // terminal speed found, on the step's grid.
    let top = terminal
        .iter()
        .filter_map(|t| t.value())
        .fold(inputs.target_mps + inputs.margin_mps, f64::max)
        .min(SPEED_BOUND_MPS);
    let n = ((top / inputs.step_mps) - 1e-9).ceil().max(1.0) as usize;
    let mut rows = Vec::with_capacity(n);
    for i in 1..=n {
        let v = (i as f64 * inputs.step_mps).min(SPEED_BOUND_MPS);
        let prev = (i - 1) as f64 * inputs.step_mps;
        let load = model.road_load(v);
        let cases = Case::ALL.map(|c| {
            let available_w = model.wheel_power_w(c, v);
            RowCase {
                available_w,
                margin_w: available_w - load.total_w,
                accel_mps2: model.acceleration_mps2(c, v),
                from_previous: model.between(c, prev, v),
            }
        });
        rows.push(Row { speed_mps: v, load, cases });
    }

    let between = inputs.between.map(|(a, b)| Case::ALL.map(|c| model.between(c, a, b)));
    let hold_target = model.road_load(inputs.target_mps);
    let hold_margin = model.road_load(inputs.target_mps + inputs.margin_mps);

    // The run and where it brakes: a latest braking point is found on the
    // nominal run and held for the variants.
    let run = model.run_to_brake(track, inputs.soc_start, true, inputs.brake_at);
    let brake = BrakeAt::Distance(run.brake_at_m);
    let engine_run = model.run_to_brake(track, inputs.soc_start, false, brake);

    let b = &veh.battery;
    let eta = veh.driveline_efficiency;
    // Battery terminal power to hold the target with the engine at full load.
    let needed_w =
        ((hold_target.total_w / eta - veh.full_load_power_w(inputs.target_mps)) / veh.motor_efficiency).max(0.0);
    let time_to_short_s = if needed_w <= 0.0 {
        f64::INFINITY
    } else if needed_w > model.pack_terminal_w(1.0) {
        0.0
    } else {
        bat::time_until_ratio_s(needed_w / model.pack_w, model.derate_tau_s, model.derate_floor)
    };
    let v_e = engine_run.speed_mps;
    let to_target = |case: Case| {
        let (t, _) = model.between(case, v_e, inputs.target_mps)?;
        let p = model.pack_terminal_w(model.ratio(case).expect("a battery case"));
        Some((p * t, t))
    };
    let available_j = ((inputs.soc_start - b.soc_reserve) * b.energy_j).max(0.0);
    let to_target_floor = to_target(Case::Floor);
    let pack = PackFigures {
        rate_kw_per_kwh: bat::discharge_rate_kw_per_kwh(b.rated_power_w, b.energy_j),
        usable_share_per_min: b.rated_power_w * 60.0 / b.usable_energy_j(),
        available_j,
        ocv_v: model.ocv_v,
        deliverable_w: model.pack_w,
        floor_w: model.pack_terminal_w(model.derate_floor),
        needed_w,
        time_to_short_s,
        engine_only_at_brake_mps: v_e,
        to_target_rated: to_target(Case::Rated),
        to_target_floor,
        floor_supplies: to_target_floor.is_some_and(|(e, _)| e <= available_j),
        at_rated: electric(veh, model.ocv_v, b.rated_power_w),
        at_needed: (needed_w > 0.0).then(|| electric(veh, model.ocv_v, needed_w)).flatten(),
    };

    let sensitivities = sensitivities(&model, track, inputs, brake, run.speed_mps);
    let p = model.params();
    Ok(Envelope {
        inputs: inputs.clone(),
        mass_eff_kg: p.mass_eff_kg,
        k_kg_m: p.k,
        rows,
        terminal,
        hold_target,
        hold_margin,
        between,
        pack,
        run,
        sensitivities,
    })
}

/// The speed at the (held) braking point under one change at a time.
fn sensitivities(model: &Model<'_>, track: &Track, inputs: &Inputs, brake: BrakeAt, base_mps: f64) -> Vec<Sensitivity> {
    let warmer = inputs.air.warmer(10.0).density_kg_m3;
    let variants: [(&str, &str, Model<'_>); 6] = [
        ("drag_area_plus_1pct", "+1 % drag area", Model { cda_m2: model.cda_m2 * 1.01, ..*model }),
        ("mass_plus_1pct", "+1 % mass", Model { mass_kg: model.mass_kg * 1.01, ..*model }),
        ("power_plus_10kw", "+10 kW at the wheels", Model { extra_wheel_w: model.extra_wheel_w + 10e3, ..*model }),
        (
            "floor_minus_5pts",
            "derating floor −5 points",
            Model { derate_floor: (model.derate_floor - 0.05).max(0.0), ..*model },
        ),
        ("headwind_plus_1mps", "+1 m/s headwind", Model { headwind_mps: model.headwind_mps + 1.0, ..*model }),
        ("air_plus_10c", "+10 °C air", Model { rho_kg_m3: warmer, ..*model }),
    ];
    variants
        .into_iter()
        .map(|(key, label, m)| {
            let v = m.run_to_brake(track, inputs.soc_start, true, brake).speed_mps;
            Sensitivity { key, label, speed_mps: v, delta_mps: v - base_mps }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::ConfigSet;

    fn demo_inputs(track: &Track) -> Inputs {
        Inputs {
            air: Air::standard(track.elevation_m),
            headwind_mps: 0.0,
            grade: 0.0,
            grade_is_track_mean: false,
            soc_start: 0.62,
            target_mps: track.target_speed_mps,
            margin_mps: 10.0 / 3.6,
            step_mps: 20.0 / 3.6,
            brake_at: BrakeAt::Distance(5750.0),
            between: Some((100.0 / 3.6, 250.0 / 3.6)),
        }
    }

    #[test]
    fn adaptive_simpson_integrates_known_functions() {
        // ∫0^1 x⁴ dx = 1/5 and ∫0^π sin = 2 (calculus, closed forms).
        assert!((adaptive_simpson(&|x: f64| x.powi(4), 0.0, 1.0, 1e-12) - 0.2).abs() < 1e-12);
        assert!((adaptive_simpson(&f64::sin, 0.0, std::f64::consts::PI, 1e-12) - 2.0).abs() < 1e-11);
    }

    #[test]
    fn between_matches_the_c0_closed_forms_for_constant_power() {
        // A constant-power car with drag only: the quadrature against the
        // partial-fraction closed forms of motion.rs (REFERENCES.md
        // "Power-limited acceleration").
        let mut cfg = ConfigSet::embedded();
        let veh = &mut cfg.vehicle;
        veh.combustion.curve_torque_nm.iter_mut().for_each(|t| *t = 0.0);
        veh.rebuild_envelope();
        veh.crr0 = 0.0;
        veh.crr2_s2_m2 = 0.0;
        veh.grip_limit_g = 3.0;
        veh.battery.max_current_a = 5000.0;
        let inputs = Inputs { air: Air::density(1.2).unwrap(), ..demo_inputs(&cfg.track) };
        let m = Model::new(&cfg.vehicle, &inputs);
        let p_w = m.wheel_power_w(Case::Rated, 50.0);
        let p = m.params();
        let (t, x) = m.between(Case::Rated, 100.0 / 3.6, 250.0 / 3.6).unwrap();
        let t_cf = motion::time_to_speed_closed_form_s(p.mass_eff_kg, p_w, p.k, 100.0 / 3.6, 250.0 / 3.6);
        let x_cf = motion::distance_to_speed_closed_form_m(p.mass_eff_kg, p_w, p.k, 100.0 / 3.6, 250.0 / 3.6);
        assert!((t / t_cf - 1.0).abs() < 1e-8, "{t} vs {t_cf}");
        assert!((x / x_cf - 1.0).abs() < 1e-8, "{x} vs {x_cf}");
        let vt = m.terminal(Case::Rated).value().unwrap();
        assert!((vt / motion::terminal_speed_mps(p_w, p.k, 0.0) - 1.0).abs() < 1e-10);
    }

    #[test]
    fn demo_envelope_is_ordered_and_finite() {
        let cfg = ConfigSet::embedded();
        let e = compute(&cfg.vehicle, &cfg.track, &demo_inputs(&cfg.track)).unwrap();
        let [te, tr, tf] = e.terminal.map(|t| t.value().unwrap());
        assert!(te < tf && tf < tr, "{te} {tf} {tr}");
        assert!(e.rows.iter().all(|r| r.load.total_w.is_finite()));
        let b = e.between.unwrap();
        assert!(b[1].unwrap().0 < b[2].unwrap().0 && b[2].unwrap().0 < b[0].unwrap().0);
        // More drag, mass, wind or heat never helps; more power does.
        for s in &e.sensitivities {
            match s.key {
                "power_plus_10kw" | "air_plus_10c" => assert!(s.delta_mps > 0.0, "{s:?}"),
                _ => assert!(s.delta_mps < 0.0, "{s:?}"),
            }
        }
    }

    #[test]
    fn a_terminal_speed_above_the_bound_is_not_a_value() {
        // Thin air and no speed-squared tyre term: nothing limits the speed
        // below the bound, so the answer is "above", not the bound.
        let mut cfg = ConfigSet::embedded();
        cfg.vehicle.crr2_s2_m2 = 0.0;
        let inputs = Inputs { air: Air::density(0.001).unwrap(), ..demo_inputs(&cfg.track) };
        let m = Model::new(&cfg.vehicle, &inputs);
        assert_eq!(m.terminal(Case::Rated), Terminal::Above(SPEED_BOUND_MPS));
    }

    #[test]
    fn current_at_power_solves_the_quadratic() {
        // REFERENCES.md battery example: OCV 3.7 V, R 25 mΩ; at 108 W the
        // current is 40 A (terminal 2.70 V).
        let i = bat::current_at_power_checked_a(3.7, 0.025, 108.0).unwrap();
        assert!((i - 40.0).abs() < 1e-9, "{i}");
        assert_eq!(bat::current_at_power_checked_a(3.7, 0.025, 3.7 * 3.7 / 0.1 + 1.0), None);
    }
}
