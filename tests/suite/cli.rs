//! The commands as a user runs them: exit codes, messages, recordings.

use crate::util::{demo, stderr, stdout, termvel, write};

#[test]
fn commands_missing_their_arguments_show_their_usage_and_exit_2() {
    for (cmd, usage) in [
        ("report", "Usage: termvel report"),
        ("export", "Usage: termvel export"),
        ("live", "live needs at least one input"),
    ] {
        let o = termvel(&[cmd]);
        assert_eq!(o.status.code(), Some(2), "{cmd}");
        assert!(stderr(&o).contains(usage), "{cmd}: {}", stderr(&o));
    }
}

#[test]
fn replay_of_a_missing_file_names_it_and_exits_2() {
    let o = termvel(&["replay", "no/such/file.tvrec", "--headless", "--no-record"]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(e.contains("no/such/file.tvrec") && e.lines().count() == 1, "{e}");
}

#[test]
fn replay_of_garbage_is_unusable_input() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "junk.bin", [0u8, 159, 146, 150, 10, 255, 10, 1, 2, 3].repeat(50));
    let o = termvel(&["replay", p.to_str().unwrap(), "--headless", "--no-record"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("no valid event"), "{}", stderr(&o));
}

#[test]
fn headless_replay_prints_snapshots_and_a_summary() {
    let o = termvel(&["replay", demo().to_str().unwrap(), "--headless", "--no-record", "--every", "1s"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = stdout(&o);
    let lines: Vec<serde_json::Value> =
        out.lines().map(|l| serde_json::from_str(l).expect("every line is JSON")).collect();
    let (summary, snaps) = lines.split_last().unwrap();
    let s = &summary["summary"];
    assert!(s["events"].as_u64().unwrap() > 40_000);
    assert_eq!(s["malformed_lines"], 0);
    assert_eq!(s["torn_tail"], false);
    assert_eq!(s["snapshots"].as_u64().unwrap() as usize, snaps.len());
    // One snapshot a second of stream time, on whole seconds.
    for w in snaps.windows(2) {
        assert_eq!(w[1]["t_ns"].as_i64().unwrap() - w[0]["t_ns"].as_i64().unwrap(), 1_000_000_000);
    }
    let mid = &snaps[snaps.len() / 2];
    let speed = &mid["channels"]["vehicle.speed"];
    assert_eq!(speed["unit"], "m/s");
    assert!(speed["age_s"].as_f64().unwrap() < 0.05);
    assert!(mid["derived"]["air"]["density_kg_m3"].as_f64().unwrap() > 1.0);
}

#[test]
fn a_torn_recording_replays_to_the_tear_and_says_where() {
    let dir = tempfile::tempdir().unwrap();
    let full = std::fs::read(demo()).unwrap();
    let p = write(dir.path(), "torn.tvrec", &full[..full.len() * 2 / 3]);
    let o = termvel(&["replay", p.to_str().unwrap(), "--headless", "--no-record"]);
    assert!(o.status.success());
    let out = stdout(&o);
    let summary: serde_json::Value = serde_json::from_str(out.lines().last().unwrap()).unwrap();
    assert_eq!(summary["summary"]["torn_tail"], true);
    let line = summary["summary"]["torn_tail_line"].as_u64().unwrap();
    let whole = full[..full.len() * 2 / 3].iter().filter(|b| **b == b'\n').count() as u64;
    assert_eq!(line, whole + 1);
    assert!(stderr(&o).contains(&format!("torn.tvrec:{line}: the last line is torn")), "{}", stderr(&o));
}

#[test]
fn replay_records_a_copy_that_replays_the_same() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path().to_str().unwrap();
    let a = termvel(&["replay", demo().to_str().unwrap(), "--headless", "--record-dir", d]);
    assert!(a.status.success(), "{}", stderr(&a));
    let rec: Vec<_> = std::fs::read_dir(dir.path()).unwrap().map(|e| e.unwrap().path()).collect();
    assert_eq!(rec.len(), 1, "one new recording");
    assert!(stderr(&a).contains(&rec[0].display().to_string()), "the recording's path is shown");
    let b = termvel(&["replay", rec[0].to_str().unwrap(), "--headless", "--no-record"]);
    assert!(b.status.success());
    let strip = |s: String| s.lines().filter(|l| !l.starts_with("{\"summary\"")).map(str::to_owned).collect::<Vec<_>>();
    assert!(strip(stdout(&a)) == strip(stdout(&b)), "the copy replays to the same snapshots");
    // The copy carries this session's alert annotations.
    let text = std::fs::read_to_string(&rec[0]).unwrap();
    assert!(text.contains("] session note alert raise"), "alerts are annotated in the recording");
}

#[test]
fn plan_prints_a_recommendation_and_probabilities() {
    let o = termvel(&["plan", "--trials", "400"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let text = stdout(&o);
    for want in ["as planned", "best boost start", "probability of reaching", "peak speed, km/h", "Advisory only"] {
        assert!(text.contains(want), "missing {want:?}:\n{text}");
    }
    let o = termvel(&["plan", "--trials", "400", "--json", "--seed", "9"]);
    assert!(o.status.success());
    let v: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
    let mc = &v["monte_carlo"];
    assert_eq!(mc["trials"], 400);
    assert_eq!(mc["seed"], 9);
    let p = |k: &str| mc["peak_mps"][k].as_f64().unwrap();
    assert!(p("p5") <= p("p50") && p("p50") <= p("p95"));
    assert!((0.0..=1.0).contains(&mc["p_target"].as_f64().unwrap()));
    assert!(
        v["best_boost"]["run"]["peak_mps"].as_f64().unwrap()
            >= v["planned"]["run"]["peak_mps"].as_f64().unwrap() - 1e-9
    );
    // The same seed gives the same answer.
    let again = termvel(&["plan", "--trials", "400", "--json", "--seed", "9"]);
    assert_eq!(stdout(&again), stdout(&o));
}

#[test]
fn plan_and_rehearse_refuse_a_bad_plan_with_its_location() {
    let dir = tempfile::tempdir().unwrap();
    let text = termvel::config::EMBEDDED_PLAN.1.replace("brake_at_m = 5750", "brake_at_m = \"late\"");
    let p = write(dir.path(), "bad-plan.toml", text);
    for cmd in ["plan", "rehearse"] {
        let o = termvel(
            &[cmd, p.to_str().unwrap(), "--headless", "--no-record"]
                .into_iter()
                .filter(|a| cmd == "rehearse" || (*a != "--headless" && *a != "--no-record"))
                .collect::<Vec<_>>(),
        );
        assert_eq!(o.status.code(), Some(2), "{cmd}");
        assert!(
            stderr(&o).contains("bad-plan.toml:") && stderr(&o).contains("driver.brake_at_m"),
            "{cmd}: {}",
            stderr(&o)
        );
    }
}

#[test]
fn a_headless_rehearsal_runs_the_demo_plan() {
    let o = termvel(&["rehearse", "--headless", "--no-record", "--every", "1s"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let last = stdout(&o).lines().last().unwrap().to_string();
    let v: serde_json::Value = serde_json::from_str(&last).unwrap();
    assert!(v["summary"]["can_frames"].as_u64().unwrap() > 30_000);
}

// Issue 13, item 17: `--every 1h` was refused though the help says 1ms to 1h.
#[test]
fn every_takes_the_whole_range_its_message_states() {
    let o = termvel(&["replay", demo().to_str().unwrap(), "--headless", "--no-record", "--every", "1h"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let o = termvel(&["replay", demo().to_str().unwrap(), "--headless", "--no-record", "--every", "61min"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--every") && stderr(&o).contains("from 1ms to 1h"), "{}", stderr(&o));
}

// Issue 13, item 17: a serial spec with baud=0 ran "at 0 baud", an option
// given twice took its last value, bitrate= was ignored on an NMEA port, and
// one device could be given twice.
#[test]
fn live_refuses_serial_inputs_that_cannot_work_and_names_the_option() {
    for (spec, says) in [
        ("/dev/null,baud=0", "baud: expected a rate from 50 to 12000000 baud, found 0"),
        ("/dev/null,baud=9600,baud=4800", "baud: given twice"),
        (
            "/dev/null,proto=nmea,bitrate=500000",
            "bitrate: sets a serial CAN adapter's bus rate, so it needs proto=slcan",
        ),
    ] {
        let o = termvel(&["live", "--serial", spec, "--headless", "--no-record"]);
        assert_eq!(o.status.code(), Some(2), "{spec}");
        let e = stderr(&o);
        assert!(e.contains(&format!("'{spec}' for '--serial <SPEC>'")) && e.contains(says), "{spec}: {e}");
    }
    let dir = tempfile::tempdir().unwrap();
    let link = dir.path().join("port");
    std::os::unix::fs::symlink("/dev/null", &link).unwrap();
    let via_link = format!("{},name=other", link.display());
    let o =
        termvel(&["live", "--serial", "/dev/null", "--serial", &via_link, "--headless", "--no-record", "--for", "1s"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--serial: device /dev/null is given twice (as /dev/null and "), "{}", stderr(&o));
}

// Issue 13, item 17: `--can lo` was retried for ever as "lo is down" where
// the kernel has no CAN support at all (and lo is no CAN interface anyway).
#[test]
fn live_can_on_a_machine_or_interface_without_can_says_so() {
    let o = termvel(&["live", "--can", "lo", "--headless", "--no-record", "--for", "1s"]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(
        e.contains("--can lo: this kernel has no CAN support") || e.contains("--can lo: lo is not a CAN interface"),
        "{e}"
    );
    assert!(!e.contains("is down"), "{e}");
}
