//! termvel in a real terminal: tmux runs it, the test presses keys and reads
//! the screen with `capture-pane`, as a user would. Each test has its own
//! tmux server (a private socket), so they run in parallel.

use std::path::Path;
use std::process::Command;
use std::time::Duration;

use crate::tmux::Tmux;
use crate::util::demo;

fn bin() -> String {
    env!("CARGO_BIN_EXE_termvel").to_string()
}

/// Position of the replay in the status line, in tenths of a second: the
/// first `m:ss.t` from the bottom of the screen (the status line; the mode
/// word before it is dropped on narrow lines, the total follows it).
fn position(screen: &str) -> Option<u64> {
    let parse = |tok: &str| -> Option<u64> {
        let (m, s) = tok.split_once(':')?;
        let (s, tenth) = s.split_once('.')?;
        if s.len() != 2 || tenth.len() != 1 || s.contains(':') {
            return None;
        }
        Some(m.parse::<u64>().ok()? * 600 + s.parse::<u64>().ok()? * 10 + tenth.parse::<u64>().ok()?)
    };
    screen.lines().rev().find_map(|l| l.split_whitespace().find_map(parse))
}

fn recordings(dir: &Path) -> Vec<std::path::PathBuf> {
    std::fs::read_dir(dir).map(|r| r.filter_map(|e| e.ok().map(|e| e.path())).collect()).unwrap_or_default()
}

#[test]
fn an_engineer_walks_through_the_screens() {
    let dir = tempfile::tempdir().unwrap();
    let cmd = format!("{} replay {} --record-dir {} --speed 4", bin(), demo().display(), dir.path().display());
    let t = Tmux::start("walk", &cmd, 110, 32);
    t.wait(15.0, "the run screen", |s| s.contains("SPEED") && s.contains("PEAK") && s.contains("Advisory only"));
    assert!(t.alternate_on(), "a full-screen program uses the alternate screen");
    for (key, expect) in [
        ("2", "road load now"),
        ("3", "deliverable power · ┃ rated"),
        ("4", "sources"),
        ("5", "channels"),
        ("?", "keys"),
        ("1", "speed over distance"),
    ] {
        t.keys(&[key]);
        t.wait(5.0, expect, |s| s.contains(expect));
    }
    // Seek forward 30 s, pause, then seek back 5 s: the position goes back.
    t.keys(&[">"]);
    t.wait(5.0, "the long seek", |s| position(s).is_some_and(|p| p >= 300));
    t.keys(&["Space"]);
    let paused = t.wait(5.0, "paused", |s| s.contains("PAUSED"));
    let before = position(&paused).expect("a position");
    t.keys(&["Left"]);
    let after = t.wait(5.0, "the seek", |s| position(s).is_some_and(|p| p + 30 < before));
    assert!(position(&after).unwrap() + 30 < before);
    // Step one snapshot while paused.
    let p0 = position(&after).unwrap();
    t.keys(&["s"]);
    t.wait(5.0, "a step", |s| position(s).is_some_and(|p| p > p0 && p <= p0 + 2));
    // A mark with a note.
    t.keys(&["m"]);
    t.type_text("boost felt late");
    t.wait(5.0, "the prompt", |s| s.contains("mark: boost felt late"));
    t.keys(&["Enter"]);
    t.wait(5.0, "the confirmation", |s| s.contains("marked: boost felt late"));
    // Acknowledge (behind the end of the recording, after the seek back:
    // not recorded, and said on exit), units, and quit with q twice.
    t.keys(&["a"]);
    t.wait(5.0, "the acknowledgement", |s| s.contains("acknowledged"));
    t.keys(&["u"]);
    t.wait(5.0, "mph", |s| s.contains("mph"));
    t.keys(&["q"]);
    t.wait(5.0, "the quit prompt", |s| s.contains("press q again to quit"));
    t.keys(&["q"]);
    let end = t.wait(10.0, "the exit", |s| s.contains("[exited"));
    assert!(end.contains("[exited 0 ]"), "{end}");
    assert!(!t.alternate_on(), "the terminal is back from the alternate screen");
    assert!(end.contains("termvel: recorded"), "{end}");
    let rec = recordings(dir.path());
    assert_eq!(rec.len(), 1);
    let text = std::fs::read_to_string(&rec[0]).unwrap();
    // Made 5 s back from where the recording had reached, the mark goes in
    // where it had reached, in time order, saying where it was made.
    assert!(text.contains(" op mark boost felt late (made at "), "the mark is in the recording");
    let mut r = termvel::record::RecordingReader::open(&rec[0]).unwrap();
    r.drain();
    assert_eq!(r.stats.time.time_reversals, 0, "the recording is in time order");
    assert!(end.contains("acknowledgement of every alert at stream time"), "{end}");
    assert!(text.ends_with('\n'), "the recording ends with a whole line");
}

#[test]
fn sigterm_and_sighup_leave_a_clean_terminal_and_recording() {
    for (sig, name) in [("-TERM", "term"), ("-HUP", "hup")] {
        let dir = tempfile::tempdir().unwrap();
        let cmd = format!("{} rehearse --record-dir {} --speed 2", bin(), dir.path().display());
        let t = Tmux::start(name, &cmd, 100, 30);
        t.wait(15.0, "the run screen", |s| s.contains("SPEED"));
        std::thread::sleep(Duration::from_millis(800));
        let pid = t.pid();
        assert!(Command::new("kill").args([sig, &pid.to_string()]).status().unwrap().success());
        let end = t.wait(10.0, "the exit", |s| s.contains("[exited"));
        assert!(end.contains("[exited 0 ]"), "{sig}: {end}");
        assert!(!t.alternate_on(), "{sig}: the terminal is restored");
        let rec = recordings(dir.path());
        assert_eq!(rec.len(), 1, "{sig}");
        let text = std::fs::read_to_string(&rec[0]).unwrap();
        assert!(text.ends_with('\n'), "{sig}: the recording was closed cleanly, not torn");
        let mut r = termvel::record::RecordingReader::open(&rec[0]).unwrap();
        r.drain();
        assert!(r.stats.events > 100 && r.stats.torn_tail.is_none() && r.stats.malformed == 0, "{sig}: {:?}", r.stats);
    }
}

#[test]
fn a_small_terminal_then_a_resize() {
    let cmd = format!("{} replay {} --no-record", bin(), demo().display());
    let t = Tmux::start("small", &cmd, 70, 20);
    t.wait(15.0, "the small-terminal view", |s| s.contains("is below 80×24") && s.contains("SPEED"));
    t.run(&["resize-window", "-x", "120", "-y", "36"]);
    t.wait(10.0, "the full run screen after the resize", |s| s.contains("PEAK") && s.contains("speed over distance"));
    t.keys(&["C-c"]);
    let end = t.wait(10.0, "the exit", |s| s.contains("[exited"));
    assert!(end.contains("[exited 0 ]"), "{end}");
}

#[test]
fn live_on_the_screens_with_a_receiver_unplugged() {
    use std::sync::atomic::{AtomicBool, Ordering};
    use std::sync::{Arc, Mutex};
    use termvel::decode::{nmea, slcan};
    use termvel::event::{CanFrame, CanId, DataFrame};

    let dir = tempfile::tempdir().unwrap();
    let gnss = Arc::new(Mutex::new(Some(crate::pty::Pty::new())));
    let mut adapter = crate::pty::Pty::new();
    let gnss_path = gnss.lock().unwrap().as_ref().unwrap().path.clone();
    let cmd = format!(
        "{} live --serial {gnss_path},proto=nmea,name=gnss --serial {},proto=slcan,name=pt --record-dir {}",
        bin(),
        adapter.path,
        dir.path().display()
    );
    let t = Tmux::start("live", &cmd, 120, 34);
    adapter.read_until(b"O\r", Duration::from_secs(15));
    // The devices talk until the test ends: 90 kn over ground at 10 Hz, and
    // the demo car's pt_state frame from the adapter at its 100 Hz.
    let stop = Arc::new(AtomicBool::new(false));
    let talker = {
        let (stop, gnss) = (stop.clone(), gnss.clone());
        std::thread::spawn(move || {
            let cfg = termvel::config::ConfigSet::embedded();
            let m = cfg.signals.messages.iter().find(|m| m.id == CanId::Standard(0x0C4)).unwrap();
            let mut data = [0u8; 8];
            for s in &m.signals {
                if s.channel == "vehicle.speed" {
                    termvel::decode::can::encode_signal(s, 166.7, &mut data);
                }
            }
            let frame = slcan::encode(&CanFrame::Data(DataFrame::new(m.id, &data).unwrap()), None).unwrap();
            let mut k = 0u32;
            while !stop.load(Ordering::Relaxed) {
                if k.is_multiple_of(10)
                    && let Some(g) = gnss.lock().unwrap().as_mut()
                {
                    let s = nmea::sentence(&format!(
                        "GPRMC,0800{:02}.{},A,4648.7404,N,07124.1278,E,90.000,84.0,140326,,,A",
                        (k / 100) % 60,
                        (k / 10) % 10
                    ));
                    g.send(format!("{s}\r\n").as_bytes());
                }
                adapter.send(format!("{frame}\r").as_bytes());
                k += 1;
                std::thread::sleep(Duration::from_millis(10));
            }
        })
    };
    // The run screen: the speed from the car, live in the status line.
    let s = t.wait(15.0, "the speed", |s| s.contains("SPEED vehicle.speed") && s.contains("│ live "));
    assert!(s.contains("Advisory only"), "{s}");
    // A replay key says what it is for.
    t.keys(&["Space"]);
    t.wait(5.0, "the live message", |s| s.contains("for replays and rehearsals"));
    // The feed screen: both sources up.
    t.keys(&["4"]);
    t.wait(5.0, "two sources up", |s| {
        s.lines().filter(|l| (l.starts_with("gnss ") || l.starts_with("pt ")) && l.contains("▲ up")).count() == 2
    });
    // Unplug the receiver: down (or retrying) within a second or so.
    *gnss.lock().unwrap() = None;
    t.wait(4.0, "the receiver down", |s| {
        s.lines().any(|l| l.starts_with("gnss ") && (l.contains("▼ DOWN") || l.contains("↻ RETRYING")))
    });
    // A mark, then quit.
    t.keys(&["m"]);
    t.type_text("receiver lost");
    t.keys(&["Enter"]);
    t.wait(5.0, "the confirmation", |s| s.contains("marked: receiver lost"));
    t.keys(&["q", "q"]);
    let end = t.wait(10.0, "the exit", |s| s.contains("[exited"));
    stop.store(true, Ordering::Relaxed);
    talker.join().unwrap();
    assert!(end.contains("[exited 0 ]"), "{end}");
    assert!(!t.alternate_on());
    let rec = recordings(dir.path());
    assert_eq!(rec.len(), 1);
    let text = std::fs::read_to_string(&rec[0]).unwrap();
    assert!(text.contains(" op mark receiver lost\n"));
    assert!(text.contains(" gnss link down "), "the unplug is in the recording");
    assert!(text.lines().filter(|l| l.contains(" pt 0C4#")).count() >= 10);
}

/// The screen without its last two lines (the caution and the status line
/// with its transient messages).
fn body(screen: &str) -> String {
    let lines: Vec<&str> = screen.lines().collect();
    lines[..lines.len().saturating_sub(2)].join("\n")
}

/// Starts the demo paused at 120×40, steps once (so the position sits on
/// the snapshot grid), presses `keys`, steps once more and returns the
/// screen once it has settled on the step's position. (The waits are long
/// for a machine busy with the rest of the suite; each returns as soon as
/// the screen shows what it waits for.)
fn paused_then(name: &str, keys: &[&str]) -> (String, u64) {
    let cmd = format!("{} replay {} --no-record --paused", bin(), demo().display());
    let t = Tmux::start(name, &cmd, 120, 40);
    let first = t.wait(30.0, "the first snapshot, paused", |s| s.contains("PAUSED") && position(s).is_some());
    assert!(!first.contains("waiting for"), "{first}");
    let p0 = position(&first).unwrap();
    t.keys(&["s"]);
    let stepped = t.wait(20.0, "a step", |s| position(s).is_some_and(|p| p == p0 + 1));
    let p1 = position(&stepped).unwrap();
    t.keys(keys);
    // Until every seek is done: the position stays put for a second.
    let mut last = None;
    for _ in 0..40 {
        let s = t.wait(20.0, "the seeks", |s| position(s).is_some_and(|p| p + 2 > p1 + 600 && p < p1 + 600));
        if last.is_some() && last == position(&s) {
            break;
        }
        last = position(&s);
        std::thread::sleep(Duration::from_millis(1000));
    }
    t.keys(&["s"]);
    let landed =
        t.wait(30.0, &format!("{name}: the last step from {p0} {p1} {last:?}"), |s| position(s) == Some(p1 + 600));
    std::thread::sleep(Duration::from_millis(400));
    let settled = t.screen();
    assert_eq!(position(&settled), position(&landed));
    t.keys(&["C-c"]);
    t.wait(10.0, "the exit", |s| s.contains("[exited 0 ]"));
    (settled, p1 + 600)
}

// Issue 15, item 3: `--paused` waited at "waiting for the first snapshot"
// and only Space started. Item 1: after `<` then `>` the same position
// showed another speed trace (the skipped stretch drawn as a straight line).
// Started paused, seeking back and forth to a place and stepping there
// draws exactly the screen (trace included) of going there directly.
#[test]
fn paused_start_and_seeks_draw_the_straight_replays_screen() {
    let (direct, at) = paused_then("direct", &[">", ">"]);
    let (sought, at2) = paused_then("sought", &[">", ">", ">", "<", "<", "Left", ">", "Right"]);
    assert_eq!(at, at2);
    assert!(direct.contains("speed over distance"), "{direct}");
    assert_eq!(body(&sought), body(&direct), "the screens differ after the seeks");
}

// Issue 15, item 4: a file that is not a recording or a CAN log sat on
// "waiting for data" and left a header-only recording; headless, a README
// was replayed as 5 events among 599 skipped lines.
#[test]
fn a_wrong_file_is_refused_at_once() {
    let dir = tempfile::tempdir().unwrap();
    let cmd = format!("{} replay config/vehicle.toml --record-dir {}", bin(), dir.path().display());
    let t = Tmux::start("wrong", &cmd, 100, 30);
    let end = t.wait(5.0, "the exit", |s| s.contains("[exited"));
    assert!(end.contains("[exited 2 ]"), "{end}");
    assert!(
        end.contains("config/vehicle.toml: no valid event in the file: not a termvel recording or candump log"),
        "{end}"
    );
    assert!(!t.alternate_on());
    assert!(recordings(dir.path()).is_empty(), "no recording is left behind");
    let out = Command::new(bin())
        .args(["replay", "--headless", "README.md", "--record-dir"])
        .arg(dir.path())
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(out.stdout.is_empty(), "nothing replayed");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("README.md: only ") && err.contains("lines are events"), "{err}");
    assert!(recordings(dir.path()).is_empty(), "no recording is left behind");
}

// Issue 15, item 5 and "done when": the end of a run on the screens. Once
// the car brakes and stops, the run screen keeps the verdict (what was
// reached, target reached or missed by how much, the stop against the
// stop-by line) instead of blanking PEAK and TARGET; it stays on screen
// after the replay ends.
#[test]
fn the_end_of_a_run_shows_its_verdict() {
    let cmd = format!("{} replay {} --no-record --speed 64", bin(), demo().display());
    let t = Tmux::start("verdict", &cmd, 120, 40);
    let end = t.wait(60.0, "the stop", |s| s.contains("STOPPED"));
    let screen = t.wait(30.0, "the end of the replay", |s| s.contains("STOPPED") && s.contains("■ end"));
    let line = |word: &str| screen.lines().find(|l| l.contains(word)).unwrap_or_default().to_string();
    let peak = line(" PEAK ");
    assert!(peak.contains("reached at") && peak.contains("km/h"), "{end}\n{screen}");
    let target = line(" TARGET ");
    assert!(target.contains("REACHED at") || target.contains("MISSED by"), "{screen}");
    let brake = line(" BRAKE ");
    assert!(brake.contains("STOPPED") && brake.contains("stop-by"), "{screen}");
    assert!(brake.contains("spare") || brake.contains("over"), "{screen}");
    t.keys(&["q"]);
    t.wait(5.0, "the quit question", |s| s.contains("q again to quit"));
    t.keys(&["q"]);
    t.wait(10.0, "the exit", |s| s.contains("[exited 0 ]"));
}

// Issue 15, item 12: `u` was forgotten at the next run. The choice is
// written to the settings file under XDG_CONFIG_HOME (a temporary folder
// here) and read back by the next session.
#[test]
fn the_unit_set_is_remembered_across_two_runs() {
    let config = tempfile::tempdir().unwrap();
    let cmd = format!(
        "XDG_CONFIG_HOME={} {} replay {} --no-record --speed 4",
        config.path().display(),
        bin(),
        demo().display()
    );
    let t = Tmux::start("units1", &cmd, 110, 32);
    t.wait(15.0, "the run screen", |s| s.contains("SPEED") && s.contains("km/h"));
    t.keys(&["u"]);
    t.wait(5.0, "the switch", |s| s.contains("imperial units (remembered)") && s.contains("mph"));
    t.keys(&["q", "q"]);
    let end = t.wait(10.0, "the exit", |s| s.contains("[exited"));
    assert!(end.contains("[exited 0 ]"), "{end}");
    let file = config.path().join("termvel").join("settings.toml");
    let text = std::fs::read_to_string(&file).expect("the settings file is written");
    assert!(text.contains("units = \"imperial\""), "{text}");
    // The second run starts in mph, without a key.
    let t = Tmux::start("units2", &cmd, 110, 32);
    let first = t.wait(15.0, "the run screen", |s| s.contains("SPEED") && s.contains("PEAK"));
    assert!(first.contains("mph") && !first.contains("km/h"), "{first}");
    t.keys(&["q", "q"]);
    t.wait(10.0, "the exit", |s| s.contains("[exited"));
    // A malformed file: refused before anything starts, naming file, line,
    // key and what was expected (exit 2, no terminal taken).
    std::fs::write(&file, "# mine\nunits = \"furlongs\"\n").unwrap();
    let out = Command::new(bin())
        .args(["replay", "--no-record"])
        .arg(demo())
        .env("XDG_CONFIG_HOME", config.path())
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains(&format!(
            "{}:2:9: units: expected \"metric\" or \"imperial\", found \"furlongs\"",
            file.display()
        )),
        "{err}"
    );
    // Headless output does not read it: JSON stays SI, alerts in metric.
    let out = Command::new(bin())
        .args(["replay", "--headless", "--no-record"])
        .arg(demo())
        .env("XDG_CONFIG_HOME", config.path())
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
}

// Issue 15, items 9, 17 and 21: a 79×24 terminal was called 79×23 and lost
// the pause; a replay's status had no total length; `q`, another key, `q`
// still quit; the developer's draw figures were printed on every exit.
#[test]
fn a_79x24_terminal_a_cancelled_quit_and_the_draw_figures_behind_verbose() {
    for verbose in [false, true] {
        let name = if verbose { "quit-verbose" } else { "quit" };
        let flag = if verbose { " --verbose" } else { "" };
        let cmd = format!("{} replay {} --no-record --paused{flag}", bin(), demo().display());
        let t = Tmux::start(name, &cmd, 79, 24);
        let s = t.wait(15.0, "the small screen, paused", |s| s.contains("PAUSED") && s.contains("SPEED"));
        assert!(s.contains("terminal 79×24 is below 80×24"), "{s}");
        assert!(s.contains(" / 1:44.6"), "the replay's total length: {s}");
        t.keys(&["q"]);
        t.wait(5.0, "the quit prompt", |s| s.contains("press q again to quit"));
        t.keys(&["2"]);
        t.wait(5.0, "the prompt gone", |s| !s.contains("press q again"));
        t.keys(&["q"]);
        t.wait(5.0, "the quit prompt again", |s| s.contains("press q again to quit"));
        std::thread::sleep(Duration::from_millis(500));
        assert!(!t.screen().contains("[exited"), "q, 2, q quit");
        t.keys(&["q"]);
        let end = t.wait(10.0, "the exit", |s| s.contains("[exited"));
        assert!(end.contains("[exited 0 ]"), "{end}");
        assert_eq!(end.contains("screens drew"), verbose, "the draw figures only with --verbose: {end}");
    }
}
