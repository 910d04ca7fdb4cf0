//! The envelope as one JSON document, SI units with the unit in every key.
//! A terminal speed above the search bound is `null` with its bound in
//! `…_above_mps`, never the bound as a value.

use serde_json::{Value, json};

use super::{Case, Electric, Envelope, Terminal};
use crate::engine::physics::roadload::RoadLoad;

fn load(l: &RoadLoad) -> Value {
    json!({ "aero_w": l.aero_w, "rolling_w": l.rolling_w, "grade_w": l.grade_w, "total_w": l.total_w })
}

fn span(d: Option<(f64, f64)>) -> Value {
    match d {
        Some((t, x)) => json!({ "reached": true, "time_s": t, "distance_m": x }),
        None => json!({ "reached": false, "time_s": null, "distance_m": null }),
    }
}

fn terminal(t: Terminal) -> Value {
    match t {
        Terminal::At(v) => json!({ "speed_mps": v, "above_mps": null }),
        Terminal::Above(v) => json!({ "speed_mps": null, "above_mps": v }),
    }
}

fn electric(e: Option<Electric>) -> Value {
    match e {
        Some(x) => json!({
            "power_w": x.power_w, "current_a": x.current_a, "pack_v": x.pack_v, "cell_v": x.cell_v,
            "over_current": x.over_current, "under_voltage": x.under_voltage,
        }),
        None => Value::Null,
    }
}

fn finite(x: f64) -> Value {
    if x.is_finite() { json!(x) } else { Value::Null }
}

/// The document.
pub fn document(e: &Envelope, vehicle: &str, track: &str, plan: Option<&str>) -> Value {
    let i = &e.inputs;
    let rows: Vec<Value> = e
        .rows
        .iter()
        .map(|r| {
            let mut cases = serde_json::Map::new();
            for (k, c) in Case::ALL.iter().enumerate() {
                let x = &r.cases[k];
                cases.insert(
                    c.key().into(),
                    json!({
                        "available_w": x.available_w, "margin_w": x.margin_w, "accel_mps2": x.accel_mps2,
                        "from_previous": span(x.from_previous),
                    }),
                );
            }
            json!({ "speed_mps": r.speed_mps, "road_load": load(&r.load), "cases": cases })
        })
        .collect();
    let per_case = |f: &dyn Fn(usize) -> Value| {
        let mut m = serde_json::Map::new();
        for (k, c) in Case::ALL.iter().enumerate() {
            m.insert(c.key().into(), f(k));
        }
        Value::Object(m)
    };
    let p = &e.pack;
    let to_target = |d: Option<(f64, f64)>| match d {
        Some((ej, t)) => json!({ "reached": true, "energy_j": ej, "time_s": t }),
        None => json!({ "reached": false, "energy_j": null, "time_s": null }),
    };
    json!({
        "vehicle": vehicle,
        "track": track,
        "plan": plan,
        "air": {
            "source": i.air.source.key(),
            "temp_c": i.air.temp_c, "pressure_pa": i.air.pressure_pa, "humidity": i.air.humidity,
            "density_kg_m3": i.air.density_kg_m3,
        },
        "headwind_mps": i.headwind_mps,
        "grade": i.grade,
        "grade_source": if i.grade_is_track_mean { "track_mean" } else { "level" },
        "soc_start": i.soc_start,
        "mass_eff_kg": e.mass_eff_kg,
        "k_kg_m": e.k_kg_m,
        "target_mps": i.target_mps,
        "margin_mps": i.margin_mps,
        "rows": rows,
        "terminal": per_case(&|k| terminal(e.terminal[k])),
        "hold": { "target": load(&e.hold_target), "target_plus_margin": load(&e.hold_margin) },
        "between": i.between.zip(e.between).map(|((a, b), bt)| json!({
            "from_mps": a, "to_mps": b, "cases": per_case(&|k| span(bt[k])),
        })),
        "battery": {
            "rate_kw_per_kwh": p.rate_kw_per_kwh,
            "usable_share_per_min": p.usable_share_per_min,
            "available_j": p.available_j,
            "ocv_v": p.ocv_v,
            "deliverable_w": p.deliverable_w,
            "floor_w": p.floor_w,
            "needed_w": p.needed_w,
            "time_to_short_s": finite(p.time_to_short_s),
            "engine_only_at_brake_mps": p.engine_only_at_brake_mps,
            "to_target_rated": to_target(p.to_target_rated),
            "to_target_floor": to_target(p.to_target_floor),
            "floor_supplies": p.floor_supplies,
            "at_rated": electric(p.at_rated),
            "at_needed": electric(p.at_needed),
        },
        "run": {
            "brake_at_m": e.run.brake_at_m, "speed_mps": e.run.speed_mps, "time_s": e.run.t_s,
            "boost_on_mps": e.run.boost_on_mps, "boost_s": e.run.boost_s, "energy_j": e.run.energy_j,
        },
        "sensitivities": e.sensitivities.iter().map(|s| json!({
            "change": s.key, "speed_mps": s.speed_mps, "delta_mps": s.delta_mps,
        })).collect::<Vec<_>>(),
        "caution": crate::CAUTION,
    })
}
