//! The commands as a user runs them: exit codes, messages, recordings.

use crate::util::{demo, root, stderr, stdout, termvel, write};
use termvel::engine::physics::air;

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
fn plan_says_which_air_it_used_and_uses_the_engines_without_weather() {
    // Issue 14, item 8: `termvel plan` took the air only from the plan's
    // weather and did not say so; without weather it now uses the ISA
    // troposphere at the track's elevation, as the engine does, and says
    // which in text and JSON.
    let dir = tempfile::tempdir().unwrap();
    let text: String = termvel::config::EMBEDDED_PLAN
        .1
        .lines()
        .filter(|l| !(l.starts_with("temp_c") || l.starts_with("pressure_hpa") || l.starts_with("humidity_pct")))
        .map(|l| format!("{l}\n"))
        .collect();
    let bare = write(dir.path(), "no-weather.toml", text);
    let config = root().join("config").display().to_string();
    let cases =
        [(None, "plan_weather", "the plan's weather"), (Some(&bare), "standard_atmosphere", "the standard atmosphere")];
    for (plan, key, words) in cases {
        let mut args = vec!["plan", "--trials", "20"];
        if let Some(p) = plan {
            args.extend([p.to_str().unwrap(), "--config", config.as_str()]);
        }
        let o = termvel(&args);
        assert!(o.status.success(), "{}", stderr(&o));
        let line = stdout(&o).lines().find(|l| l.starts_with("conditions:")).unwrap_or_default().to_string();
        assert!(line.contains(words), "{key}: {line}");
        args.push("--json");
        let v: serde_json::Value = serde_json::from_str(&stdout(&termvel(&args))).unwrap();
        assert_eq!(v["air"]["source"], key);
        let (t, p, rho) = (
            v["air"]["temp_c"].as_f64().unwrap(),
            v["air"]["pressure_pa"].as_f64().unwrap(),
            v["air_density_kg_m3"].as_f64().unwrap(),
        );
        if key == "standard_atmosphere" {
            // ISA at the demo track's 240 m (ISO 2533), as derived::air_step.
            let elev = v["air"]["track_elevation_m"].as_f64().unwrap();
            let (t_k, p_pa, isa_rho) = air::isa_troposphere(air::geopotential_m(elev));
            // Equal to the last digit JSON keeps.
            let same = |a: f64, b: f64| (a / b - 1.0).abs() < 1e-12;
            assert!(same(t, t_k - air::ZERO_C_K) && same(p, p_pa) && same(rho, isa_rho), "{t} {p} {rho}");
        } else {
            assert_eq!((t, p), (19.5, 98_400.0));
        }
    }
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

// Issue 15, item 24: man pages and shell completions generated from the clap
// definitions, and a documented command that installs them.
#[test]
fn shell_files_cover_every_command_and_install_for_a_user() {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let out_dir = dir.path().join("out");
    let o = termvel(&["shell-files", out_dir.to_str().expect("UTF-8 path")]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    // Every command `termvel --help` lists has its page and appears in the
    // completions (the list is read from the help, so a new command counts).
    let help = stdout(&termvel(&["--help"]));
    let commands: Vec<String> = help
        .lines()
        .skip_while(|l| !l.starts_with("Commands:"))
        .skip(1)
        .take_while(|l| l.starts_with("  "))
        .filter_map(|l| l.split_whitespace().next().map(str::to_string))
        .filter(|c| c != "help")
        .collect();
    assert!(commands.len() >= 9 && commands.contains(&"replay".to_string()), "{help}");
    let bash = std::fs::read_to_string(out_dir.join("completions/termvel.bash")).expect("bash completions");
    for c in &commands {
        let page = std::fs::read_to_string(out_dir.join(format!("man/man1/termvel-{c}.1")))
            .unwrap_or_else(|e| panic!("no man page for {c}: {e}"));
        assert!(page.contains(&format!(".TH termvel-{c} 1")), "{c}: {page}");
        assert!(bash.contains(c.as_str()), "{c} missing from the bash completions");
    }
    let replay = std::fs::read_to_string(out_dir.join("man/man1/termvel-replay.1")).expect("replay page");
    assert!(replay.contains("as\\-fast\\-as\\-possible"), "the replay page lacks its options");
    let syntax = std::process::Command::new("bash")
        .arg("-n")
        .arg(out_dir.join("completions/termvel.bash"))
        .status()
        .expect("bash runs");
    assert!(syntax.success(), "the bash completion script does not parse");
    // The documented install command, into a throwaway home.
    let home = dir.path().join("home");
    std::fs::create_dir_all(&home).expect("home");
    let o = std::process::Command::new(crate::util::root().join("scripts/install-shell-files.sh"))
        .arg(env!("CARGO_BIN_EXE_termvel"))
        .env("HOME", &home)
        .env_remove("XDG_DATA_HOME")
        .output()
        .expect("the install script runs");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(home.join(".local/share/man/man1/termvel.1").is_file());
    assert!(home.join(".local/share/bash-completion/completions/termvel").is_file());
    assert!(home.join(".local/share/zsh/site-functions/_termvel").is_file());
    assert!(home.join(".config/fish/completions/termvel.fish").is_file());
}

// Issue 15, item 20: plan's probability line was for the best boost start,
// not the plan's own, and did not say so; it mixed `1100 m` with `4.99 km`
// and wrote `headwind -1.0–4.0 m/s`.
#[test]
fn plan_says_whose_probability_it_prints_in_one_unit_of_distance() {
    let o = termvel(&["plan", "--trials", "200", "--seed", "3"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let text = stdout(&o);
    let p = text.lines().find(|l| l.contains("probability of reaching")).expect("a probability line");
    assert!(p.contains("as planned (boost from 1.10 km)") && p.contains("with the best start ("), "{p}");
    assert!(!text.contains("1100 m") && text.contains("brake at 5.75 km"), "{text}");
    assert!(text.contains("headwind -1.0 to 4.0 m/s"), "{text}");
    assert!(text.contains("to slow to 80 km/h"), "{text}");
    let o = termvel(&["plan", "--trials", "200", "--seed", "3", "--json"]);
    let v: serde_json::Value = serde_json::from_str(&stdout(&o)).expect("JSON");
    let planned = v["monte_carlo"]["as_planned"]["p_target"].as_f64().expect("the plan's own probability");
    let best = v["monte_carlo"]["p_target"].as_f64().expect("the best start's probability");
    // The best start is chosen for the most speed by the brake point, so it
    // reaches the target at least as often over the same seeded trials.
    assert!(best >= planned, "best {best} < planned {planned}");
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
