//! engine: all derived state, as a pure function of the ordered event stream.
//!
//! The engine never reads a clock: time comes from the events. It decodes
//! each event, updates the channel store and the per-source health, and at
//! every multiple of the snapshot interval of stream time publishes an
//! immutable [`Snapshot`]. The grid is aligned to whole multiples of the
//! interval since the epoch, so a live run and its replay snapshot at the
//! same instants and produce the same values, bit for bit.

pub mod snapshot;
pub mod store;

pub use snapshot::{ChannelView, Counters, Snapshot, SourceView};
pub use store::{ChannelState, ChannelStore};

use std::sync::Arc;

use crate::config::ConfigSet;
use crate::decode::{Decoder, Sample};
use crate::event::{Event, LinkState, NS_PER_S, Payload, SourceKind, SourceTable, TimeNs};

/// Settings of an engine run.
#[derive(Clone, Debug)]
pub struct EngineOptions {
    /// Stream time between snapshots, ns.
    pub snapshot_every_ns: TimeNs,
}

impl Default for EngineOptions {
    fn default() -> Self {
        EngineOptions { snapshot_every_ns: NS_PER_S / 10 }
    }
}

/// A gap in stream time longer than this is jumped over with one snapshot
/// rather than filled with identical ones.
pub const MAX_FILL_NS: TimeNs = 10 * NS_PER_S;

/// Per-source health, from the events alone.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct SourceHealth {
    pub events: u64,
    pub can_frames: u64,
    pub lines: u64,
    pub first_t_ns: Option<TimeNs>,
    pub last_t_ns: Option<TimeNs>,
    /// As last reported by the source (live inputs); `None` for recordings
    /// that never said.
    pub link: Option<LinkState>,
    pub link_reason: String,
    /// Arrival gaps longer than [`SourceHealth::GAP_NS`].
    pub gaps: u64,
    /// Events in the current and previous one-second windows, for the rate.
    window_start_ns: TimeNs,
    window_count: u64,
    pub rate_per_s: f64,
}

impl SourceHealth {
    /// A pause between two events of one source longer than this is a gap.
    pub const GAP_NS: TimeNs = NS_PER_S / 2;

    fn on_event(&mut self, t_ns: TimeNs) {
        if let Some(last) = self.last_t_ns
            && t_ns - last > Self::GAP_NS
        {
            self.gaps += 1;
        }
        self.events += 1;
        self.first_t_ns.get_or_insert(t_ns);
        self.last_t_ns = Some(t_ns);
        if t_ns - self.window_start_ns >= NS_PER_S {
            let elapsed = (t_ns - self.window_start_ns) as f64 * 1e-9;
            self.rate_per_s = if elapsed < 2.0 { self.window_count as f64 / elapsed } else { 0.0 };
            self.window_start_ns = t_ns;
            self.window_count = 0;
        }
        self.window_count += 1;
    }
}

/// The derived state of a run.
#[derive(Clone, Debug)]
pub struct Engine {
    pub config: Arc<ConfigSet>,
    pub decoder: Decoder,
    pub store: ChannelStore,
    opts: EngineOptions,
    /// Latest stream time seen.
    now_ns: Option<TimeNs>,
    next_snapshot_ns: Option<TimeNs>,
    pub health: Vec<SourceHealth>,
    pub counters: Counters,
    samples: Vec<Sample>,
    /// Channel names, shared by every snapshot.
    names: Vec<Arc<str>>,
    marks: Vec<(TimeNs, String)>,
}

impl Engine {
    pub fn new(config: Arc<ConfigSet>, opts: EngineOptions) -> Engine {
        let decoder = Decoder::new(&config.signals);
        let mut store = ChannelStore::new(config.alerts.limits.stale_after_periods);
        store.sync(&decoder.channels);
        let mut e = Engine {
            config,
            decoder,
            store,
            opts,
            now_ns: None,
            next_snapshot_ns: None,
            health: Vec::new(),
            counters: Counters::default(),
            samples: Vec::with_capacity(64),
            names: Vec::new(),
            marks: Vec::new(),
        };
        e.sync_names();
        e
    }

    fn sync_names(&mut self) {
        while self.names.len() < self.decoder.channels.len() {
            let id = crate::channel::ChannelId(self.names.len() as u16);
            self.names.push(Arc::from(self.decoder.channels.get(id).name.as_str()));
        }
    }

    /// Stream time of the latest event.
    pub fn now_ns(&self) -> Option<TimeNs> {
        self.now_ns
    }

    /// Operator marks seen so far.
    pub fn marks(&self) -> &[(TimeNs, String)] {
        &self.marks
    }

    /// Feeds one event. Snapshots due before the event's time are passed to
    /// `sink` first, so a snapshot at T holds exactly the events up to T.
    pub fn feed(&mut self, ev: &Event, sources: &SourceTable, sink: &mut impl FnMut(Snapshot)) {
        if !ev.is_input() {
            return;
        }
        self.advance_to(ev.t_ns, sources, sink);
        self.counters.events += 1;
        let idx = ev.source.0 as usize;
        if self.health.len() <= idx {
            self.health.resize(idx + 1, SourceHealth::default());
        }
        self.health[idx].on_event(ev.t_ns);
        match &ev.payload {
            Payload::Can(_) => {
                self.counters.can_frames += 1;
                self.health[idx].can_frames += 1;
            }
            Payload::Line(_) => self.health[idx].lines += 1,
            Payload::Mark(text) => self.marks.push((ev.t_ns, text.clone())),
            Payload::Link(state, reason) => {
                self.health[idx].link = Some(*state);
                self.health[idx].link_reason = reason.clone();
            }
            Payload::Ack(_) | Payload::Tick | Payload::Note(_) => {}
        }
        let kind = sources.get(ev.source).map_or(SourceKind::Can, |s| s.kind);
        self.samples.clear();
        self.decoder.decode(ev, kind, &mut self.samples);
        if self.decoder.channels.len() > self.store.len() {
            self.store.sync(&self.decoder.channels);
            self.sync_names();
        }
        for s in &self.samples {
            self.store.apply(s);
        }
        self.counters.samples += self.samples.len() as u64;
        if self.now_ns.is_none_or(|n| ev.t_ns > n) {
            self.now_ns = Some(ev.t_ns);
        }
    }

    /// Emits the snapshots due up to `t_ns`.
    fn advance_to(&mut self, t_ns: TimeNs, sources: &SourceTable, sink: &mut impl FnMut(Snapshot)) {
        let every = self.opts.snapshot_every_ns;
        let grid = |t: TimeNs| t.div_euclid(every) * every + if t.rem_euclid(every) == 0 { 0 } else { every };
        let Some(mut next) = self.next_snapshot_ns else {
            self.next_snapshot_ns = Some(grid(t_ns));
            return;
        };
        while t_ns > next {
            sink(self.snapshot_at(next, sources));
            next += every;
            if t_ns - next > MAX_FILL_NS {
                self.counters.time_jumps += 1;
                next = grid(t_ns);
            }
        }
        self.next_snapshot_ns = Some(next);
    }

    /// Emits the last snapshot, at the first grid time at or after the last
    /// event, so the end of the stream is always shown.
    pub fn finish(&mut self, sources: &SourceTable, sink: &mut impl FnMut(Snapshot)) {
        if let Some(next) = self.next_snapshot_ns {
            sink(self.snapshot_at(next, sources));
            self.next_snapshot_ns = Some(next + self.opts.snapshot_every_ns);
        }
    }

    /// The state at stream time `t_ns` (at or after the last event).
    pub fn snapshot_at(&self, t_ns: TimeNs, sources: &SourceTable) -> Snapshot {
        let mut channels = Vec::new();
        for (id, info) in self.decoder.channels.iter() {
            let Some(st) = self.store.get(id) else { continue };
            channels.push(ChannelView {
                id,
                name: self.names[id.0 as usize].clone(),
                unit: info.dimension.si_unit(),
                value: st.value,
                age_s: (t_ns - st.t_ns) as f64 * 1e-9,
                min: st.min,
                max: st.max,
                stale: self.store.is_stale(id, t_ns),
                out_of_range: !st.valid,
                samples: st.samples,
            });
        }
        let mut source_views = Vec::new();
        for (id, info) in sources.iter() {
            let Some(h) = self.health.get(id.0 as usize) else { continue };
            if h.events == 0 {
                continue;
            }
            let ds = self.decoder.source_stats(id);
            source_views.push(SourceView {
                name: info.name.clone(),
                kind: info.kind,
                events: h.events,
                rate_per_s: h.rate_per_s,
                gaps: h.gaps,
                parse_errors: ds.parse_errors,
                last_error: ds.last_error,
                link: h.link,
                age_s: h.last_t_ns.map(|t| (t_ns - t) as f64 * 1e-9),
            });
        }
        let mut counters = self.counters;
        counters.out_of_range = self.decoder.can.counters.out_of_range;
        counters.parse_errors = self.decoder.parse_errors();
        Snapshot { t_ns, channels, sources: source_views, counters }
    }
}
