//! Rehearsals with injected faults: each fault kind must raise the alert an
//! engineer expects, when expected; and the rehearsal's recording must
//! replay to the same alerts, transition for transition.

use std::sync::Arc;

use termvel::config::run_plan::Plan;
use termvel::config::{self, ConfigSet, Parsed};
use termvel::engine::alerts::Transition;
use termvel::engine::{Engine, EngineOptions, Snapshot};
use termvel::event::{Event, NS_PER_S, Payload, SESSION};
use termvel::record::{Header, RecordingReader, RecordingWriter, VERSION};
use termvel::sim::Simulator;
use termvel::sources::EventSource;

/// The demo plan without its own fault, plus `extra` TOML.
pub fn plan_with(extra: &str) -> Plan {
    let base = config::EMBEDDED_PLAN.1;
    let cut = base.find("[[fault]]").expect("the demo plan has a fault section");
    let end = base.find("[uncertainty]").expect("and an uncertainty section");
    let text = format!("{}{}\n{extra}\n", &base[..cut], &base[end..]);
    match config::validate_text("test-plan.toml", &text).parsed {
        Some(Parsed::Plan(p)) => p,
        _ => panic!("the test plan is valid: {:?}", config::validate_text("test-plan.toml", &text).errors),
    }
}

/// What a rehearsal produced.
pub struct Rehearsed {
    pub snapshots: Vec<Snapshot>,
    pub timeline: Vec<Transition>,
    pub recording: Vec<u8>,
    pub start_ns: i64,
    pub sim: Simulator,
}

/// Runs `plan` through the simulator and the engine, recording it as a live
/// session would (events and the engine's annotations).
pub fn rehearse(plan: Plan) -> Rehearsed {
    let cfg = Arc::new(ConfigSet::embedded());
    let start_ns = plan.start_ns;
    let mut sim = Simulator::new(cfg.clone(), Arc::new(plan));
    let mut engine = Engine::new(cfg.clone(), EngineOptions::default());
    let header = Header {
        version: VERSION,
        sources: sim.sources().clone(),
        configs: cfg.texts.clone(),
        is_termvel: true,
        ..Header::default()
    };
    let mut recording = Vec::new();
    let mut snapshots = Vec::new();
    {
        let mut w = RecordingWriter::new(&mut recording, &header).unwrap();
        while let Some(ev) = sim.next_event() {
            engine.feed(&ev, sim.sources(), &mut |s| snapshots.push(s));
            for (t, n) in engine.take_notes() {
                w.write_event(&Event::new(t, SESSION, Payload::Note(n)), sim.sources()).unwrap();
            }
            w.write_event(&ev, sim.sources()).unwrap();
        }
        engine.finish(sim.sources(), &mut |s| snapshots.push(s));
    }
    Rehearsed { snapshots, timeline: engine.alerts.timeline.clone(), recording, start_ns, sim }
}

/// Replays a recording and returns the alert timeline.
fn replay_timeline(bytes: &[u8]) -> Vec<Transition> {
    let mut r = RecordingReader::new(bytes, "rehearsal").unwrap();
    let texts = r.header.configs.iter().map(|c| (c.origin.clone(), c.text.clone())).collect();
    let mut engine = Engine::new(Arc::new(ConfigSet::from_texts(texts).unwrap()), EngineOptions::default());
    while let Some(ev) = r.next_event() {
        engine.feed(&ev, &r.header.sources, &mut |_| {});
    }
    engine.finish(&r.header.sources, &mut |_| {});
    engine.alerts.timeline.clone()
}

/// Seconds after the rehearsal's start when `key` was first raised.
fn raised_at(r: &Rehearsed, key: &str) -> Option<f64> {
    r.timeline.iter().find(|x| x.key == key && x.what == "raise").map(|x| (x.t_ns - r.start_ns) as f64 * 1e-9)
}

fn cleared_at(r: &Rehearsed, key: &str) -> Option<f64> {
    r.timeline.iter().find(|x| x.key == key && x.what == "clear").map(|x| (x.t_ns - r.start_ns) as f64 * 1e-9)
}

/// Asserts `key` is raised within [lo, hi] s, and that the recording
/// replays to the same timeline.
fn expect_raised(r: &Rehearsed, key: &str, lo: f64, hi: f64) -> f64 {
    let keys: Vec<&str> = r.timeline.iter().filter(|x| x.what == "raise").map(|x| x.key.as_str()).collect();
    let t = raised_at(r, key).unwrap_or_else(|| panic!("{key} was never raised; raised: {keys:?}"));
    assert!((lo..=hi).contains(&t), "{key} raised at {t:.2} s, expected {lo}..{hi} s");
    assert_eq!(replay_timeline(&r.recording), r.timeline, "the recording replays to the same alerts");
    t
}

#[test]
fn the_clean_plan_raises_no_fault_alerts() {
    let r = rehearse(plan_with(""));
    for x in r.timeline.iter().filter(|x| x.what == "raise") {
        let k = x.key.as_str();
        assert!(
            !(k.starts_with("stale:")
                || k.starts_with("down:")
                || k.starts_with("silent:")
                || k.starts_with("rate:")
                || k.starts_with("range:")
                || k.starts_with("bus:")
                || k == "speed-disagree"
                || k == "brake-passed"),
            "a clean run raised {k}: {}",
            x.message
        );
    }
}

#[test]
fn a_stale_channel() {
    // The weather message stops for 2.5 s: stale after 3 periods of 100 ms.
    let r = rehearse(plan_with("[[fault]]\nkind = \"stale\"\nchannel = \"ambient.temp\"\nat_s = 30.0\nfor_s = 2.5\n"));
    expect_raised(&r, "stale:weather", 30.25, 30.6);
    let c = cleared_at(&r, "stale:weather").expect("cleared when the message returns");
    assert!((32.5..33.0).contains(&c), "cleared at {c}");
}

#[test]
fn a_source_drops_out_and_returns() {
    let r = rehearse(plan_with("[[fault]]\nkind = \"dropout\"\nsource = \"gnss\"\nat_s = 40.0\nfor_s = 3.0\n"));
    expect_raised(&r, "down:gnss0", 40.0, 40.2);
    let c = cleared_at(&r, "down:gnss0").expect("cleared when it returns");
    assert!((43.0..43.3).contains(&c), "cleared at {c}");
    // The GNSS channels were not also reported stale one by one.
    assert!(raised_at(&r, "stale:gnss0").is_none(), "the source alert covers its channels");
    let r = rehearse(plan_with("[[fault]]\nkind = \"dropout\"\nsource = \"can\"\nat_s = 50.0\nfor_s = 2.0\n"));
    expect_raised(&r, "down:can0", 50.0, 50.2);
}

#[test]
fn frames_lost_at_a_rate() {
    let r = rehearse(plan_with("[[fault]]\nkind = \"frame_loss\"\nrate = 0.4\nat_s = 20.0\nfor_s = 10.0\n"));
    expect_raised(&r, "rate:pt_state", 20.0, 24.5);
}

#[test]
fn a_stuck_speed_signal() {
    // Speed freezes while the car accelerates: wheel and GNSS disagree.
    let r = rehearse(plan_with("[[fault]]\nkind = \"stuck\"\nchannel = \"vehicle.speed\"\nat_s = 12.0\nfor_s = 6.0\n"));
    expect_raised(&r, "speed-disagree", 12.5, 14.5);
}

#[test]
fn a_signal_out_of_range() {
    // 95 °C is above the pack temperature signal's valid maximum of 87 °C.
    let r = rehearse(plan_with(
        "[[fault]]\nkind = \"out_of_range\"\nchannel = \"battery.temp\"\nvalue = 95.0\nat_s = 35.0\nfor_s = 2.0\n",
    ));
    expect_raised(&r, "range:battery.temp", 35.0, 35.2);
    // And the value was not used as truth: no battery temperature alert.
    assert!(raised_at(&r, "battery-temp").is_none());
}

#[test]
fn a_can_error_burst() {
    let r = rehearse(plan_with("[[fault]]\nkind = \"error_burst\"\ncount = 30\nat_s = 45.0\n"));
    expect_raised(&r, "bus:can0", 45.0, 45.2);
}

#[test]
fn the_battery_derates_faster_than_expected() {
    // Derating four times faster from boost start: the derating alert, boost
    // running short and the target out of reach, each earlier than in the
    // clean run.
    let clean = rehearse(plan_with(""));
    let r = rehearse(plan_with("[[fault]]\nkind = \"derate\"\nfactor = 4.0\nat_m = 1100.0\n"));
    let boost_start = (clean.sim.truth().iter().find(|p| p.boosting).unwrap().t_ns - clean.start_ns) as f64 * 1e-9;
    expect_raised(&r, "derating", boost_start, boost_start + 1.0);
    let low = expect_raised(&r, "boost-low", boost_start, boost_start + 25.0);
    let low_clean = raised_at(&clean, "boost-low").unwrap_or(f64::INFINITY);
    assert!(low < low_clean, "boost runs short sooner: {low:.1} s against {low_clean:.1} s");
    // Ten seconds into boost the projected peak has come down against the
    // clean run's, and the target is out of reach.
    let at = |x: &Rehearsed| {
        x.snapshots
            .iter()
            .find(|s| (s.t_ns - x.start_ns) as f64 * 1e-9 >= boost_start + 10.0)
            .unwrap()
            .derived
            .projection
            .clone()
            .unwrap()
    };
    let (p, p_clean) = (at(&r), at(&clean));
    assert!(
        p.peak_mps < p_clean.peak_mps - 1.0,
        "{:.1} km/h against {:.1} km/h",
        p.peak_mps * 3.6,
        p_clean.peak_mps * 3.6
    );
    assert!(!p.target_reachable);
    assert!(r.snapshots.iter().any(|s| s.alerts.iter().any(|a| a.key == "target" && a.active)));
}

#[test]
fn braking_late_passes_the_braking_point() {
    // The driver brakes 300 m past where termvel says the car must brake.
    let plan = plan_with("");
    let text = config::EMBEDDED_PLAN.1.replace("brake_at_m = 5750", "brake_at_m = 6380");
    let late = match config::validate_text("late.toml", &text).parsed {
        Some(Parsed::Plan(p)) => Plan { faults: vec![], ..p },
        _ => panic!(),
    };
    let r = rehearse(late);
    let approach = expect_raised(&r, "brake-approach", 60.0, 80.0);
    let passed = expect_raised(&r, "brake-passed", approach, approach + 6.0);
    // The approach came while there were still seconds to brake in.
    let snap = r.snapshots.iter().find(|s| (s.t_ns - r.start_ns) as f64 * 1e-9 >= approach).unwrap();
    let b = snap.derived.braking.expect("a braking point");
    assert!(b.in_s > 1.0 && b.in_s <= 4.0, "{b:?}");
    let _ = (plan, passed, NS_PER_S);
}
