//! sources: where events come from. Sources do I/O and timestamping only;
//! they hand raw events on and never decode or derive.
//!
//! Two shapes: a finite, restartable stream read on demand
//! ([`EventSource`]: a recording or log on disk, the rehearsal simulator),
//! and live devices that push events into a bounded channel as they arrive
//! ([`link`]: the session clock, the channel, back-off and link state;
//! [`serial`], [`socketcan`]). The stream drivers (`crate::stream`) take
//! either; sources never import the drivers or the screens.

pub mod file;
pub mod link;
pub mod serial_port;
pub mod socketcan;

pub use file::{FileSource, NotEvents};

use crate::event::{Event, SourceTable};
use crate::record::{ReadStats, RecordingError};

/// A finite, restartable stream of events in stream order.
pub trait EventSource: Send {
    /// The next event; `None` at the end.
    fn next_event(&mut self) -> Option<Event>;
    /// The sources seen so far (may grow as the stream is read).
    fn sources(&self) -> &SourceTable;
    /// Starts again from the first event.
    fn rewind(&mut self) -> Result<(), RewindError>;
    /// Reading statistics (malformed lines, torn tail), if the source reads a file.
    fn read_stats(&self) -> ReadStats {
        ReadStats::default()
    }
    /// Where the stream stands between two events, for a player's
    /// checkpoint; `None` when this source can only start again.
    fn position(&self) -> Option<SourcePosition> {
        None
    }
    /// Stream time of the last event, when known before reading there (a
    /// file's tail), for a replay's total length.
    fn end_ns(&self) -> Option<crate::event::TimeNs> {
        None
    }
    /// Goes on from a position this source gave.
    fn resume(&mut self, _pos: &SourcePosition) -> Result<(), RewindError> {
        Err(RewindError::NoPositions)
    }
}

/// A place in a finite stream to go on from (a file's byte offset and the
/// reader's state there).
#[derive(Clone, Debug)]
pub struct SourcePosition(pub(crate) crate::record::ReaderPosition);

/// A finite stream that cannot start again from its first event.
#[derive(Debug, thiserror::Error)]
pub enum RewindError {
    /// The file could not be opened again (moved, deleted or made
    /// unreadable since it was first read).
    #[error(transparent)]
    Reopen(#[from] RecordingError),
    /// Asked to go on from a position, by a source that gives none.
    #[error("this stream cannot go on from a position, only start again")]
    NoPositions,
}
