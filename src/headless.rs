//! Headless output: one JSON object per snapshot, then a summary object.
//!
//! The format is an interface (scripts, tests, a second screen) and is
//! documented in the README. Keys are sorted (serde_json's default map), so
//! the same snapshot always prints the same bytes.

use serde_json::{Map, Value, json};

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
    let mut obj = Map::new();
    obj.insert("t".into(), json!(s.t_ns as f64 * 1e-9));
    obj.insert("t_ns".into(), json!(s.t_ns));
    obj.insert("channels".into(), Value::Object(channels));
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
            ..Summary::default()
        }
    }

    pub fn json(&self) -> Value {
        json!({ "summary": self })
    }
}
