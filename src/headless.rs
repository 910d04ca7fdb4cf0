//! Headless output: one JSON object per snapshot, then a summary object.
//!
//! The format is an interface (scripts, tests, a second screen) and is
//! documented in the README; the `derived` block follows the table of
//! derived quantities (`crate::engine::quantities`). Keys are sorted (serde_json's default map), so
//! the same snapshot always prints the same bytes.

use serde_json::{Map, Value, json};

use crate::engine::derived::Derived;
use crate::engine::quantities::{self, GROUPS, QUANTITIES, Reading};
use crate::engine::{Counters, Snapshot};

fn num(v: f64) -> Value {
    if v.is_finite() { json!(v) } else { Value::Null }
}

/// One alert as the snapshot line (and a shared run's alert messages)
/// carry it.
pub fn alert_json(a: &crate::engine::Alert) -> Value {
    json!({
        "key": a.key,
        "severity": a.severity.as_str(),
        "message": a.message,
        "raised_t": a.raised_ns as f64 * 1e-9,
        "active": a.active,
        "acked": a.acked,
    })
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
    let alerts: Vec<Value> = s.alerts.iter().map(alert_json).collect();
    let mut obj = Map::new();
    obj.insert("t".into(), json!(s.t_ns as f64 * 1e-9));
    obj.insert("t_ns".into(), json!(s.t_ns));
    obj.insert("channels".into(), Value::Object(channels));
    obj.insert("derived".into(), derived_json(&s.derived));
    obj.insert("alerts".into(), Value::Array(alerts));
    Value::Object(obj)
}

/// A reading as JSON: unknown and non-finite numbers as `null`.
pub fn reading_json(r: Reading) -> Value {
    match r {
        Reading::Num(v) => v.map_or(Value::Null, num),
        Reading::Count(n) => Value::from(n),
        Reading::Flag(b) => Value::Bool(b),
        Reading::Text(t) => t.map_or(Value::Null, Value::from),
    }
}

/// Sets `value` at `path` below `obj`, making the objects on the way.
fn insert_at<'a>(obj: &mut Map<String, Value>, path: impl Iterator<Item = &'a str>, value: Value) {
    let keys: Vec<&str> = path.collect();
    let Some((last, parents)) = keys.split_last() else { return };
    let mut at = obj;
    for k in parents {
        let child = at.entry(k.to_string()).or_insert_with(|| Value::Object(Map::new()));
        let Value::Object(m) = child else { return };
        at = m;
    }
    at.insert(last.to_string(), value);
}

/// The derived block of a snapshot, built from the table of derived
/// quantities ([`QUANTITIES`]): each quantity at its path (units in the key
/// names; null when unknown, or for times, when nothing limits them), an
/// absent group ([`GROUPS`]) as null.
pub fn derived_json(d: &Derived) -> Value {
    let mut obj = Map::new();
    for (path, present) in GROUPS {
        if !present(d) {
            insert_at(&mut obj, path.split('.'), Value::Null);
        }
    }
    for q in QUANTITIES {
        if !quantities::in_absent_group(q, d) {
            insert_at(&mut obj, q.path(), reading_json((q.read)(d)));
        }
    }
    // A list, not a quantity: which inputs are missing or stale.
    obj.insert("stale_inputs".into(), json!(d.stale_inputs));
    Value::Object(obj)
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
    /// Adapter replies read (not frames, not errors).
    pub replies: u64,
    pub torn_tail: bool,
    /// Line number of the torn last line, when there is one.
    pub torn_tail_line: Option<u64>,
    /// What the session's recorder did, when it recorded.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub recording: Option<RecordingSummary>,
}

/// The recorder's figures in the closing summary: what is in the file, and
/// what the file failed to take.
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize)]
pub struct RecordingSummary {
    pub path: String,
    /// Events in the file, whole.
    pub recorded_events: u64,
    /// Times the file stopped taking writes.
    pub failures: u64,
    /// Events held in memory while the file failed, then written.
    pub held_then_written: u64,
    /// Events dropped because the memory buffer was full (counted in the
    /// file by a `lost` line of the session).
    pub dropped_events: u64,
    /// Events still unwritten at the end: not in the file.
    pub unwritten_events: u64,
    /// Whether every event of the session is in the file.
    pub complete: bool,
    /// The first error, naming the file and what failed.
    pub error: Option<String>,
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
            replies: c.replies,
            ..Summary::default()
        }
    }

    pub fn json(&self) -> Value {
        json!({ "summary": self })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::derived::{BrakingView, RoadLoadView};

    #[test]
    fn non_finite_numbers_and_unknowns_are_null() {
        let d = Derived {
            speed_mps: Some(f64::NAN),
            speed_source: "vehicle.speed",
            air_density: f64::INFINITY,
            road_load: Some(RoadLoadView { total_w: f64::NAN, aero_w: 1.5, ..RoadLoadView::default() }),
            ..Derived::default()
        };
        let j = derived_json(&d);
        assert_eq!(j["speed_mps"], Value::Null);
        assert_eq!(j["speed_source"], "vehicle.speed", "the source is known even when the value is not finite");
        assert_eq!(j["air"]["density_kg_m3"], Value::Null);
        assert_eq!(j["road_load"]["total_w"], Value::Null);
        assert_eq!(j["road_load"]["aero_w"], 1.5);
        assert_eq!(j["road_load"]["wheel_w"], Value::Null);
        assert_eq!(j["accel_mps2"], Value::Null);
        assert_eq!(j["accel_source"], Value::Null, "no acceleration, no source");
        // Absent groups are null as a whole, not objects of nulls.
        assert_eq!(j["projection"], Value::Null);
        assert_eq!(j["braking"], Value::Null);
        assert_eq!(j["estimate"]["coast"], Value::Null);
        assert_eq!(j["battery"]["derating_fit"], Value::Null);
        assert_eq!(j["air"]["origin"], "standard atmosphere");
        assert_eq!(j["stale_inputs"], json!([]));
    }

    #[test]
    fn every_quantity_sits_at_its_path_with_its_value() {
        let d = Derived {
            braking: Some(BrakingView { point_m: 5750.0, in_s: 2.5, passed: true, ..BrakingView::default() }),
            ..Derived::default()
        };
        let j = derived_json(&d);
        let b = &j["braking"];
        assert_eq!(
            (b["point_m"].as_f64(), b["in_s"].as_f64(), b["passed"].as_bool()),
            (Some(5750.0), Some(2.5), Some(true))
        );
        for q in QUANTITIES {
            let pointer: String = q.path().map(|p| format!("/{p}")).collect();
            let got = j.pointer(&pointer);
            if quantities::in_absent_group(q, &d) {
                assert!(got.is_none(), "{} under an absent group", q.name);
            } else {
                assert_eq!(got, Some(&reading_json((q.read)(&d))), "{}", q.name);
            }
        }
    }
}
