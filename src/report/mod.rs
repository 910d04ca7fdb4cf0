//! After the run: the whole recording through the engine as fast as it will
//! go, and the story of the run from it: the summary (text or JSON), a
//! comparison of two runs, the plots and the export.
//!
//! [`Run::read`] keeps one [`Row`] per snapshot (100 ms of stream time) and
//! the engine's end state; [`Summary::of`] reduces that to the figures an
//! engineer asks for after a run. Nothing here reads a clock: a report of a
//! file is the same every time.

pub mod plots;
pub mod table_export;

use std::io::Read;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};

use serde::Serialize;

use crate::channel::ch;
use crate::config::ConfigSet;
use crate::engine::alerts::Transition;
use crate::engine::coastdown::{CoastDownFit, RoadLoadCurve};
use crate::engine::derived::AirOrigin;
use crate::engine::estimators::DeratingFit;
use crate::engine::{Derived, Engine, EngineOptions, Snapshot};
use crate::event::{NS_PER_S, Payload, SourceKind, TimeNs};
use crate::printable::{clipped, printable};
use crate::record::{RecordingError, RecordingReader, TimeOrderStats};

/// Snapshot interval of a report, ns.
pub const REPORT_EVERY_NS: TimeNs = NS_PER_S / 10;

/// Throttle at or above which boost counts as full boost.
pub const FULL_THROTTLE: f64 = 0.95;

/// One snapshot of the run, the quantities the summary and the plots use.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Row {
    /// Seconds since the first event.
    pub t_s: f64,
    pub distance_m: f64,
    pub speed_mps: Option<f64>,
    pub throttle: Option<f64>,
    pub brake: Option<f64>,
    pub boosting: bool,
    pub time_in_boost_s: f64,
    pub battery_power_w: Option<f64>,
    pub deliverable_w: Option<f64>,
    pub derating_ratio: Option<f64>,
    pub soc: Option<f64>,
    pub pack_temp_c: Option<f64>,
    pub road_load_w: Option<f64>,
    pub demand_w: Option<f64>,
    pub available_w: Option<f64>,
    pub air_density: f64,
    pub air_measured: bool,
    /// Latest braking point (to stop by the end of the zone), m.
    pub brake_point_m: Option<f64>,
}

impl Row {
    fn of(s: &Snapshot, start_ns: TimeNs) -> Row {
        let d = &s.derived;
        let fresh = |id| s.channel(id).filter(|c| !c.stale && !c.out_of_range).map(|c| c.value);
        Row {
            t_s: (s.t_ns - start_ns) as f64 * 1e-9,
            distance_m: d.distance_m,
            speed_mps: d.speed_mps,
            throttle: fresh(ch::DRIVER_THROTTLE),
            brake: fresh(ch::DRIVER_BRAKE),
            boosting: d.battery.boosting,
            time_in_boost_s: d.battery.time_in_boost_s,
            battery_power_w: d.battery.power_w,
            deliverable_w: d.battery.deliverable_w,
            derating_ratio: d.battery.derating_ratio,
            soc: d.battery.soc,
            pack_temp_c: d.battery.temp_c,
            road_load_w: d.road_load.map(|r| r.total_w),
            demand_w: d.road_load.map(|r| r.demand_w),
            available_w: d.road_load.map(|r| r.available_w),
            air_density: d.air_density,
            air_measured: matches!(d.air_origin, Some(AirOrigin::Measured { .. })),
            brake_point_m: d.braking.map(|b| b.point_m),
        }
    }
}

/// One source's data quality over the run.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SourceQuality {
    pub name: String,
    pub kind: &'static str,
    pub events: u64,
    /// Mean event rate over the time the source was heard, per s.
    pub rate_per_s: f64,
    /// Pauses longer than half a second.
    pub gaps: u64,
    pub parse_errors: u64,
    /// A serial CAN adapter's replies (acknowledgements, refusals, status,
    /// version, serial number): read and kept, neither frames nor errors.
    pub replies: u64,
    pub can_error_frames: u64,
    /// Frames the kernel dropped before termvel read them.
    pub lost_frames: u64,
    pub first_s: Option<f64>,
    pub last_s: Option<f64>,
}

/// A stretch during which a message's (or a serial source's) channels were
/// stale, from the alert timeline.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct StalePeriods {
    /// The message or source name.
    pub what: String,
    pub periods: usize,
    pub total_s: f64,
}

/// A run read through the engine.
#[derive(Clone, Debug)]
pub struct Run {
    pub file: PathBuf,
    pub config: Arc<ConfigSet>,
    pub config_origin: String,
    pub start_ns: TimeNs,
    /// The end of the run: the last snapshot (at or after the last event).
    pub end_ns: TimeNs,
    pub rows: Vec<Row>,
    /// The derived block at the end.
    pub last: Derived,
    /// The road load F = A + B·v + C·v² fitted on the coast-down segments,
    /// when there were enough.
    pub coast_curve: Option<RoadLoadCurve>,
    pub timeline: Vec<Transition>,
    pub marks: Vec<(TimeNs, String)>,
    /// A followed run's recording: where it lacks what the reading station
    /// had (its `share: ` session notes).
    pub share_gaps: Vec<(TimeNs, String)>,
    pub sources: Vec<SourceQuality>,
    pub events: u64,
    pub can_frames: u64,
    pub malformed_lines: u64,
    pub first_malformed: Option<String>,
    pub torn_tail_line: Option<u64>,
    /// Time jumps, gaps and reversals in the file, and what was done.
    pub time_order: TimeOrderStats,
}

/// Why a run cannot be reported on.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// The file could not be opened.
    #[error("{}: {source}", file.display())]
    Open {
        /// The file asked for.
        file: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// The file is not a recording that can be read (unreadable, or its
    /// header is damaged).
    #[error(transparent)]
    Recording(#[from] RecordingError),
    /// No usable config: the one given does not load, or the one embedded in
    /// the recording is not valid for this build. The message says which and
    /// what to do.
    #[error(transparent)]
    Config(#[from] crate::record::ConfigChoiceError),
    /// The file holds no events.
    #[error("{}: no events to report on", file.display())]
    NoEvents {
        /// The file read.
        file: PathBuf,
    },
}

/// A reader that counts the bytes read through it (for the progress bar).
struct Counting<R> {
    inner: R,
    read: Arc<AtomicU64>,
}

impl<R: Read> Read for Counting<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.read.fetch_add(n as u64, Ordering::Relaxed);
        Ok(n)
    }
}

impl Run {
    /// Reads `file` (a termvel recording or a candump log) through the
    /// engine. `config` overrides the recording's own (a candump log without
    /// one gets the built-in demo set). `progress` is called now and then
    /// with (bytes read, file size).
    pub fn read(file: &Path, config: &[PathBuf], progress: &mut dyn FnMut(u64, u64)) -> Result<Run, ReportError> {
        let f = std::fs::File::open(file).map_err(|source| ReportError::Open { file: file.to_path_buf(), source })?;
        crate::record::reader::check_readable(&f, file)?;
        let size = f.metadata().map(|m| m.len()).unwrap_or(0);
        let read = Arc::new(AtomicU64::new(0));
        let mut r =
            RecordingReader::new(Counting { inner: f, read: read.clone() }, &printable(&file.display().to_string()))?;
        let (cfg, origin) = r.header.config_set(config, file)?;
        let cfg = Arc::new(cfg);
        let mut engine = Engine::new(cfg.clone(), EngineOptions { snapshot_every_ns: REPORT_EVERY_NS });
        let mut rows = Vec::new();
        let mut coast = CoastDownFit::default();
        let mut start_ns: Option<TimeNs> = None;
        let mut n = 0u64;
        let mut share_gaps = Vec::new();
        while let Some(ev) = r.next_event() {
            if let Payload::Note(note) = &ev.payload {
                if let Some(what) = note.strip_prefix(crate::record::SHARE_NOTE_PREFIX) {
                    share_gaps.push((ev.t_ns, what.to_string()));
                }
                continue;
            }
            let start = *start_ns.get_or_insert(ev.t_ns);
            engine.feed(&ev, &r.header.sources, &mut |s| {
                coast.push_snapshot(&cfg.vehicle, &cfg.track, &s);
                rows.push(Row::of(&s, start))
            });
            n += 1;
            if n.is_multiple_of(1 << 16) {
                progress(read.load(Ordering::Relaxed), size);
            }
        }
        let sources_table = r.header.sources.clone();
        let start = start_ns.ok_or_else(|| ReportError::NoEvents { file: file.to_path_buf() })?;
        // The last snapshot lies at the first grid time at or after the last
        // event, and alerts can be raised there: the run ends at that
        // snapshot, so every stretch (and the duration) is measured to one
        // end that no alert comes after.
        let mut last_snapshot_ns = None;
        engine.finish(&sources_table, &mut |s| {
            last_snapshot_ns = Some(s.t_ns);
            coast.push_snapshot(&cfg.vehicle, &cfg.track, &s);
            rows.push(Row::of(&s, start))
        });
        progress(size, size);
        let end = engine.now_ns().unwrap_or(start).max(last_snapshot_ns.unwrap_or(start));
        let rel = |t: Option<TimeNs>| t.map(|t| (t - start) as f64 * 1e-9);
        let sources = sources_table
            .iter()
            .filter(|(_, s)| matches!(s.kind, SourceKind::Can | SourceKind::Nmea | SourceKind::Lines))
            .filter_map(|(id, s)| {
                let h = engine.health.get(id.0 as usize)?;
                let span = match (h.first_t_ns, h.last_t_ns) {
                    (Some(a), Some(b)) if b > a => (b - a) as f64 * 1e-9,
                    _ => 0.0,
                };
                Some(SourceQuality {
                    name: s.name.clone(),
                    kind: s.kind.as_str(),
                    events: h.events,
                    rate_per_s: if span > 0.0 { h.events as f64 / span } else { 0.0 },
                    gaps: h.gaps,
                    parse_errors: engine.decoder.source_stats(id).parse_errors,
                    replies: engine.decoder.source_stats(id).replies,
                    can_error_frames: h.error_frames,
                    lost_frames: h.lost,
                    first_s: rel(h.first_t_ns),
                    last_s: rel(h.last_t_ns),
                })
            })
            .collect();
        Ok(Run {
            file: file.to_path_buf(),
            config: cfg,
            config_origin: origin,
            start_ns: start,
            end_ns: end,
            rows,
            last: engine.derived().clone(),
            coast_curve: coast.fit(),
            timeline: engine.alerts.timeline.clone(),
            marks: engine.marks().to_vec(),
            share_gaps,
            sources,
            events: engine.counters.events,
            can_frames: engine.counters.can_frames,
            malformed_lines: r.stats.malformed,
            first_malformed: r.stats.errors.first().map(|e| r.describe(e)),
            torn_tail_line: r.stats.torn_tail.as_ref().map(|t| t.line),
            time_order: r.stats.time,
        })
    }

    /// The run's name for people: the file name.
    pub fn name(&self) -> String {
        self.file.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default()
    }

    fn t_s(&self, t_ns: TimeNs) -> f64 {
        (t_ns - self.start_ns) as f64 * 1e-9
    }
}

/// The derating curve measured over the run.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct DeratingSummary {
    /// Time constant of the decay, s.
    pub tau_s: f64,
    /// Ratio of rated power it decays toward.
    pub floor: f64,
    pub amplitude: f64,
    /// Fit quality: coefficient of determination and RMS residual (ratio).
    pub r2: f64,
    pub rms: f64,
    pub points: usize,
    /// Time in boost the points span, s.
    pub span_s: f64,
    pub converged: bool,
}

impl From<DeratingFit> for DeratingSummary {
    fn from(f: DeratingFit) -> Self {
        DeratingSummary {
            tau_s: f.tau_s,
            floor: f.floor,
            amplitude: f.amplitude,
            r2: f.r2,
            rms: f.rms,
            points: f.points,
            span_s: f.span_s,
            converged: f.converged,
        }
    }
}

/// Drag area and rolling resistance as estimated over the run.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct EstimateSummary {
    pub cda_m2: f64,
    pub cda_sd_m2: f64,
    pub crr: f64,
    pub crr_sd: f64,
    pub converged: bool,
    pub samples: u64,
    /// From coast-down segments alone, when there were any.
    pub coast: Option<CoastSummary>,
    pub coast_samples: u64,
    /// The road load F = A + B·v + C·v² (SAE J2263 form) fitted on the
    /// coast-down snapshots, with standard deviations; a steady headwind
    /// shows up in B.
    pub coast_curve: Option<RoadLoadCurve>,
}

#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct CoastSummary {
    pub cda_m2: f64,
    pub cda_sd_m2: f64,
    pub crr: f64,
    pub crr_sd: f64,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct AlertEntry {
    pub t_s: f64,
    pub key: String,
    /// `raise`, `clear` or `ack`.
    pub what: &'static str,
    pub severity: &'static str,
    pub message: String,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct MarkEntry {
    pub t_s: f64,
    pub text: String,
}

/// The summary of one run. Units are in the field names; times are seconds
/// from the first event of the recording.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Summary {
    pub file: String,
    pub config: String,
    pub vehicle: String,
    pub track: String,
    /// Wall-clock time of the first event, seconds since 1970 (UTC).
    pub start_unix_s: f64,
    pub duration_s: f64,
    pub distance_m: f64,
    pub peak_speed_mps: Option<f64>,
    pub peak_at_m: Option<f64>,
    pub peak_at_s: Option<f64>,
    pub target_speed_mps: f64,
    pub target_reached: bool,
    pub boost_start_s: Option<f64>,
    pub boost_start_m: Option<f64>,
    pub boost_start_to_peak_s: Option<f64>,
    pub time_in_boost_s: f64,
    /// In boost with the throttle at 95 % or more.
    pub time_at_full_boost_s: f64,
    /// Energy the battery delivered (discharge only), and net of any charge.
    pub battery_energy_out_j: f64,
    pub battery_energy_net_j: f64,
    pub soc_start: Option<f64>,
    pub soc_end: Option<f64>,
    pub pack_temp_start_c: Option<f64>,
    pub pack_temp_max_c: Option<f64>,
    pub derating: Option<DeratingSummary>,
    pub estimate: EstimateSummary,
    pub air_density_min_kg_m3: f64,
    pub air_density_max_kg_m3: f64,
    /// `measured`, `standard atmosphere`, or `both` when weather came and went.
    pub air_origin: &'static str,
    /// Where braking began (brake pedal above 10 %), and the latest braking
    /// point as computed at the peak.
    pub brake_start_m: Option<f64>,
    pub latest_brake_point_m: Option<f64>,
    pub stop_by_m: f64,
    pub alerts: Vec<AlertEntry>,
    pub marks: Vec<MarkEntry>,
    /// A followed run's recording: batches it did not receive, a late
    /// start (absent for a reading station's own recording).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub share_gaps: Vec<MarkEntry>,
    pub sources: Vec<SourceQuality>,
    pub stale: Vec<StalePeriods>,
    pub events: u64,
    pub can_frames: u64,
    pub malformed_lines: u64,
    pub torn_tail_line: Option<u64>,
    /// Time jumps, gaps and reversals in the file, and what was done.
    pub time_order: TimeOrderStats,
}

/// Integral of `f` over the rows (trapezoids), skipping gaps where either
/// end has no value.
fn integrate(rows: &[Row], f: impl Fn(&Row) -> Option<f64>) -> f64 {
    rows.windows(2)
        .filter_map(|w| {
            let (a, b) = (f(&w[0])?, f(&w[1])?);
            Some(0.5 * (a + b) * (w[1].t_s - w[0].t_s))
        })
        .sum()
}

impl Summary {
    pub fn of(run: &Run) -> Summary {
        let rows = &run.rows;
        let cfg = &run.config;
        let peak = rows.iter().filter_map(|r| r.speed_mps.map(|v| (v, r))).max_by(|a, b| a.0.total_cmp(&b.0));
        let boost_start = rows.iter().find(|r| r.boosting);
        let time_in_boost_s = rows.iter().map(|r| r.time_in_boost_s).fold(0.0, f64::max);
        let full: f64 = rows
            .windows(2)
            .filter(|w| w[0].boosting && w[0].throttle.is_some_and(|t| t >= FULL_THROTTLE))
            .map(|w| w[1].t_s - w[0].t_s)
            .sum();
        let out = integrate(rows, |r| r.battery_power_w.map(|p| p.max(0.0)));
        let net = integrate(rows, |r| r.battery_power_w);
        let first = |f: &dyn Fn(&Row) -> Option<f64>| rows.iter().find_map(f);
        let last = |f: &dyn Fn(&Row) -> Option<f64>| rows.iter().rev().find_map(f);
        let (rho_min, rho_max) = rows
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), r| (lo.min(r.air_density), hi.max(r.air_density)));
        let measured = rows.iter().filter(|r| r.air_measured).count();
        let air_origin = match measured {
            0 => "standard atmosphere",
            n if n == rows.len() => "measured",
            _ => "both",
        };
        let e = &run.last.estimate;
        let stale = stale_periods(&run.timeline, run.end_ns);
        let brake_start =
            peak.and_then(|(_, p)| rows.iter().find(|r| r.t_s >= p.t_s && r.brake.is_some_and(|b| b > 0.1)));
        Summary {
            file: run.file.display().to_string(),
            config: run.config_origin.clone(),
            vehicle: cfg.vehicle.name.clone(),
            track: cfg.track.name.clone(),
            start_unix_s: run.start_ns as f64 * 1e-9,
            duration_s: run.t_s(run.end_ns),
            distance_m: rows.last().map_or(0.0, |r| r.distance_m),
            peak_speed_mps: peak.map(|p| p.0),
            peak_at_m: peak.map(|p| p.1.distance_m),
            peak_at_s: peak.map(|p| p.1.t_s),
            target_speed_mps: cfg.track.target_speed_mps,
            target_reached: peak.is_some_and(|p| p.0 >= cfg.track.target_speed_mps),
            boost_start_s: boost_start.map(|r| r.t_s),
            boost_start_m: boost_start.map(|r| r.distance_m),
            boost_start_to_peak_s: match (boost_start, peak) {
                (Some(b), Some(p)) if p.1.t_s >= b.t_s => Some(p.1.t_s - b.t_s),
                _ => None,
            },
            time_in_boost_s,
            time_at_full_boost_s: full,
            battery_energy_out_j: out,
            battery_energy_net_j: net,
            soc_start: first(&|r| r.soc),
            soc_end: last(&|r| r.soc),
            pack_temp_start_c: first(&|r| r.pack_temp_c),
            pack_temp_max_c: rows.iter().filter_map(|r| r.pack_temp_c).reduce(f64::max),
            derating: run.last.battery.fit.map(DeratingSummary::from),
            estimate: EstimateSummary {
                cda_m2: e.cda_m2.value,
                cda_sd_m2: e.cda_m2.sd,
                crr: e.crr.value,
                crr_sd: e.crr.sd,
                converged: e.converged,
                samples: e.samples,
                coast: e.coast.map(|(c, r)| CoastSummary {
                    cda_m2: c.value,
                    cda_sd_m2: c.sd,
                    crr: r.value,
                    crr_sd: r.sd,
                }),
                coast_samples: e.coast_samples,
                coast_curve: run.coast_curve,
            },
            air_density_min_kg_m3: if rho_min.is_finite() { rho_min } else { f64::NAN },
            air_density_max_kg_m3: if rho_max.is_finite() { rho_max } else { f64::NAN },
            air_origin,
            brake_start_m: brake_start.map(|r| r.distance_m),
            latest_brake_point_m: peak.and_then(|p| p.1.brake_point_m),
            stop_by_m: cfg.track.stop_by_m(),
            alerts: run
                .timeline
                .iter()
                .map(|t| AlertEntry {
                    t_s: run.t_s(t.t_ns),
                    key: t.key.clone(),
                    what: t.what,
                    severity: t.severity.as_str(),
                    message: t.message.clone(),
                })
                .collect(),
            marks: run.marks.iter().map(|(t, m)| MarkEntry { t_s: run.t_s(*t), text: m.clone() }).collect(),
            share_gaps: run.share_gaps.iter().map(|(t, m)| MarkEntry { t_s: run.t_s(*t), text: m.clone() }).collect(),
            sources: run.sources.clone(),
            stale,
            events: run.events,
            can_frames: run.can_frames,
            malformed_lines: run.malformed_lines,
            torn_tail_line: run.torn_tail_line,
            time_order: run.time_order,
        }
    }
}

/// Stale stretches per message or serial source, from the `stale:` alerts'
/// raises and clears (an unfinished one runs to `end_ns`, the end of the
/// run: [`Run::end_ns`], the last snapshot). A stretch is never negative.
fn stale_periods(timeline: &[Transition], end_ns: TimeNs) -> Vec<StalePeriods> {
    let mut open: std::collections::BTreeMap<&str, (Option<TimeNs>, usize, TimeNs)> = std::collections::BTreeMap::new();
    for t in timeline {
        let Some(what) = t.key.strip_prefix("stale:") else { continue };
        let e = open.entry(what).or_insert((None, 0, 0));
        match t.what {
            "raise" if e.0.is_none() => {
                e.0 = Some(t.t_ns);
                e.1 += 1;
            }
            "clear" => {
                if let Some(since) = e.0.take() {
                    e.2 += (t.t_ns - since).max(0);
                }
            }
            _ => {}
        }
    }
    open.into_iter()
        .map(|(what, (since, n, total))| StalePeriods {
            what: what.to_string(),
            periods: n,
            total_s: (total + since.map_or(0, |s| (end_ns - s).max(0))) as f64 * 1e-9,
        })
        .collect()
}

fn kmh(v: Option<f64>) -> String {
    v.map_or("—".into(), |v| format!("{:.1} km/h", v * 3.6))
}

fn opt(v: Option<f64>, unit: &str, digits: usize) -> String {
    v.map_or("—".into(), |v| format!("{v:.digits$}{unit}"))
}

fn clock(t_s: f64) -> String {
    let m = (t_s / 60.0).floor();
    format!("{}:{:04.1}", m as i64, t_s - 60.0 * m)
}

/// The summary as text, for a terminal or a file.
pub fn text(s: &Summary) -> String {
    use std::fmt::Write as _;
    let mut o = String::new();
    // Every text from the file or its config is escaped: a recording must
    // not drive the reader's terminal.
    let _ = writeln!(o, "termvel report: {}", printable(&s.file));
    let _ =
        writeln!(o, "  {} on {}; config {}", clipped(&s.vehicle, 120), clipped(&s.track, 120), printable(&s.config));
    let _ = writeln!(o, "  {}", crate::CAUTION);
    let _ = writeln!(o);
    let _ = writeln!(o, "run");
    let _ = writeln!(o, "  duration             {}  ({:.1} s)", clock(s.duration_s), s.duration_s);
    let _ = writeln!(o, "  distance             {:.3} km", s.distance_m / 1000.0);
    let _ = writeln!(
        o,
        "  peak speed           {}  at {}, {}",
        kmh(s.peak_speed_mps),
        opt(s.peak_at_m.map(|m| m / 1000.0), " km", 3),
        opt(s.peak_at_s, " s", 1)
    );
    let _ = writeln!(
        o,
        "  target               {:.1} km/h: {}",
        s.target_speed_mps * 3.6,
        if s.target_reached { "reached" } else { "not reached" }
    );
    let _ = writeln!(
        o,
        "  braking              began at {}; latest braking point at the peak {}; stop by {:.3} km",
        opt(s.brake_start_m.map(|m| m / 1000.0), " km", 3),
        opt(s.latest_brake_point_m.map(|m| m / 1000.0), " km", 3),
        s.stop_by_m / 1000.0
    );
    let _ = writeln!(o);
    let _ = writeln!(o, "boost and battery");
    let _ = writeln!(
        o,
        "  boost from           {} ({}), peak {} later",
        opt(s.boost_start_s, " s", 1),
        opt(s.boost_start_m.map(|m| m / 1000.0), " km", 3),
        opt(s.boost_start_to_peak_s, " s", 1)
    );
    let _ =
        writeln!(o, "  time in boost        {:.1} s, at full boost {:.1} s", s.time_in_boost_s, s.time_at_full_boost_s);
    let _ = writeln!(
        o,
        "  energy from battery  {:.3} kWh out, {:.3} kWh net",
        s.battery_energy_out_j / 3.6e6,
        s.battery_energy_net_j / 3.6e6
    );
    let _ = writeln!(
        o,
        "  state of charge      {} → {}",
        opt(s.soc_start.map(|x| x * 100.0), " %", 1),
        opt(s.soc_end.map(|x| x * 100.0), " %", 1)
    );
    let _ = writeln!(
        o,
        "  pack temperature     {} at the start, {} at most",
        opt(s.pack_temp_start_c, " °C", 1),
        opt(s.pack_temp_max_c, " °C", 1)
    );
    match &s.derating {
        Some(d) => {
            let _ = writeln!(
                o,
                "  derating             ratio = {:.3} + {:.3}·e^(−t/{:.1} s) over {:.1} s in boost ({} points, R² {:.3}, rms {:.4}{})",
                d.floor,
                d.amplitude,
                d.tau_s,
                d.span_s,
                d.points,
                d.r2,
                d.rms,
                if d.converged { "" } else { ", not converged" }
            );
        }
        None => {
            let _ = writeln!(o, "  derating             no fit (too little time in boost)");
        }
    }
    let _ = writeln!(o);
    let _ = writeln!(o, "estimates");
    let e = &s.estimate;
    let _ = writeln!(
        o,
        "  drag area            {:.4} ± {:.4} m²{}",
        e.cda_m2,
        e.cda_sd_m2,
        if e.converged { "" } else { "  (not converged: prior)" }
    );
    let _ = writeln!(o, "  rolling resistance   {:.5} ± {:.5}  ({} samples)", e.crr, e.crr_sd, e.samples);
    match &e.coast {
        Some(c) => {
            let _ = writeln!(
                o,
                "  from coast-down      {:.4} ± {:.4} m², {:.5} ± {:.5}  ({} samples)",
                c.cda_m2, c.cda_sd_m2, c.crr, c.crr_sd, e.coast_samples
            );
        }
        None => {
            let _ = writeln!(o, "  from coast-down      no coast-down segments");
        }
    }
    if let Some(c) = &e.coast_curve {
        let _ = writeln!(
            o,
            "  road load (coast)    F = A + B·v + C·v²: A {:.1} ± {:.1} N, B {:.3} ± {:.3} N·s/m, C {:.4} ± {:.4} N·s²/m²",
            c.a_n, c.a_sd_n, c.b_n_s_per_m, c.b_sd_n_s_per_m, c.c_n_s2_per_m2, c.c_sd_n_s2_per_m2
        );
        let _ = writeln!(
            o,
            "                       over {:.0}–{:.0} km/h, {} points, residual rms {:.0} N",
            c.speed_min_mps * 3.6,
            c.speed_max_mps * 3.6,
            c.points,
            c.rms_n
        );
    }
    let _ = writeln!(
        o,
        "  air density          {:.4} to {:.4} kg/m³ ({})",
        s.air_density_min_kg_m3, s.air_density_max_kg_m3, s.air_origin
    );
    let _ = writeln!(o);
    let _ = writeln!(o, "marks ({})", s.marks.len());
    for m in &s.marks {
        let _ = writeln!(o, "  {:>8}  {}", clock(m.t_s), clipped(&m.text, 500));
    }
    if !s.share_gaps.is_empty() {
        let _ = writeln!(o);
        let _ = writeln!(o, "not received from the reading station ({})", s.share_gaps.len());
        for g in &s.share_gaps {
            let _ = writeln!(o, "  {:>8}  {}", clock(g.t_s), clipped(&g.text, 500));
        }
    }
    let raises = s.alerts.iter().filter(|a| a.what == "raise").count();
    let _ = writeln!(o);
    let _ = writeln!(o, "alerts ({raises} raised)");
    for a in s.alerts.iter().filter(|a| a.what != "ack") {
        let _ = writeln!(o, "  {:>8}  {:<5} {:<7} {}", clock(a.t_s), a.what, a.severity, clipped(&a.message, 500));
    }
    let _ = writeln!(o);
    let _ = writeln!(o, "data quality");
    let _ = writeln!(
        o,
        "  {:<10} {:<6} {:>10} {:>9} {:>6} {:>10} {:>10} {:>6}",
        "source", "kind", "events", "per s", "gaps", "bad lines", "CAN errors", "lost"
    );
    for q in &s.sources {
        let _ = writeln!(
            o,
            "  {:<10} {:<6} {:>10} {:>9.1} {:>6} {:>10} {:>10} {:>6}",
            clipped(&q.name, 64),
            q.kind,
            q.events,
            q.rate_per_s,
            q.gaps,
            q.parse_errors,
            q.can_error_frames,
            q.lost_frames
        );
    }
    for st in &s.stale {
        let _ =
            writeln!(o, "  stale: {:<24} {} period(s), {:.1} s in all", clipped(&st.what, 64), st.periods, st.total_s);
    }
    let t = &s.time_order;
    if t.is_clean() {
        let _ = writeln!(o, "  time order: no jump, gap or step back");
    } else {
        let _ = writeln!(
            o,
            "  time order: {} isolated jumps, {} gaps, time went back {} times ({} put back in order, {} applied in file order)",
            t.isolated_jumps, t.gaps, t.time_reversals, t.reordered, t.applied_out_of_order
        );
        for line in t.describe(&s.file) {
            let _ = writeln!(o, "    {}", printable(&line));
        }
    }
    let _ = writeln!(
        o,
        "  {} events, {} CAN frames; {} malformed lines{}",
        s.events,
        s.can_frames,
        s.malformed_lines,
        s.torn_tail_line.map_or(String::new(), |l| format!("; torn last line {l} (skipped)"))
    );
    o
}

/// Two runs side by side, with the differences (B − A).
pub fn comparison_text(a: &Summary, b: &Summary) -> String {
    use std::fmt::Write as _;
    let mut o = String::new();
    let _ = writeln!(o, "termvel comparison");
    let _ = writeln!(o, "  A  {}", printable(&a.file));
    let _ = writeln!(o, "  B  {}", printable(&b.file));
    let _ = writeln!(o, "  {}", crate::CAUTION);
    let _ = writeln!(o);
    let _ = writeln!(o, "  {:<28} {:>14} {:>14} {:>14}", "", "A", "B", "B − A");
    let mut line = |label: &str, x: Option<f64>, y: Option<f64>, scale: f64, digits: usize| {
        let f = |v: Option<f64>| v.map_or("—".into(), |v| format!("{:.digits$}", v * scale));
        let d = match (x, y) {
            (Some(x), Some(y)) => format!("{:+.digits$}", (y - x) * scale),
            _ => "—".into(),
        };
        let _ = writeln!(o, "  {label:<28} {:>14} {:>14} {:>14}", f(x), f(y), d);
    };
    line("duration, s", Some(a.duration_s), Some(b.duration_s), 1.0, 1);
    line("distance, km", Some(a.distance_m), Some(b.distance_m), 1e-3, 3);
    line("peak speed, km/h", a.peak_speed_mps, b.peak_speed_mps, 3.6, 1);
    line("peak at, km", a.peak_at_m, b.peak_at_m, 1e-3, 3);
    line("boost start to peak, s", a.boost_start_to_peak_s, b.boost_start_to_peak_s, 1.0, 1);
    line("time in boost, s", Some(a.time_in_boost_s), Some(b.time_in_boost_s), 1.0, 1);
    line("battery energy out, kWh", Some(a.battery_energy_out_j), Some(b.battery_energy_out_j), 1.0 / 3.6e6, 3);
    line("state of charge at end, %", a.soc_end, b.soc_end, 100.0, 1);
    line("pack temperature max, °C", a.pack_temp_max_c, b.pack_temp_max_c, 1.0, 1);
    line("derating floor", a.derating.map(|d| d.floor), b.derating.map(|d| d.floor), 1.0, 3);
    line("derating time constant, s", a.derating.map(|d| d.tau_s), b.derating.map(|d| d.tau_s), 1.0, 1);
    line("drag area, m²", Some(a.estimate.cda_m2), Some(b.estimate.cda_m2), 1.0, 4);
    line("rolling resistance", Some(a.estimate.crr), Some(b.estimate.crr), 1.0, 5);
    line("air density min, kg/m³", Some(a.air_density_min_kg_m3), Some(b.air_density_min_kg_m3), 1.0, 4);
    line(
        "alerts raised",
        Some(a.alerts.iter().filter(|x| x.what == "raise").count() as f64),
        Some(b.alerts.iter().filter(|x| x.what == "raise").count() as f64),
        1.0,
        0,
    );
    o
}

/// The JSON document of `termvel report --json`: one run, or two with
/// their differences.
pub fn json(runs: &[Summary]) -> serde_json::Value {
    let mut v = serde_json::json!({
        "termvel_report": 1,
        "caution": crate::CAUTION,
        "runs": runs,
    });
    if let [a, b] = runs {
        let d = |x: Option<f64>, y: Option<f64>| match (x, y) {
            (Some(x), Some(y)) => serde_json::json!(y - x),
            _ => serde_json::Value::Null,
        };
        v["difference"] = serde_json::json!({
            "peak_speed_mps": d(a.peak_speed_mps, b.peak_speed_mps),
            "boost_start_to_peak_s": d(a.boost_start_to_peak_s, b.boost_start_to_peak_s),
            "time_in_boost_s": b.time_in_boost_s - a.time_in_boost_s,
            "battery_energy_out_j": b.battery_energy_out_j - a.battery_energy_out_j,
            "derating_floor": d(a.derating.map(|x| x.floor), b.derating.map(|x| x.floor)),
            "derating_tau_s": d(a.derating.map(|x| x.tau_s), b.derating.map(|x| x.tau_s)),
            "cda_m2": b.estimate.cda_m2 - a.estimate.cda_m2,
            "crr": b.estimate.crr - a.estimate.crr,
        });
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(file: &Path) -> Result<Run, ReportError> {
        Run::read(file, &[], &mut |_, _| {})
    }

    #[test]
    fn errors_say_which_file_and_why() {
        let dir = tempfile::tempdir().unwrap();
        let missing = dir.path().join("missing.tvrec");
        let e = read(&missing).unwrap_err();
        assert!(matches!(&e, ReportError::Open { file, .. } if file == &missing), "{e:?}");
        assert!(e.to_string().starts_with(&format!("{}: ", missing.display())), "{e}");

        let empty = dir.path().join("empty.log");
        std::fs::write(&empty, b"").unwrap();
        let e = read(&empty).unwrap_err();
        assert!(matches!(&e, ReportError::NoEvents { file } if file == &empty), "{e:?}");
        assert_eq!(e.to_string(), format!("{}: no events to report on", empty.display()));

        // A damaged header: the reader's own error, unchanged.
        let damaged = dir.path().join("damaged.tvrec");
        std::fs::write(&damaged, b"%termvel-recording 1\n%source can0 nonsense\n").unwrap();
        let e = read(&damaged).unwrap_err();
        assert!(matches!(e, ReportError::Recording(RecordingError::Header { .. })), "{e:?}");
    }

    #[test]
    fn a_candump_log_reads_with_the_built_in_config() {
        let dir = tempfile::tempdir().unwrap();
        let log = dir.path().join("short.log");
        std::fs::write(&log, b"(1.000000) can0 123#00\n(1.500000) can0 123#01\n").unwrap();
        let run = read(&log).unwrap();
        assert_eq!((run.events, run.can_frames, run.name().as_str()), (2, 2, "short.log"));
    }

    #[test]
    fn an_alert_raised_at_the_last_snapshot_lasts_zero_not_less() {
        // Issue 14, item 6: a stale alert raised at the last snapshot, after
        // the last event, was measured to the last event: `-0.04 s in all`.
        // pt_state (0x0C4, every 10 ms) stops at 1.06 s; the last snapshot
        // is at 1.1 s, where its channels are over three periods old.
        let dir = tempfile::tempdir().unwrap();
        let log = dir.path().join("ends-stale.log");
        let text: String =
            (0..=106).map(|k| format!("({:.6}) can0 0C4#00000F0000001000\n", 100.0 + k as f64 * 0.01)).collect();
        std::fs::write(&log, text).unwrap();
        let run = read(&log).unwrap();
        let raised = run.timeline.iter().find(|t| t.key == "stale:pt_state" && t.what == "raise").expect("raised");
        assert!(raised.t_ns > run.start_ns + 1_060_000_000, "raised after the last event: {raised:?}");
        assert!(run.end_ns >= raised.t_ns, "no alert after the end of the run");
        let s = Summary::of(&run);
        let st = s.stale.iter().find(|st| st.what == "pt_state").expect("a stale period");
        assert_eq!(st.periods, 1);
        assert!(st.total_s >= 0.0 && st.total_s < 0.05, "{st:?}");
        assert!((s.duration_s - 1.1).abs() < 1e-9, "the run ends at its last snapshot: {}", s.duration_s);
        assert!(s.alerts.iter().all(|a| a.t_s <= s.duration_s), "{:?}", s.alerts);
    }
}
