//! stream: running a stream of events. The room that wires the others
//! together: [`crate::sources`] hand events in, the [`crate::engine`]
//! derives snapshots, the [`crate::record`]er keeps every event, and a
//! [`SnapshotSink`] (the screens, the headless printer, a test) presents
//! what comes out.
//!
//! Two drivers run a stream, and both take every event through the one
//! step of [`Pipeline::step`] (feed the engine, then write the engine's
//! notes and the event to the recording; a failed write is held in memory
//! and retried by the [`recorder`], raised as an alert and shown in the
//! [`StreamStatus`]):
//!
//! - [`paced`]: a finite stream ([`crate::sources::EventSource`]: a
//!   recording, a candump log, the rehearsal simulator) at a chosen pace,
//!   with pause, seek and single steps.
//! - [`realtime`]: live sources merged in arrival order, with clock ticks
//!   and arrival-to-applied latency.
//!
//! Both take [`Control`]s: operator actions and quit apply to every stream,
//! [`Playback`] controls to finite streams only (a live stream answers them
//! with its status unchanged).
//!
//! Imports go one way: this room imports the sources, engine, recorder and
//! headless printer; it never imports the screens (the ui imports it)
//! or the commands.

pub mod control;
pub mod json_printer;
pub mod latency;
pub mod paced;
pub mod pipeline;
pub mod realtime;
pub mod recorder;
pub mod sink;

pub use control::{Control, MAX_SPEED, MIN_SPEED, Operator, Playback, SPEED_STEPS};
pub use json_printer::JsonPrinter;
pub use latency::{LatencyHistogram, latency_histogram};
pub use pipeline::{Pass, Pipeline};
pub use recorder::{BACKLOG_BYTES, RecordingOutcome};
pub use sink::{SnapshotSink, StreamStatus};
