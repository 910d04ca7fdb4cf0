//! The contract between a running stream and whatever presents it: the
//! status a driver keeps, and the sink that receives every snapshot with
//! it (the screens keep the latest, the headless printer prints each one).

use std::path::PathBuf;
use std::sync::Arc;

use crate::engine::Snapshot;
use crate::event::{Event, SourceTable, TimeNs};

/// Where a running stream is.
#[derive(Clone, Debug, PartialEq)]
pub struct StreamStatus {
    /// Stream time of the first event (live: the session's start).
    pub start_ns: Option<TimeNs>,
    /// Stream time of the latest event fed.
    pub position_ns: Option<TimeNs>,
    /// Stream time of the stream's last event, when the source knows it
    /// (a file: from its tail), for a replay's total length.
    pub end_ns: Option<TimeNs>,
    /// Pace (a factor of real time; `f64::INFINITY` for as fast as
    /// possible). Live streams run at 1.
    pub speed: f64,
    pub paused: bool,
    pub finished: bool,
    /// The recording being written; `None` when not recording.
    pub recording: Option<PathBuf>,
    /// Times the recording's file stopped taking writes.
    pub record_failures: u64,
    /// While the file does not take writes: what failed (events are held
    /// in memory and the write retried).
    pub record_error: Option<String>,
    /// Events held in memory now, waiting for the file.
    pub record_held: u64,
    /// Events dropped because the memory buffer was full.
    pub record_dropped: u64,
    pub events_fed: u64,
    /// Snapshots the stream has produced up to its position (after a seek:
    /// as many as a straight run to there).
    pub snapshots: u64,
    /// How far (stream time) the recording of a replayed stream reaches: a
    /// mark made behind it cannot go into the copy in time order.
    pub recorded_to_ns: Option<TimeNs>,
}

impl Default for StreamStatus {
    fn default() -> StreamStatus {
        StreamStatus {
            start_ns: None,
            position_ns: None,
            end_ns: None,
            speed: 1.0,
            paused: false,
            finished: false,
            recording: None,
            record_failures: 0,
            record_error: None,
            record_held: 0,
            record_dropped: 0,
            events_fed: 0,
            snapshots: 0,
            recorded_to_ns: None,
        }
    }
}

/// Something that receives every snapshot with the stream's status. The
/// headless printer takes every one; a screen keeps only the latest.
pub trait SnapshotSink {
    fn snapshot(&mut self, snap: Arc<Snapshot>, status: &StreamStatus);
    /// Status changed without a new snapshot (pause, speed).
    fn status(&mut self, _status: &StreamStatus) {}
    /// An event the stream takes for the first time (not again after a
    /// seek back), after the engine and the recorder have it: a tap for
    /// sharing the raw events. Must not wait.
    fn event(&mut self, _ev: &Event, _sources: &SourceTable) {}
}

impl<F: FnMut(Arc<Snapshot>, &StreamStatus)> SnapshotSink for F {
    fn snapshot(&mut self, snap: Arc<Snapshot>, status: &StreamStatus) {
        self(snap, status)
    }
}
