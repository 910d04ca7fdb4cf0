//! Snapshots: the immutable state the engine publishes at each interval of
//! stream time. Screens, reports and the headless JSON all read these.

use std::sync::Arc;

use crate::channel::ChannelId;
use crate::engine::{Alert, Derived};
use crate::event::{LinkState, SourceKind, TimeNs};

/// One channel as of the snapshot time.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelView {
    pub id: ChannelId,
    pub name: Arc<str>,
    /// The SI unit the value is in.
    pub unit: &'static str,
    /// What it measures (the screens pick its display unit from this).
    pub dimension: crate::units::Dimension,
    /// Latest value (valid or not: see `out_of_range`).
    pub value: f64,
    /// Seconds since the latest sample.
    pub age_s: f64,
    /// Range of valid values seen.
    pub min: f64,
    pub max: f64,
    /// No sample for the stale threshold (3 expected periods by default).
    pub stale: bool,
    /// The latest value was outside its valid range or not finite.
    pub out_of_range: bool,
    pub samples: u64,
}

/// Most sources viewed in one snapshot; more than a screen can list.
pub const MAX_SOURCE_VIEWS: usize = 1024;

/// One source as of the snapshot time.
#[derive(Clone, Debug, PartialEq)]
pub struct SourceView {
    pub name: String,
    pub kind: SourceKind,
    pub events: u64,
    pub rate_per_s: f64,
    pub gaps: u64,
    pub parse_errors: u64,
    pub last_error: Option<String>,
    /// Adapter replies read (a serial CAN adapter's acknowledgements,
    /// refusals, status, version and serial number).
    pub replies: u64,
    pub link: Option<LinkState>,
    /// Why the link is not up (the source's own words), while it is not.
    pub link_reason: Option<String>,
    /// Seconds since the source's last event.
    pub age_s: Option<f64>,
    pub error_frames: u64,
    /// Frames lost before termvel could read them.
    pub lost: u64,
}

/// Running totals.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize)]
pub struct Counters {
    pub events: u64,
    pub can_frames: u64,
    pub samples: u64,
    pub out_of_range: u64,
    pub parse_errors: u64,
    /// Gaps in stream time over 10 s that were jumped rather than filled.
    pub time_jumps: u64,
    /// Values rejected for being non-finite or too large to stay finite:
    /// decoded samples and derived quantities.
    pub rejected_values: u64,
    /// Adapter replies read over all sources.
    pub replies: u64,
}

/// The engine's published state.
#[derive(Clone, Debug, PartialEq)]
pub struct Snapshot {
    pub t_ns: TimeNs,
    pub channels: Vec<ChannelView>,
    /// The first [`MAX_SOURCE_VIEWS`] sources that have sent anything.
    pub sources: Vec<SourceView>,
    /// Sources beyond those, counted but not viewed (a log naming tens of
    /// thousands of interfaces would otherwise cost that many views a
    /// snapshot).
    pub sources_hidden: u64,
    pub counters: Counters,
    pub derived: Derived,
    /// Alerts to show, newest first.
    pub alerts: Vec<Alert>,
    /// Operator marks so far.
    pub marks: usize,
    /// Where the latest marks were made (at most [`MAX_MARK_PLACES`],
    /// oldest first), for the screens. Shared between snapshots: a new
    /// mark makes a new list, a snapshot only clones the pointer.
    pub mark_places: Arc<Vec<MarkPlace>>,
}

/// Marks a snapshot places (the screens draw a handful; a recording may hold
/// any number).
pub const MAX_MARK_PLACES: usize = 64;

/// An operator mark, where it was made.
#[derive(Clone, Debug, PartialEq)]
pub struct MarkPlace {
    pub t_ns: TimeNs,
    /// The distance run when the mark came, m.
    pub distance_m: f64,
    /// The operator's note, as typed (escape it before drawing).
    pub text: Arc<str>,
}

impl Snapshot {
    /// The view of a channel, if it has had samples.
    pub fn channel(&self, id: ChannelId) -> Option<&ChannelView> {
        self.channels.iter().find(|c| c.id == id)
    }

    /// The view of a channel by name.
    pub fn channel_named(&self, name: &str) -> Option<&ChannelView> {
        self.channels.iter().find(|c| &*c.name == name)
    }
}
