//! Headless output: one JSON object per snapshot, then a summary object.
//!
//! The format is an interface (scripts, tests, a second screen) and is
//! documented in the README. Keys are sorted (serde_json's default map), so
//! the same snapshot always prints the same bytes.

use serde_json::{Map, Value, json};

use crate::engine::derived::{AirOrigin, Derived};
use crate::engine::estimators::Estimated;
use crate::engine::{Counters, Snapshot};

fn num(v: f64) -> Value {
    if v.is_finite() { json!(v) } else { Value::Null }
}

/// The JSON object of one snapshot.
pub fn snapshot_json(s: &Snapshot) -> Value {
    let mut channels = Map::new();
    for c in &s.channels {
        let mut flags = Vec::new();
        if c.stale {
            flags.push("stale");
        }
        if c.out_of_range {
            flags.push("out_of_range");
        }
        channels.insert(
            c.name.to_string(),
            json!({
                "value": num(c.value),
                "unit": c.unit,
                "age_s": num(c.age_s),
                "min": num(c.min),
                "max": num(c.max),
                "flags": flags,
            }),
        );
    }
    let alerts: Vec<Value> = s
        .alerts
        .iter()
        .map(|a| {
            json!({
                "key": a.key,
                "severity": a.severity.as_str(),
                "message": a.message,
                "raised_t": a.raised_ns as f64 * 1e-9,
                "active": a.active,
                "acked": a.acked,
            })
        })
        .collect();
    let mut obj = Map::new();
    obj.insert("t".into(), json!(s.t_ns as f64 * 1e-9));
    obj.insert("t_ns".into(), json!(s.t_ns));
    obj.insert("channels".into(), Value::Object(channels));
    obj.insert("derived".into(), derived_json(&s.derived));
    obj.insert("alerts".into(), Value::Array(alerts));
    Value::Object(obj)
}

fn opt(v: Option<f64>) -> Value {
    v.map_or(Value::Null, num)
}

fn est(e: Option<Estimated>) -> (Value, Value) {
    e.map_or((Value::Null, Value::Null), |e| (num(e.value), num(e.sd)))
}

/// The derived block of a snapshot (units in the key names; null when
/// unknown, or for times, when nothing limits them).
pub fn derived_json(d: &Derived) -> Value {
    let (air_origin, air_age, humidity_assumed) = match d.air_origin {
        Some(AirOrigin::Measured { age_s, humidity_assumed }) => ("measured", num(age_s), humidity_assumed),
        Some(AirOrigin::Standard) | None => ("standard atmosphere", Value::Null, false),
    };
    let road_load = d.road_load.map_or(Value::Null, |r| {
        json!({
            "aero_w": num(r.aero_w),
            "rolling_w": num(r.rolling_w),
            "grade_w": num(r.grade_w),
            "total_w": num(r.total_w),
            "inertial_w": num(r.inertial_w),
            "demand_w": num(r.demand_w),
            "wheel_w": opt(r.wheel_w),
            "available_w": num(r.available_w),
            "margin_w": num(r.margin_w),
            "cda_m2": num(r.cda_m2),
            "crr": num(r.crr),
            "estimate_converged": r.estimate_converged,
        })
    });
    let e = &d.estimate;
    let coast = e.coast.map_or(
        Value::Null,
        |(c, r)| json!({ "cda_m2": num(c.value), "cda_sd_m2": num(c.sd), "crr": num(r.value), "crr_sd": num(r.sd) }),
    );
    let b = &d.battery;
    let (ocv, ocv_sd) = est(b.ocv_v);
    let (res, res_sd) = est(b.resistance_ohm);
    let fit = b.fit.map_or(Value::Null, |f| {
        json!({
            "tau_s": num(f.tau_s),
            "floor": num(f.floor),
            "amplitude": num(f.amplitude),
            "rms": num(f.rms),
            "r2": num(f.r2),
            "points": f.points,
            "span_s": num(f.span_s),
            "converged": f.converged,
        })
    });
    let l = &d.boost_left;
    let projection = d.projection.as_ref().map_or(Value::Null, |p| {
        json!({
            "peak_mps": num(p.peak_mps),
            "peak_low_mps": num(p.peak_low_mps),
            "peak_high_mps": num(p.peak_high_mps),
            "peak_at_m": num(p.peak_at_m),
            "peak_in_s": num(p.peak_in_s),
            "terminal_mps": num(p.terminal_mps),
            "terminal_no_boost_mps": num(p.terminal_no_boost_mps),
            "target_mps": num(p.target_mps),
            "target_reachable": p.target_reachable,
            "target_in_s": opt(p.target_in_s),
            "target_at_m": opt(p.target_at_m),
            "converged": p.converged,
        })
    });
    let braking = d.braking.map_or(Value::Null, |br| {
        json!({
            "point_m": num(br.point_m),
            "distance_m": num(br.distance_m),
            "in_s": num(br.in_s),
            "stopping_m": num(br.stopping_m),
            "passed": br.passed,
        })
    });
    let tyre = d.tyre.map_or(Value::Null, |t| {
        json!({ "rated_mps": num(t.rated_mps), "margin_mps": num(t.margin_mps), "peak_margin_mps": opt(t.peak_margin_mps) })
    });
    json!({
        "speed_mps": opt(d.speed_mps),
        "speed_source": if d.speed_mps.is_some() { Value::from(d.speed_source) } else { Value::Null },
        "distance_m": num(d.distance_m),
        "accel_mps2": opt(d.accel_mps2),
        "accel_source": if d.accel_mps2.is_some() { Value::from(d.accel_source) } else { Value::Null },
        "air": { "density_kg_m3": num(d.air_density), "origin": air_origin, "age_s": air_age, "humidity_assumed": humidity_assumed },
        "road_load": road_load,
        "estimate": {
            "cda_m2": num(e.cda_m2.value),
            "cda_sd_m2": num(e.cda_m2.sd),
            "crr": num(e.crr.value),
            "crr_sd": num(e.crr.sd),
            "converged": e.converged,
            "samples": e.samples,
            "coast_samples": e.coast_samples,
            "coast": coast,
        },
        "battery": {
            "power_w": opt(b.power_w),
            "discharge_rate_kw_per_kwh": opt(b.discharge_rate_kw_per_kwh),
            "soc": opt(b.soc),
            "energy_above_reserve_j": opt(b.energy_above_reserve_j),
            "temp_c": opt(b.temp_c),
            "ocv_v": ocv,
            "ocv_sd_v": ocv_sd,
            "resistance_ohm": res,
            "resistance_sd_ohm": res_sd,
            "model_converged": b.model_converged,
            "hppc_max_w": opt(b.hppc_max_w),
            "reported_limit_w": opt(b.reported_limit_w),
            "deliverable_w": opt(b.deliverable_w),
            "rated_w": num(b.rated_w),
            "derating_ratio": opt(b.derating_ratio),
            "boosting": b.boosting,
            "time_in_boost_s": num(b.time_in_boost_s),
            "heating_c_per_s": opt(b.heating_c_per_s),
            "derating_fit": fit,
        },
        "boost_left": {
            "energy_s": opt(l.energy_s),
            "power_s": opt(l.power_s),
            "thermal_s": opt(l.thermal_s),
            "binding": l.binding.map(|b| b.as_str()),
            "seconds": opt(l.seconds),
            "need_w": opt(l.need_w),
            "curve_fitted": l.curve_fitted,
        },
        "projection": projection,
        "projection_note": d.projection_note,
        "braking": braking,
        "tyre": tyre,
        "stale_inputs": d.stale_inputs,
    })
}

/// The closing summary of a headless run.
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize)]
pub struct Summary {
    pub events: u64,
    pub can_frames: u64,
    pub samples: u64,
    pub snapshots: u64,
    pub malformed_lines: u64,
    pub out_of_range: u64,
    pub parse_errors: u64,
    pub time_jumps: u64,
    pub time_reversals: u64,
    pub rejected_values: u64,
    pub torn_tail: bool,
    /// Line number of the torn last line, when there is one.
    pub torn_tail_line: Option<u64>,
}

impl Summary {
    pub fn from_counters(c: &Counters) -> Summary {
        Summary {
            events: c.events,
            can_frames: c.can_frames,
            samples: c.samples,
            out_of_range: c.out_of_range,
            parse_errors: c.parse_errors,
            time_jumps: c.time_jumps,
            rejected_values: c.rejected_values,
            ..Summary::default()
        }
    }

    pub fn json(&self) -> Value {
        json!({ "summary": self })
    }
}
