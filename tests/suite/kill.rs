//! termvel killed while it records: SIGKILL at 100 random moments of a
//! rehearsal's recording (counted from the file's creation). Every file
//! must replay; a last line cut by the kill must be reported as a torn tail
//! (and skipped); and what is lost must be at
//! most the recorder's flush interval (100 ms of stream time): everything
//! before the last snapshot termvel printed, less 100 ms, is on disk.
//! (SIGTERM and SIGHUP, which close cleanly, are in `tui`.)

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use termvel::record::RecordingReader;

use crate::util::root;

/// A small deterministic generator for the kill moments (xorshift64*).
struct Rng(u64);

impl Rng {
    fn next_f64(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
}

struct Killed {
    /// Stream time of the last snapshot termvel printed before the kill.
    last_snapshot_ns: Option<i64>,
    recording: PathBuf,
    /// False when it had finished before the signal came.
    killed: bool,
}

fn kill_after(dir: &Path, after: Duration, flat_out: bool) -> Killed {
    std::fs::create_dir_all(dir).unwrap();
    let pace: &[&str] = if flat_out { &["--as-fast-as-possible"] } else { &["--speed", "8"] };
    let mut child = Command::new(env!("CARGO_BIN_EXE_termvel"))
        .args(["rehearse", "--headless"])
        .args(pace)
        .arg("--record-dir")
        .arg(dir)
        .current_dir(root())
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let out = child.stdout.take().unwrap();
    let reader = std::thread::spawn(move || {
        let mut last = None;
        for line in BufReader::new(out).lines().map_while(Result::ok) {
            // Only whole lines: the kill may cut the last one.
            if let Ok(v) = serde_json::from_str::<serde_json::Value>(&line) {
                last = v["t_ns"].as_i64().or(last);
            }
        }
        last
    });
    // The moment counts from the recording's creation: a kill before it
    // would test nothing (and on a busy machine start-up alone can take
    // longer than the earliest moments).
    let deadline = Instant::now() + Duration::from_secs(20);
    while std::fs::read_dir(dir).unwrap().next().is_none() {
        assert!(Instant::now() < deadline, "no recording in {} within 20 s", dir.display());
        std::thread::sleep(Duration::from_millis(1));
    }
    std::thread::sleep(after);
    // SAFETY: a signal to our own child.
    unsafe { libc::kill(child.id() as libc::pid_t, libc::SIGKILL) };
    let status = child.wait().unwrap();
    let killed = std::os::unix::process::ExitStatusExt::signal(&status) == Some(libc::SIGKILL);
    let last_snapshot_ns = reader.join().unwrap();
    let recording = std::fs::read_dir(dir).unwrap().next().expect("a recording was started").unwrap().path();
    Killed { last_snapshot_ns, recording, killed }
}

#[test]
fn sigkill_at_100_moments_loses_at_most_the_flush_interval() {
    let dir = tempfile::tempdir().unwrap();
    let mut rng = Rng(0x7E57_5EED_2026_1202);
    // Half paced at 8 times real time (the recorder mostly idle between
    // events), half as fast as possible (the recorder writing flat out,
    // where a kill can cut a line).
    let moments: Vec<(Duration, bool)> = (0..100)
        .map(|i| {
            let flat_out = i % 2 == 0;
            // The whole demo takes about 0.3 s flat out.
            let s = if flat_out { 0.02 + 0.2 * rng.next_f64() } else { 0.3 + 2.7 * rng.next_f64() };
            (Duration::from_secs_f64(s), flat_out)
        })
        .collect();
    let started = Instant::now();
    // Four at a time.
    let results: Vec<(Duration, Killed)> = std::thread::scope(|s| {
        let chunks: Vec<_> = moments.chunks(25).enumerate().collect();
        let handles: Vec<_> = chunks
            .into_iter()
            .map(|(c, ms)| {
                let base = dir.path().to_path_buf();
                s.spawn(move || {
                    ms.iter()
                        .enumerate()
                        .map(|(i, (m, flat))| (*m, kill_after(&base.join(format!("k{c}-{i}")), *m, *flat)))
                        .collect::<Vec<_>>()
                })
            })
            .collect();
        handles.into_iter().flat_map(|h| h.join().unwrap()).collect()
    });
    let (mut torn, mut worst_loss_ms, mut checked) = (0, 0.0f64, 0);
    for (after, k) in &results {
        let bytes = std::fs::read(&k.recording).unwrap();
        // Empty: killed between the file's creation and the header's one
        // write (a busy machine); nothing was cut and nothing was recorded.
        let ends_whole = bytes.is_empty() || bytes.ends_with(b"\n");
        // The reader takes it: header intact, events up to the tear.
        let mut r = RecordingReader::open(&k.recording).unwrap_or_else(|e| panic!("{after:?}: {e}"));
        let mut last_ns = None;
        while let Some(ev) = r.next_event() {
            last_ns = Some(ev.t_ns);
        }
        assert_eq!(r.stats.malformed, 0, "{after:?}: nothing malformed, only a possible torn tail");
        assert_eq!(
            r.stats.torn_tail.is_some(),
            !ends_whole,
            "{after:?}: a cut last line is reported as torn ({} bytes)",
            bytes.len()
        );
        torn += usize::from(!ends_whole);
        // And termvel replays it, saying so when the tail is torn.
        let o = Command::new(env!("CARGO_BIN_EXE_termvel"))
            .args(["replay", k.recording.to_str().unwrap(), "--headless", "--no-record"])
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        if let (Some(snap), Some(last)) = (k.last_snapshot_ns, last_ns) {
            assert!(o.status.success(), "{after:?}: {err}");
            assert_eq!(err.contains("torn"), !ends_whole, "{after:?}: {err}");
            // The snapshot at `snap` was printed once an event at or after
            // it had been fed, so every event before it had gone to the
            // recorder, which flushes every 100 ms of stream time.
            let loss_ms = (snap - last) as f64 * 1e-6;
            worst_loss_ms = worst_loss_ms.max(loss_ms);
            assert!(loss_ms <= 100.0 + 10.0, "{after:?}: {loss_ms:.1} ms of stream lost");
            checked += 1;
        }
    }
    eprintln!(
        "kill test: 100 SIGKILLs in {:.0} s; {torn} torn tails; worst loss {worst_loss_ms:.1} ms of stream over {checked} runs with a printed snapshot",
        started.elapsed().as_secs_f64()
    );
    let killed = results.iter().filter(|(_, k)| k.killed).count();
    eprintln!("  {killed} of 100 were killed mid-run (the others had finished)");
    assert!(killed >= 90, "most kills hit a running termvel: {killed}");
    assert!(checked >= 80, "most kills came after the first snapshot: {checked}");
}
