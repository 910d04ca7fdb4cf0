//! `termvel replay`: a recording or candump log through the engine, on the
//! screens or as headless JSON lines.

use std::io::Write;
use std::path::Path;
use std::process::ExitCode;
use std::sync::Arc;

use crate::cli::{ReplayArgs, RunOpts};
use crate::config::ConfigSet;
use crate::engine::{Engine, EngineOptions, Snapshot};
use crate::headless::{Summary, snapshot_json};
use crate::player::{self, PlayerOptions, PlayerOutcome, PlayerStatus};
use crate::record::Header;
use crate::session;
use crate::sources::FileSource;

/// The config set for a replay: `--config` if given, else the recording's
/// own embedded set, else (a candump log) the built-in demo set.
pub fn resolve_config(run: &RunOpts, header: &Header, file: &Path) -> Result<(ConfigSet, String), String> {
    if !run.config.is_empty() {
        return ConfigSet::load(&run.config).map(|c| (c, "from --config".into())).map_err(|e| e.to_string());
    }
    if header.is_termvel && !header.configs.is_empty() {
        let texts = header
            .configs
            .iter()
            .map(|c| (format!("{} (embedded in {})", c.origin, file.display()), c.text.clone()))
            .collect();
        return ConfigSet::from_texts(texts)
            .map(|c| (c, "embedded in the recording".into()))
            .map_err(|e| format!("{e}\nthe recording's embedded config is not valid for this build; give --config"));
    }
    Ok((ConfigSet::embedded(), "the built-in demo set (the log carries no config; give --config for your car)".into()))
}

pub fn run(args: ReplayArgs) -> anyhow::Result<ExitCode> {
    let src = match FileSource::open(&args.file) {
        Ok(s) => s,
        Err(e) => return super::unusable(e),
    };
    let (config, origin) = match resolve_config(&args.run, src.header(), &args.file) {
        Ok(c) => c,
        Err(e) => return super::unusable(e),
    };
    if !args.run.headless {
        return super::unusable("the screens are not built yet in this version; add --headless for JSON lines");
    }
    eprintln!("termvel: replaying {} with config {origin}", args.file.display());
    let config = Arc::new(config);
    let speed = if args.as_fast_as_possible { f64::INFINITY } else { args.speed.unwrap_or(f64::INFINITY) };
    let recorder = if args.run.no_record {
        None
    } else {
        let dir = args.run.record_dir.clone().unwrap_or_else(session::default_record_dir);
        match session::create_recording(&dir, "replay", &config, &src.header().sources) {
            Ok((w, p)) => {
                eprintln!("termvel: recording to {}", p.display());
                Some((w, p))
            }
            Err(e) => {
                return super::unusable(format!(
                    "cannot create a recording in {}: {e} (use --no-record or --record-dir)",
                    dir.display()
                ));
            }
        }
    };
    let opts = EngineOptions { snapshot_every_ns: args.run.every };
    let make_engine = {
        let config = config.clone();
        move || Engine::new(config.clone(), opts.clone())
    };
    let popts = PlayerOptions { speed, start_paused: args.paused, hold_at_end: false, recorder };
    let stdout = std::io::stdout();
    let mut printer = JsonPrinter { out: std::io::BufWriter::new(stdout.lock()), broken: false };
    let rt = tokio::runtime::Builder::new_current_thread().enable_time().build()?;
    let (_tx, rx) = tokio::sync::mpsc::channel(16);
    let outcome = rt.block_on(player::play(src, make_engine, popts, rx, &mut printer)).map_err(anyhow::Error::msg)?;
    let summary = summarise(&outcome);
    if !printer.broken {
        let _ = writeln!(printer.out, "{}", summary.json());
        let _ = printer.out.flush();
    }
    drop(printer);
    report_read_problems(&args.file, &outcome);
    if outcome.read_stats.events == 0 {
        return super::unusable(format!(
            "{}: no valid event in the file: not a termvel recording or candump log",
            args.file.display()
        ));
    }
    Ok(ExitCode::SUCCESS)
}

/// The closing summary of a played stream.
pub fn summarise(o: &PlayerOutcome) -> Summary {
    let snap_counters = o.engine.snapshot_at(o.engine.now_ns().unwrap_or(0), &o.sources).counters;
    let mut s = Summary::from_counters(&snap_counters);
    s.snapshots = o.snapshots;
    s.malformed_lines = o.read_stats.malformed;
    s.time_reversals = o.read_stats.time_reversals;
    s.torn_tail = o.read_stats.torn_tail.is_some();
    s.torn_tail_line = o.read_stats.torn_tail.as_ref().map(|t| t.line);
    s
}

/// Tells the user, on stderr, what was skipped and where.
pub fn report_read_problems(file: &Path, o: &PlayerOutcome) {
    let st = &o.read_stats;
    for e in st.errors.iter().take(10) {
        eprintln!("termvel: {}:{}: skipped: {}", file.display(), e.line, e.message);
    }
    if st.malformed > 10 {
        eprintln!("termvel: … and {} more malformed lines", st.malformed - 10);
    }
    if let Some(t) = &st.torn_tail {
        eprintln!(
            "termvel: {}:{}: the last line is torn ({} bytes without a line end, e.g. a power loss); everything before it was replayed",
            file.display(),
            t.line,
            t.bytes
        );
    }
}

struct JsonPrinter<W: Write> {
    out: W,
    /// The reader went away (`| head`): stop printing, keep running.
    broken: bool,
}

impl<W: Write> player::SnapshotSink for JsonPrinter<W> {
    fn snapshot(&mut self, snap: Arc<Snapshot>, _status: &PlayerStatus) {
        if self.broken {
            return;
        }
        if serde_json::to_writer(&mut self.out, &snapshot_json(&snap)).is_err() || self.out.write_all(b"\n").is_err() {
            self.broken = true;
        }
    }
}
