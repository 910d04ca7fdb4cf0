//! `termvel follow` rebuilding a shared run on its own engine (issue 16):
//! a recording follower whose recording replays to the reading station's
//! derived values bit for bit, a shared run without event batches refused
//! on the screens, and the screens themselves in tmux, through a real
//! mosquitto on a free loopback port (the broker of `share.rs`).

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};

use crate::share::Broker;
use crate::tmux::Tmux;
use crate::util::{root, stderr, stdout, termvel};

/// Broker tests share a small machine: one at a time, with those of
/// `share.rs` and `share_security.rs` too (one lock for all of them).
use crate::share::one_at_a_time;

/// A `termvel follow` in the background, its output collected.
struct Follow {
    child: Child,
    err: mpsc::Receiver<String>,
    out: std::thread::JoinHandle<String>,
}

impl Follow {
    /// Starts it and waits until it is subscribed.
    fn start(args: &[&str]) -> Follow {
        let mut child = Command::new(env!("CARGO_BIN_EXE_termvel"))
            .arg("follow")
            .args(args)
            .current_dir(root())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        let out = child.stdout.take().unwrap();
        let out = std::thread::spawn(move || std::io::read_to_string(out).unwrap_or_default());
        let (tx, err) = mpsc::channel();
        let e = BufReader::new(child.stderr.take().unwrap());
        std::thread::spawn(move || {
            for l in e.lines().map_while(Result::ok) {
                let _ = tx.send(l);
            }
        });
        let f = Follow { child, err, out };
        let until = Instant::now() + Duration::from_secs(20);
        loop {
            let l =
                f.err.recv_timeout(until.saturating_duration_since(Instant::now())).expect("subscribed within 20 s");
            if l.contains("termvel: following") {
                return f;
            }
        }
    }

    /// Waits for the end (at most `within`): exit code, stdout, stderr.
    fn finish(mut self, within: Duration) -> (Option<i32>, String, String) {
        let until = Instant::now() + within;
        let status = loop {
            if let Some(s) = self.child.try_wait().unwrap() {
                break s;
            }
            if Instant::now() > until {
                let _ = self.child.kill();
                panic!("the follower did not end within {within:?}");
            }
            std::thread::sleep(Duration::from_millis(50));
        };
        let out = self.out.join().unwrap();
        std::thread::sleep(Duration::from_millis(50));
        let err: String = self.err.try_iter().map(|l| l + "\n").collect();
        (status.code(), out, err)
    }
}

pub(crate) fn only_file(dir: &Path) -> PathBuf {
    let files: Vec<PathBuf> = std::fs::read_dir(dir).unwrap().map(|e| e.unwrap().path()).collect();
    assert_eq!(files.len(), 1, "{files:?}");
    files[0].clone()
}

/// The snapshot lines of a headless replay (every line but the summary).
pub(crate) fn replayed_snapshots(recording: &Path) -> Vec<String> {
    let o = termvel(&["replay", recording.to_str().unwrap(), "--headless", "--no-record"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let mut lines: Vec<String> = stdout(&o).lines().map(str::to_string).collect();
    let summary = lines.pop().unwrap();
    assert!(summary.contains("\"summary\""), "{summary}");
    lines
}

// Issue 16, item 3: a rehearsal published with its event batches and
// recorded at the reading station, and followed by a recording follower:
// the two recordings replay to the same snapshots, byte for byte (every
// derived value, bit for bit).
#[test]
fn a_followers_recording_replays_to_the_reading_stations_values_bit_for_bit() {
    let _one = one_at_a_time();
    let broker = Broker::start();
    let url = broker.url();
    let dir = tempfile::tempdir().unwrap();
    let (here, there) = (dir.path().join("station"), dir.path().join("follower"));
    std::fs::create_dir_all(&here).unwrap();
    let follower = Follow::start(&[
        &url,
        "--topic",
        "pit/copy",
        "--headless",
        "--for",
        "180s",
        "--record-dir",
        there.to_str().unwrap(),
    ]);
    let run = termvel(&[
        "rehearse",
        "--headless",
        "--speed",
        "16",
        "--record-dir",
        here.to_str().unwrap(),
        "--share",
        &url,
        "--share-topic",
        "pit/copy",
        "--share-events",
    ]);
    assert!(run.status.success(), "{}", stderr(&run));
    let (code, out, err) = follower.finish(Duration::from_secs(90));
    assert_eq!(code, Some(0), "{err}");
    assert!(err.contains("termvel: recording to "), "{err}");
    let summary: serde_json::Value = serde_json::from_str(out.lines().last().unwrap()).unwrap();
    let remote = &summary["summary"]["follow"]["remote"];
    eprintln!("follower: {remote}");
    assert_eq!(remote["batches_lost"], 0, "{remote}");
    assert_eq!(remote["joined_late"], serde_json::Value::Null, "{remote}");
    assert_eq!(summary["summary"]["follow"]["recording"]["complete"], true, "{summary}");
    let station = replayed_snapshots(&only_file(&here));
    let copy = replayed_snapshots(&only_file(&there));
    assert!(station.len() > 100, "{} snapshots", station.len());
    assert_eq!(copy.len(), station.len(), "as many snapshots");
    for (i, (a, b)) in station.iter().zip(&copy).enumerate() {
        assert!(a == b, "snapshot {i} differs:\n station {a}\n copy    {b}");
    }
}

// Issue 16, item 1: on the screens a follower derives the run on its own
// engine from the event batches; a shared run without them is refused
// (exit 2), naming the option the reading station needs; headless still
// follows it.
#[test]
fn a_shared_run_without_event_batches_is_refused_on_the_screens() {
    let _one = one_at_a_time();
    let broker = Broker::start();
    let url = broker.url();
    let run = termvel(&[
        "rehearse",
        "--headless",
        "--as-fast-as-possible",
        "--no-record",
        "--share",
        &url,
        "--share-topic",
        "pit/plain",
    ]);
    assert!(run.status.success(), "{}", stderr(&run));
    // The retained description says there are no batches.
    let f = Follow::start(&[&url, "--topic", "pit/plain", "--for", "20s"]);
    let (code, out, err) = f.finish(Duration::from_secs(30));
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("carries no event batches") && err.contains("--share-events"), "{err}");
    assert!(out.is_empty(), "{out}");
    let f = Follow::start(&[&url, "--topic", "pit/plain", "--headless", "--for", "2s"]);
    let (code, out, err) = f.finish(Duration::from_secs(30));
    assert_eq!(code, Some(0), "{err}");
    assert!(out.contains("\"kind\":\"description\""), "{out}");
}

// Issue 16, items 1, 2 and 4: a rehearsal on the screens of one terminal,
// shared with its event batches, followed on the screens of another: the
// follower shows the run (speed, the run screen, its link up, that it
// joined late), a screen key switches screens, a replay key says it does
// not apply; the publishing station shows its link up too, and both show
// the link down within a second of the broker stopping.
#[test]
fn a_rehearsal_on_one_terminal_is_followed_on_another() {
    let _one = one_at_a_time();
    let broker = Broker::start();
    let url = broker.url();
    let bin = env!("CARGO_BIN_EXE_termvel");
    let station = Tmux::start(
        "station",
        &format!("{bin} rehearse --no-record --speed 1 --share {url} --share-topic pit/tmux --share-events"),
        160,
        40,
    );
    station.wait(20.0, "the station's run screen with its share link up", |s| {
        s.contains("SPEED") && s.contains("share ▲ up")
    });
    let follower = Tmux::start("follower", &format!("{bin} follow {url} --topic pit/tmux"), 160, 40);
    let started = Instant::now();
    let s = follower.wait(20.0, "the followed run", |s| {
        s.contains("SPEED") && s.contains("[1:run]") && s.contains("share ▲ up") && s.contains("│ follow ")
    });
    eprintln!("the follower drew the run {:?} after it started:\n{s}", started.elapsed());
    assert!(s.contains("joined late"), "it says it joined late:\n{s}");
    assert!(s.contains("km/h"), "{s}");
    follower.keys(&["2"]);
    follower.wait(5.0, "the power screen", |s| s.contains("[2:power]") && s.contains("road load now"));
    follower.keys(&["Space"]);
    follower.wait(5.0, "the replay key's answer", |s| s.contains("do not apply to a followed run"));
    follower.keys(&["u"]);
    follower.wait(5.0, "mph", |s| s.contains("mph"));
    // The broker stopped: both screens say the link is down within a
    // second; back, both say it is up again.
    let killed_at = Instant::now();
    let stopped = broker.kill();
    follower.wait(2.0, "the follower's link down", |s| s.contains("share ▼ down since "));
    let follower_down = killed_at.elapsed();
    std::thread::sleep(Duration::from_millis(300));
    // On the status line, not written over the screens on stderr.
    let s = follower.screen();
    assert!(!s.contains("termvel: follow link"), "a line was written over the screens:\n{s}");
    station.wait(2.0, "the station's link down", |s| s.contains("share ▼ down since "));
    let station_down = killed_at.elapsed();
    eprintln!("link down shown {follower_down:?} (follower) and {station_down:?} (station) after the kill");
    assert!(follower_down < Duration::from_secs(1) && station_down < Duration::from_secs(1));
    let broker = Broker::restart(stopped);
    let restarted_at = Instant::now();
    follower.wait(5.0, "the follower's link up again", |s| s.contains("share ▲ up"));
    station.wait(5.0, "the station's link up again", |s| s.contains("share ▲ up"));
    eprintln!("link up again shown {:?} after the restart", restarted_at.elapsed());
    follower.keys(&["q", "q"]);
    let end = follower.wait(10.0, "the follower's exit", |s| s.contains("[exited"));
    assert!(end.contains("[exited 0 ]"), "{end}");
    assert!(end.contains("termvel: joined late"), "{end}");
    station.keys(&["q", "q"]);
    let end = station.wait(10.0, "the station's exit", |s| s.contains("[exited"));
    assert!(end.contains("[exited 0 ]"), "{end}");
    drop(broker);
}

/// Publishes `body` on `topic` with mosquitto_pub (QoS 1; retained if asked).
fn publish(broker: &Broker, topic: &str, body: &str, retain: bool) {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("body.json");
    std::fs::write(&file, body).unwrap();
    let mut c = Command::new("mosquitto_pub");
    c.args(["-h", "127.0.0.1", "-p", &broker.port.to_string(), "-q", "1", "-t", topic]).arg("-f").arg(&file);
    if retain {
        c.arg("-r");
    }
    assert!(c.status().expect("mosquitto_pub runs (mosquitto-clients)").success());
}

// Issue 16, item 3: batches lost on the way (numbers 3 and 4 never came)
// leave a recording that says where, in a session note at the hole; the
// summary counts them and stderr says so; the recording replays.
#[test]
fn lost_batches_are_noted_in_the_followers_recording() {
    let _one = one_at_a_time();
    let broker = Broker::start();
    let url = broker.url();
    // A real description: a rehearsal's, taken from the broker.
    let run = termvel(&["rehearse", "--headless", "--as-fast-as-possible", "--no-record", "--share", &url]);
    assert!(run.status.success(), "{}", stderr(&run));
    let (_, out, _) = Follow::start(&[&url, "--headless", "--for", "2s"]).finish(Duration::from_secs(20));
    let mut d: serde_json::Value = out
        .lines()
        .map(|l| serde_json::from_str::<serde_json::Value>(l).unwrap())
        .find(|v| v["kind"] == "description")
        .expect("the retained description");
    d["event_batches"] = serde_json::json!(true);
    publish(&broker, "pit/gap/description", &d.to_string(), true);

    let dir = tempfile::tempdir().unwrap();
    let rec_dir = dir.path().to_str().unwrap();
    let f = Follow::start(&[&url, "--topic", "pit/gap", "--headless", "--for", "20s", "--record-dir", rec_dir]);
    let batch = |seq: u64, before: u64, t_ms: [u64; 2]| {
        let lines: String = t_ms.iter().map(|t| format!("[{}.{:03}000] session tick\n", t / 1000, t % 1000)).collect();
        serde_json::json!({"schema": 1, "kind": "events", "seq": seq, "events_before": before, "count": 2,
            "first_t_ns": t_ms[0] * 1_000_000, "lines": lines})
        .to_string()
    };
    for (seq, before, t) in [(1, 0, [1000, 1050]), (2, 2, [1100, 1150]), (5, 8, [1400, 1450]), (6, 10, [1500, 1550])] {
        publish(&broker, "pit/gap/events", &batch(seq, before, t), false);
    }
    publish(&broker, "pit/gap/status", r#"{"schema":1,"kind":"status","state":"ended"}"#, false);
    let (code, out, err) = f.finish(Duration::from_secs(30));
    assert_eq!(code, Some(0), "{err}");
    assert!(err.contains("2 event batches (4 events) lost in 1 gaps"), "{err}");
    let summary: serde_json::Value = serde_json::from_str(out.lines().last().unwrap()).unwrap();
    let remote = &summary["summary"]["follow"]["remote"];
    assert_eq!((remote["batches_lost"].as_u64(), remote["events_lost"].as_u64()), (Some(2), Some(4)), "{remote}");
    assert_eq!(remote["event_batches"], 4, "{remote}");
    let recording = only_file(dir.path());
    let text = std::fs::read_to_string(&recording).unwrap();
    let note = "[1.400000] session note share: 2 event batches lost between 1.150 s and 1.400 s (4 events)\n";
    let at = text.find(note).unwrap_or_else(|| panic!("the note is in the recording:\n{text}"));
    assert!(text[..at].contains("[1.150000] session tick\n") && text[at..].contains("[1.400000] session tick\n"));
    assert!(replayed_snapshots(&recording).len() >= 5);
    // The report lists what the recording lacks.
    let report = termvel(&["report", recording.to_str().unwrap()]);
    assert!(report.status.success(), "{}", stderr(&report));
    let text = stdout(&report);
    assert!(text.contains("not received from the reading station (1)"), "{text}");
    assert!(text.contains("2 event batches lost between 1.150 s and 1.400 s (4 events)"), "{text}");
}

/// Processor time (user + system, s) a process has used so far.
fn cpu_s(pid: u32) -> f64 {
    let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).unwrap();
    let after = &stat[stat.rfind(')').unwrap() + 2..];
    let f: Vec<&str> = after.split_whitespace().collect();
    // utime and stime are fields 14 and 15 of the line, 12 and 13 after the name.
    (f[11].parse::<f64>().unwrap() + f[12].parse::<f64>().unwrap()) / 100.0
}

// Issue 16, item 1: when the followed run ends, the screens keep its last
// frame, say it ended, and sit idle until the user quits (the engine's
// task ending must not leave the screens' loop waking for ever).
#[test]
fn a_followed_run_that_ends_stays_on_the_screens_idle() {
    let _one = one_at_a_time();
    let broker = Broker::start();
    let url = broker.url();
    let bin = env!("CARGO_BIN_EXE_termvel");
    let follower = Tmux::start("ended", &format!("{bin} follow {url} --topic pit/end"), 100, 30);
    follower.wait(20.0, "the follower waiting", |s| s.contains("waiting for the shared run's description"));
    let run = termvel(&[
        "rehearse",
        "--headless",
        "--speed",
        "32",
        "--no-record",
        "--share",
        &url,
        "--share-topic",
        "pit/end",
        "--share-events",
    ]);
    assert!(run.status.success(), "{}", stderr(&run));
    let s = follower.wait(60.0, "the run's end", |s| s.contains("run ended") && s.contains("SPEED"));
    assert!(!s.contains("joined late"), "it followed from the first batch:\n{s}");
    let pid = follower.pid();
    let before = cpu_s(pid);
    std::thread::sleep(Duration::from_secs(2));
    let used = cpu_s(pid) - before;
    // Measured on the test machine (debug build, 100×30): about 0.45 s
    // drawing twenty frames a second; about 1 s when the engine's task
    // ending left the screens' loop woken over and over.
    eprintln!("the ended follower used {used:.2} s of processor time in 2 s");
    assert!(used < 0.75, "the ended follower used {used} s of processor time in 2 s");
    follower.keys(&["q", "q"]);
    let end = follower.wait(10.0, "the exit", |s| s.contains("[exited"));
    eprintln!("{}", end.trim_start());
    assert!(end.contains("[exited 0 ]"), "{end}");
}

// Issue 16, item 2: with permission, a follower on the screens acknowledges
// and marks: started with --send-keys (and a username), `a` asks the
// reading station to acknowledge the alerts shown and `m` sends a mark; the
// station (taking orders with --share-accept-control) accepts them, and
// the follower's status line says so. Without --send-keys `a` stays
// read-only.
#[test]
fn a_follower_with_send_keys_acknowledges_and_marks_from_its_screens() {
    let _one = one_at_a_time();
    let broker = Broker::start();
    let url = broker.url();
    let bin = env!("CARGO_BIN_EXE_termvel");
    let follower = Tmux::start(
        "sender",
        &format!(
            "TERMVEL_SHARE_USERNAME=pit-eng TERMVEL_SHARE_PASSWORD=unused {bin} follow {url} --topic pit/keys --send-keys"
        ),
        200,
        50,
    );
    follower.wait(20.0, "the follower waiting", |s| s.contains("waiting for the shared run's description"));
    let station = Command::new(bin)
        .args(["rehearse", "--headless", "--speed", "2", "--no-record", "--share", &url])
        .args(["--share-topic", "pit/keys", "--share-events", "--share-accept-control"])
        .current_dir(root())
        // Its snapshot lines are not read here (a full pipe would stop it).
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // The derating alert, active and not yet acknowledged.
    follower
        .wait(90.0, "an active alert on the follower", |s| s.contains("battery derating") && s.contains("● active"));
    follower.keys(&["a"]);
    follower.wait(5.0, "the key's word", |s| s.contains("sent to the reading station"));
    let s = follower.wait(15.0, "the station's answer", |s| s.contains("accepted \"ack "));
    assert!(!s.contains("refused"), "{s}");
    follower.keys(&["m"]);
    follower.keys(&["l", "a", "t", "e", "Enter"]);
    follower.wait(15.0, "the mark's answer", |s| s.contains("accepted \"mark late\""));
    let out = station.wait_with_output().unwrap();
    let err = stderr(&out);
    assert!(out.status.success(), "{err}");
    assert!(err.contains("accepted from pit-eng: ack "), "{err}");
    assert!(err.contains("accepted from pit-eng: mark late"), "{err}");
    follower.keys(&["q", "q"]);
    let end = follower.wait(20.0, "the exit", |s| s.contains("[exited"));
    assert!(end.contains("[exited 0 ]"), "{end}");
}
