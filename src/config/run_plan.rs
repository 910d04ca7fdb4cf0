//! The run plan: what a rehearsal simulates and what the planner explores.
//! Which vehicle, track and signal files to use; ambient conditions; the
//! driver's schedule; what the car truly is (which the engine must find out
//! from its frames); sensor noise; faults to inject; uncertainty ranges.

use serde::Deserialize;
use toml::Spanned;

use super::{Ctx, check_table};
use crate::channel::valid_channel_name;
use crate::civil_time::days_from_civil;

type F = Spanned<f64>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Raw {
    #[allow(dead_code)]
    kind: String,
    name: String,
    seed: Spanned<u64>,
    start: Spanned<toml::value::Datetime>,
    vehicle: Option<Spanned<String>>,
    track: Option<Spanned<String>>,
    signals: Option<Spanned<String>>,
    alerts: Option<Spanned<String>>,
    #[serde(default)]
    ambient: RawAmbient,
    driver: RawDriver,
    car: Option<RawCar>,
    sensors: Option<RawSensors>,
    #[serde(default)]
    fault: Vec<RawFault>,
    uncertainty: Option<RawUncertainty>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawAmbient {
    temp_c: Option<F>,
    pressure_hpa: Option<F>,
    humidity_pct: Option<F>,
    headwind_mps: Option<F>,
    gust_mps: Option<F>,
    gust_period_s: Option<F>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDriver {
    hold_s: Option<F>,
    throttle: Spanned<Vec<[f64; 2]>>,
    boost_start_m: Option<F>,
    boost_start_kmh: Option<F>,
    boost_end_m: Option<F>,
    brake_at_m: F,
    tail_s: Option<F>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawCar {
    drag_area_m2: Option<F>,
    rolling_crr: Option<F>,
    mass_kg: Option<F>,
    soc_start: Option<F>,
    pack_temp_start_c: Option<F>,
    derate_time_constant_s: Option<F>,
    derate_floor: Option<F>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSensors {
    gnss_rate_hz: Option<F>,
    latitude: Option<F>,
    longitude: Option<F>,
    heading_deg: Option<F>,
    noise_speed_mps: Option<F>,
    noise_accel_mps2: Option<F>,
    noise_power_frac: Option<F>,
    noise_voltage_v: Option<F>,
    noise_current_a: Option<F>,
    noise_temp_c: Option<F>,
    noise_gnss_speed_mps: Option<F>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFault {
    kind: Spanned<String>,
    at_s: Option<F>,
    at_m: Option<F>,
    for_s: Option<F>,
    channel: Option<Spanned<String>>,
    source: Option<Spanned<String>>,
    rate: Option<F>,
    value: Option<F>,
    factor: Option<F>,
    count: Option<Spanned<u32>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawUncertainty {
    drag_area_m2: Option<Spanned<[f64; 2]>>,
    rolling_crr: Option<Spanned<[f64; 2]>>,
    mass_kg: Option<Spanned<[f64; 2]>>,
    temp_c: Option<Spanned<[f64; 2]>>,
    headwind_mps: Option<Spanned<[f64; 2]>>,
    derate_time_constant_s: Option<Spanned<[f64; 2]>>,
    derate_floor: Option<Spanned<[f64; 2]>>,
}

/// Temperature, pressure and humidity of the air.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Weather {
    pub temp_c: f64,
    pub pressure_pa: f64,
    /// Relative humidity, 0..1.
    pub humidity: f64,
}

/// Weather for the rehearsal.
#[derive(Clone, Debug, PartialEq)]
pub struct Ambient {
    /// The plan's weather; `None`: the plan gives none, and the standard
    /// atmosphere at the track's elevation stands in (as in the engine).
    pub weather: Option<Weather>,
    /// Steady wind along the run, headwind positive, m/s.
    pub headwind_mps: f64,
    /// Amplitude and period of the gusts on top, m/s and s.
    pub gust_mps: f64,
    pub gust_period_s: f64,
}

/// When the driver starts boost.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum BoostStart {
    AtDistance(f64),
    AtSpeed(f64),
}

/// The driver's schedule.
#[derive(Clone, Debug, PartialEq)]
pub struct Driver {
    /// Stationary at the line before the launch, s.
    pub hold_s: f64,
    /// Throttle by distance: held from each point to the next.
    pub throttle_at_m: Vec<f64>,
    pub throttle: Vec<f64>,
    pub boost_start: BoostStart,
    pub boost_end_m: Option<f64>,
    /// Where the driver lifts and brakes, m from the start line.
    pub brake_at_m: f64,
    /// Time the rehearsal runs on after the car stops, s.
    pub tail_s: f64,
}

impl Driver {
    /// Throttle at distance `x_m` (step function of the schedule).
    pub fn throttle_at(&self, x_m: f64) -> f64 {
        let i = self.throttle_at_m.partition_point(|&d| d <= x_m);
        if i == 0 { 0.0 } else { self.throttle[i - 1] }
    }
}

/// What the simulated car truly is. `None`: as the vehicle file says.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct CarTruth {
    pub cda_m2: Option<f64>,
    pub crr0: Option<f64>,
    pub mass_kg: Option<f64>,
    pub soc_start: f64,
    pub pack_temp_start_c: f64,
    pub derate_tau_s: Option<f64>,
    pub derate_floor: Option<f64>,
}

/// Sensor rates, positions and noise (one standard deviation).
#[derive(Clone, Debug, PartialEq)]
pub struct Sensors {
    pub gnss_rate_hz: f64,
    pub latitude: f64,
    pub longitude: f64,
    pub heading_deg: f64,
    pub noise_speed_mps: f64,
    pub noise_accel_mps2: f64,
    pub noise_power_frac: f64,
    pub noise_voltage_v: f64,
    pub noise_current_a: f64,
    pub noise_temp_c: f64,
    pub noise_gnss_speed_mps: f64,
}

impl Default for Sensors {
    fn default() -> Self {
        Sensors {
            gnss_rate_hz: 10.0,
            latitude: 0.0,
            longitude: 0.0,
            heading_deg: 90.0,
            noise_speed_mps: 0.05,
            noise_accel_mps2: 0.08,
            noise_power_frac: 0.01,
            noise_voltage_v: 0.4,
            noise_current_a: 1.5,
            noise_temp_c: 0.05,
            noise_gnss_speed_mps: 0.08,
        }
    }
}

/// When a fault starts.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Trigger {
    /// Seconds after the rehearsal's start.
    AtTime(f64),
    /// Metres from the start line.
    AtDistance(f64),
}

/// What goes wrong.
#[derive(Clone, Debug, PartialEq)]
pub enum FaultKind {
    /// The message(s) carrying a channel stop.
    Stale { channel: String },
    /// A whole source falls silent and returns ("can" or "gnss").
    Dropout { source: String },
    /// CAN frames are lost at a rate (0..1).
    FrameLoss { rate: f64 },
    /// A signal freezes at its value when the fault starts.
    Stuck { channel: String },
    /// A signal reads `value` (in its own unit), e.g. beyond its valid range.
    OutOfRange { channel: String, value: f64 },
    /// The battery derates faster: its time constant divided by `factor`.
    Derate { factor: f64 },
    /// A burst of CAN error frames.
    ErrorBurst { count: u32 },
}

/// A fault injection.
#[derive(Clone, Debug, PartialEq)]
pub struct Fault {
    pub kind: FaultKind,
    pub trigger: Trigger,
    /// How long it lasts, s (`None`: to the end).
    pub for_s: Option<f64>,
}

/// Ranges the planner samples uniformly.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Uncertainty {
    pub cda_m2: Option<(f64, f64)>,
    pub crr0: Option<(f64, f64)>,
    pub mass_kg: Option<(f64, f64)>,
    pub temp_c: Option<(f64, f64)>,
    pub headwind_mps: Option<(f64, f64)>,
    pub derate_tau_s: Option<(f64, f64)>,
    pub derate_floor: Option<(f64, f64)>,
}

/// A config file a plan names, with where the name stands in the plan.
#[derive(Clone, Debug, PartialEq)]
pub struct FileRef {
    /// The plan's key (`vehicle`, `track`, `signals`, `alerts`).
    pub key: &'static str,
    /// The kind of file the key must name.
    pub kind: super::ConfigKind,
    /// The name as written (relative to the plan's directory).
    pub name: String,
    pub line: usize,
    pub column: usize,
}

/// A validated run plan.
#[derive(Clone, Debug, PartialEq)]
pub struct Plan {
    pub name: String,
    pub seed: u64,
    /// Stream time of the rehearsal's first event, ns since the epoch.
    pub start_ns: i64,
    /// Config files named by the plan (relative to its directory).
    pub vehicle: Option<String>,
    pub track: Option<String>,
    pub signals: Option<String>,
    pub alerts: Option<String>,
    /// Where each of those names stands in the plan file, so a problem with
    /// the file it names is reported at the plan's own line and key.
    pub refs: Vec<FileRef>,
    pub ambient: Ambient,
    pub driver: Driver,
    pub car: CarTruth,
    pub sensors: Sensors,
    pub faults: Vec<Fault>,
    pub uncertainty: Uncertainty,
}

pub(super) fn validate(ctx: &mut Ctx<'_>) -> Option<Plan> {
    let raw: Raw = ctx.parse()?;
    let dt = raw.start.get_ref();
    let start_ns = match (dt.date, dt.time) {
        (Some(d), Some(t)) => {
            let days = days_from_civil(d.year as i64, d.month as u32, d.day as u32);
            let offset_min = match dt.offset {
                Some(toml::value::Offset::Custom { minutes }) => minutes as i64,
                _ => 0,
            };
            let secs = days * 86_400 + t.hour as i64 * 3600 + t.minute as i64 * 60 + t.second.unwrap_or(0) as i64
                - offset_min * 60;
            // The stream clock counts nanoseconds since 1970 in an i64,
            // which ends in 2262; a plan starts before 2200 so that the run
            // and anything added to its times stay well inside it.
            let ns = secs.checked_mul(1_000_000_000).and_then(|ns| ns.checked_add(t.nanosecond.unwrap_or(0) as i64));
            match ns {
                Some(ns) if (0..days_from_civil(2200, 1, 1) * 86_400 * 1_000_000_000).contains(&ns) => ns,
                _ => {
                    ctx.err(
                        raw.start.span(),
                        "start",
                        "expected a date and time from 1970 to 2199 (the stream clock counts nanoseconds from 1970)",
                    );
                    0
                }
            }
        }
        _ => {
            ctx.err(raw.start.span(), "start", "expected a date and time, e.g. 2026-03-14T07:30:00Z");
            0
        }
    };
    let a = &raw.ambient;
    // The weather is given whole or not at all: a temperature without a
    // pressure would be half an air.
    let weather = match (&a.temp_c, &a.pressure_hpa, &a.humidity_pct) {
        (Some(t), Some(p), Some(h)) => Some(Weather {
            temp_c: ctx.range(t, "ambient.temp_c", -40.0, 60.0, "a temperature in °C"),
            pressure_pa: ctx.range(p, "ambient.pressure_hpa", 500.0, 1100.0, "a pressure in hPa") * 100.0,
            humidity: ctx.range(h, "ambient.humidity_pct", 0.0, 100.0, "a relative humidity in %") / 100.0,
        }),
        (None, None, None) => None,
        (t, p, h) => {
            let (key, span) = [("ambient.temp_c", t), ("ambient.pressure_hpa", p), ("ambient.humidity_pct", h)]
                .into_iter()
                .find_map(|(k, v)| v.as_ref().map(|v| (k, v.span())))
                .expect("one of them is given");
            ctx.err(
                span,
                key,
                "expected temp_c, pressure_hpa and humidity_pct together, or none of them (the standard atmosphere at the track's elevation)",
            );
            None
        }
    };
    let ambient = Ambient {
        weather,
        headwind_mps: a
            .headwind_mps
            .as_ref()
            .map_or(0.0, |v| ctx.range(v, "ambient.headwind_mps", -40.0, 40.0, "a wind speed in m/s")),
        gust_mps: a
            .gust_mps
            .as_ref()
            .map_or(0.0, |v| ctx.range(v, "ambient.gust_mps", 0.0, 30.0, "a gust amplitude in m/s")),
        gust_period_s: a
            .gust_period_s
            .as_ref()
            .map_or(10.0, |v| ctx.range(v, "ambient.gust_period_s", 0.5, 600.0, "a period in s")),
    };
    let d = &raw.driver;
    let (throttle_at_m, throttle) = check_table(ctx, &d.throttle, "driver.throttle", "distance m, throttle 0..1", 1);
    if throttle.iter().any(|t| !(0.0..=1.0).contains(t)) {
        ctx.err(d.throttle.span(), "driver.throttle", "expected throttle values from 0 to 1");
    }
    let boost_start = match (&d.boost_start_m, &d.boost_start_kmh) {
        (Some(m), None) => {
            BoostStart::AtDistance(ctx.range(m, "driver.boost_start_m", 0.0, 50_000.0, "a distance in m"))
        }
        (None, Some(k)) => {
            BoostStart::AtSpeed(ctx.range(k, "driver.boost_start_kmh", 0.0, 700.0, "a speed in km/h") / 3.6)
        }
        (Some(_), Some(k)) => {
            ctx.err(k.span(), "driver.boost_start_kmh", "expected either boost_start_m or boost_start_kmh, not both");
            BoostStart::AtDistance(0.0)
        }
        (None, None) => {
            ctx.err(
                d.brake_at_m.span(),
                "driver.boost_start_m",
                "expected boost_start_m or boost_start_kmh in [driver]",
            );
            BoostStart::AtDistance(0.0)
        }
    };
    let brake_at_m = ctx.range(&d.brake_at_m, "driver.brake_at_m", 10.0, 50_000.0, "a distance in m");
    let driver = Driver {
        hold_s: d.hold_s.as_ref().map_or(3.0, |v| ctx.range(v, "driver.hold_s", 0.0, 600.0, "a time in s")),
        throttle_at_m,
        throttle,
        boost_start,
        boost_end_m: d
            .boost_end_m
            .as_ref()
            .map(|v| ctx.range(v, "driver.boost_end_m", 0.0, 50_000.0, "a distance in m")),
        brake_at_m,
        tail_s: d.tail_s.as_ref().map_or(5.0, |v| ctx.range(v, "driver.tail_s", 0.0, 600.0, "a time in s")),
    };
    let car = match &raw.car {
        None => CarTruth { soc_start: 0.9, pack_temp_start_c: 30.0, ..CarTruth::default() },
        Some(c) => CarTruth {
            cda_m2: c.drag_area_m2.as_ref().map(|v| ctx.range(v, "car.drag_area_m2", 0.05, 5.0, "a drag area in m²")),
            crr0: c
                .rolling_crr
                .as_ref()
                .map(|v| ctx.range(v, "car.rolling_crr", 0.0, 0.1, "a rolling-resistance coefficient")),
            mass_kg: c.mass_kg.as_ref().map(|v| ctx.range(v, "car.mass_kg", 100.0, 20_000.0, "a mass in kg")),
            soc_start: c
                .soc_start
                .as_ref()
                .map_or(0.9, |v| ctx.range(v, "car.soc_start", 0.0, 1.0, "a state of charge (0..1)")),
            pack_temp_start_c: c
                .pack_temp_start_c
                .as_ref()
                .map_or(30.0, |v| ctx.range(v, "car.pack_temp_start_c", -20.0, 80.0, "a temperature in °C")),
            derate_tau_s: c
                .derate_time_constant_s
                .as_ref()
                .map(|v| ctx.range(v, "car.derate_time_constant_s", 1.0, 3600.0, "a time constant in s")),
            derate_floor: c.derate_floor.as_ref().map(|v| ctx.range(v, "car.derate_floor", 0.0, 1.0, "a fraction")),
        },
    };
    let mut sensors = Sensors::default();
    if let Some(s) = &raw.sensors {
        let mut set = |v: &Option<F>, key: &str, lo: f64, hi: f64, what: &str, dst: &mut f64| {
            if let Some(v) = v {
                *dst = ctx.range(v, key, lo, hi, what);
            }
        };
        set(&s.gnss_rate_hz, "sensors.gnss_rate_hz", 0.2, 100.0, "a rate in Hz", &mut sensors.gnss_rate_hz);
        set(&s.latitude, "sensors.latitude", -89.0, 89.0, "a latitude in degrees", &mut sensors.latitude);
        set(&s.longitude, "sensors.longitude", -180.0, 180.0, "a longitude in degrees", &mut sensors.longitude);
        set(&s.heading_deg, "sensors.heading_deg", 0.0, 360.0, "a heading in degrees", &mut sensors.heading_deg);
        set(
            &s.noise_speed_mps,
            "sensors.noise_speed_mps",
            0.0,
            10.0,
            "a standard deviation in m/s",
            &mut sensors.noise_speed_mps,
        );
        set(
            &s.noise_accel_mps2,
            "sensors.noise_accel_mps2",
            0.0,
            10.0,
            "a standard deviation in m/s²",
            &mut sensors.noise_accel_mps2,
        );
        set(&s.noise_power_frac, "sensors.noise_power_frac", 0.0, 0.5, "a fraction", &mut sensors.noise_power_frac);
        set(
            &s.noise_voltage_v,
            "sensors.noise_voltage_v",
            0.0,
            50.0,
            "a standard deviation in V",
            &mut sensors.noise_voltage_v,
        );
        set(
            &s.noise_current_a,
            "sensors.noise_current_a",
            0.0,
            100.0,
            "a standard deviation in A",
            &mut sensors.noise_current_a,
        );
        set(
            &s.noise_temp_c,
            "sensors.noise_temp_c",
            0.0,
            10.0,
            "a standard deviation in °C",
            &mut sensors.noise_temp_c,
        );
        set(
            &s.noise_gnss_speed_mps,
            "sensors.noise_gnss_speed_mps",
            0.0,
            10.0,
            "a standard deviation in m/s",
            &mut sensors.noise_gnss_speed_mps,
        );
    }
    let mut faults = Vec::new();
    for (i, f) in raw.fault.iter().enumerate() {
        let k = |s: &str| format!("fault[{i}].{s}");
        let trigger = match (&f.at_s, &f.at_m) {
            (Some(t), None) => Trigger::AtTime(ctx.range(t, &k("at_s"), 0.0, 1e6, "a time in s")),
            (None, Some(m)) => Trigger::AtDistance(ctx.range(m, &k("at_m"), 0.0, 1e6, "a distance in m")),
            _ => {
                ctx.err(f.kind.span(), &k("at_s"), "expected exactly one of at_s or at_m");
                continue;
            }
        };
        let for_s = f.for_s.as_ref().map(|v| ctx.range(v, &k("for_s"), 0.0, 1e6, "a duration in s"));
        let need_channel = |ctx: &mut Ctx<'_>| -> Option<String> {
            match &f.channel {
                Some(c) if valid_channel_name(c.get_ref()) => Some(c.get_ref().clone()),
                Some(c) => {
                    ctx.err(c.span(), &k("channel"), format!("expected a channel name, found \"{}\"", c.get_ref()));
                    None
                }
                None => {
                    ctx.err(
                        f.kind.span(),
                        &k("channel"),
                        format!("expected `channel` for a {} fault", f.kind.get_ref()),
                    );
                    None
                }
            }
        };
        let kind = match f.kind.get_ref().as_str() {
            "stale" => need_channel(ctx).map(|channel| FaultKind::Stale { channel }),
            "stuck" => need_channel(ctx).map(|channel| FaultKind::Stuck { channel }),
            "out_of_range" => {
                let ch = need_channel(ctx);
                let v = match &f.value {
                    Some(v) => Some(ctx.range(v, &k("value"), f64::MIN, f64::MAX, "a value")),
                    None => {
                        ctx.err(
                            f.kind.span(),
                            &k("value"),
                            "expected `value` (in the signal's unit) for an out_of_range fault",
                        );
                        None
                    }
                };
                ch.zip(v).map(|(channel, value)| FaultKind::OutOfRange { channel, value })
            }
            "dropout" => match &f.source {
                Some(s) if s.get_ref() == "can" || s.get_ref() == "gnss" => {
                    Some(FaultKind::Dropout { source: s.get_ref().clone() })
                }
                Some(s) => {
                    ctx.err(s.span(), &k("source"), format!("expected \"can\" or \"gnss\", found \"{}\"", s.get_ref()));
                    None
                }
                None => {
                    ctx.err(f.kind.span(), &k("source"), "expected `source = \"can\"` or `\"gnss\"` for a dropout");
                    None
                }
            },
            "frame_loss" => match &f.rate {
                Some(r) => {
                    Some(FaultKind::FrameLoss { rate: ctx.range(r, &k("rate"), 0.0, 1.0, "a loss rate (0..1)") })
                }
                None => {
                    ctx.err(f.kind.span(), &k("rate"), "expected `rate` (0..1) for a frame_loss fault");
                    None
                }
            },
            "derate" => match &f.factor {
                Some(x) => Some(FaultKind::Derate {
                    factor: ctx.range(x, &k("factor"), 1.0, 100.0, "a speed-up factor ≥ 1"),
                }),
                None => {
                    ctx.err(f.kind.span(), &k("factor"), "expected `factor` (≥ 1) for a derate fault");
                    None
                }
            },
            "error_burst" => Some(FaultKind::ErrorBurst { count: f.count.as_ref().map_or(20, |c| *c.get_ref()) }),
            other => {
                ctx.err(
                    f.kind.span(),
                    &k("kind"),
                    format!("expected one of \"stale\", \"dropout\", \"frame_loss\", \"stuck\", \"out_of_range\", \"derate\", \"error_burst\", found \"{other}\""),
                );
                None
            }
        };
        if let Some(kind) = kind {
            faults.push(Fault { kind, trigger, for_s });
        }
    }
    let mut uncertainty = Uncertainty::default();
    if let Some(u) = &raw.uncertainty {
        let mut range = |v: &Option<Spanned<[f64; 2]>>, key: &str| -> Option<(f64, f64)> {
            let v = v.as_ref()?;
            let [lo, hi] = *v.get_ref();
            if !(lo.is_finite() && hi.is_finite()) || lo > hi {
                ctx.err(v.span(), key, format!("expected [low, high] with low ≤ high, found [{lo}, {hi}]"));
                return None;
            }
            Some((lo, hi))
        };
        uncertainty.cda_m2 = range(&u.drag_area_m2, "uncertainty.drag_area_m2");
        uncertainty.crr0 = range(&u.rolling_crr, "uncertainty.rolling_crr");
        uncertainty.mass_kg = range(&u.mass_kg, "uncertainty.mass_kg");
        uncertainty.temp_c = range(&u.temp_c, "uncertainty.temp_c");
        uncertainty.headwind_mps = range(&u.headwind_mps, "uncertainty.headwind_mps");
        uncertainty.derate_tau_s = range(&u.derate_time_constant_s, "uncertainty.derate_time_constant_s");
        uncertainty.derate_floor = range(&u.derate_floor, "uncertainty.derate_floor");
    }
    let mut refs = Vec::new();
    for (key, kind, name) in [
        ("vehicle", super::ConfigKind::Vehicle, &raw.vehicle),
        ("track", super::ConfigKind::Track, &raw.track),
        ("signals", super::ConfigKind::Signals, &raw.signals),
        ("alerts", super::ConfigKind::Alerts, &raw.alerts),
    ] {
        let Some(name) = name else { continue };
        if name.get_ref().trim().is_empty() {
            ctx.err(name.span(), key, format!("expected the name of a {} file, found an empty string", kind.as_str()));
            continue;
        }
        let (line, column) = super::locate::line_col(ctx.src, name.span().start);
        refs.push(FileRef { key, kind, name: name.get_ref().clone(), line, column });
    }
    Some(Plan {
        name: raw.name,
        seed: *raw.seed.get_ref(),
        start_ns,
        vehicle: raw.vehicle.map(Spanned::into_inner),
        track: raw.track.map(Spanned::into_inner),
        signals: raw.signals.map(Spanned::into_inner),
        alerts: raw.alerts.map(Spanned::into_inner),
        refs,
        ambient,
        driver,
        car,
        sensors,
        faults,
        uncertainty,
    })
}
