//! A shared run rebuilt on a follower: the retained description gives the
//! config set and the source table, and the raw event batches
//! (`--share-events` on the reading station) give the events, so the
//! follower's own engine derives every number it shows, the same numbers as
//! the reading station's when nothing was lost.
//!
//! [`RemoteFeed`] takes the checked messages in arrival order (pure: no
//! I/O, no clock) and hands back what to do: start an engine from a
//! [`RemoteRun`], feed events, or stop. Batches are numbered by the
//! publisher ([`super::payload::events`]); a number skipped is batches
//! lost (the link was down, the publisher's queue was full, this station
//! could not keep up), and the feed puts a session note where they were
//! ([`Gap::note`]), so a recording made from the batches says where it
//! has a hole. A follower that joins late starts at the first batch it
//! receives and says so ([`Late::note`]).

use serde_json::Value;

use crate::config::{ConfigErrors, ConfigSet};
use crate::event::{Event, Payload, SESSION, SourceKind, SourceTable, TimeNs};

/// Why a description or a batch cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum RemoteError {
    /// The config texts the description carries do not load in this build.
    #[error("the shared run's config does not load here:\n{0}")]
    Config(ConfigErrors),
    /// A field is missing or of the wrong type.
    #[error("the shared {kind} has no valid \"{field}\"")]
    Field { kind: &'static str, field: &'static str },
    /// The description's sources cannot be numbered as the publisher's.
    #[error("the shared run's sources cannot be rebuilt: {0}")]
    Sources(String),
}

/// The shared run as its description tells it.
#[derive(Clone, Debug)]
pub struct RemoteRun {
    pub config: ConfigSet,
    /// Numbered as the publisher numbers them (the event lines name them).
    pub sources: SourceTable,
    pub snapshot_every_ns: TimeNs,
    /// `live`, `rehearse` or `replay`.
    pub command: String,
    pub started_unix_ns: i64,
    /// Whether the publisher shares its raw events (`--share-events`); a
    /// description without the field (an older publisher) does not.
    pub event_batches: bool,
}

fn field<'a>(v: &'a Value, kind: &'static str, name: &'static str) -> Result<&'a Value, RemoteError> {
    v.get(name).filter(|x| !x.is_null()).ok_or(RemoteError::Field { kind, field: name })
}

impl RemoteRun {
    /// Rebuilds the run from its description ([`super::payload::description`]).
    pub fn from_description(v: &Value) -> Result<RemoteRun, RemoteError> {
        const K: &str = "description";
        let bad = |f| RemoteError::Field { kind: K, field: f };
        let texts: Vec<(String, String)> = field(v, K, "config")?
            .as_array()
            .ok_or(bad("config"))?
            .iter()
            .map(|t| {
                let origin = t["origin"].as_str().unwrap_or("(shared)");
                Some((format!("{origin} (shared)"), t["text"].as_str()?.to_string()))
            })
            .collect::<Option<_>>()
            .ok_or(bad("config"))?;
        let mut config = ConfigSet::from_texts(texts).map_err(RemoteError::Config)?;
        // The origins as the publisher gave them: a recording made here
        // embeds the same texts under the same names.
        for (t, shared) in config.texts.iter_mut().zip(v["config"].as_array().into_iter().flatten()) {
            if let Some(o) = shared["origin"].as_str()
                && shared["kind"].as_str() == Some(t.kind.as_str())
            {
                t.origin = o.to_string();
            }
        }
        let mut sources = SourceTable::default();
        for s in field(v, K, "sources")?.as_array().ok_or(bad("sources"))? {
            let (Some(id), Some(name), Some(kind)) =
                (s["id"].as_u64(), s["name"].as_str(), s["kind"].as_str().and_then(SourceKind::parse))
            else {
                return Err(bad("sources"));
            };
            if name.is_empty() || name.len() > crate::record::MAX_NAME {
                return Err(RemoteError::Sources(format!("a source name of {} bytes", name.len())));
            }
            let got = sources.try_intern(name, kind).map_err(|e| RemoteError::Sources(e.to_string()))?;
            if u64::from(got.0) != id || sources.get(got).map(|i| i.kind) != Some(kind) {
                return Err(RemoteError::Sources(format!(
                    "{} is source {id} there and would be {} here",
                    crate::printable::clipped(name, 40),
                    got.0
                )));
            }
        }
        let every_s = field(v, K, "snapshot_every_s")?.as_f64().filter(|s| *s > 0.0 && *s <= 60.0);
        Ok(RemoteRun {
            config,
            sources,
            snapshot_every_ns: (every_s.ok_or(bad("snapshot_every_s"))? * 1e9).round() as TimeNs,
            command: v["command"].as_str().unwrap_or("?").to_string(),
            started_unix_ns: field(v, K, "started_unix_ns")?.as_i64().ok_or(bad("started_unix_ns"))?,
            event_batches: v["event_batches"].as_bool().unwrap_or(false),
        })
    }
}

/// One batch of raw events, parsed.
#[derive(Clone, Debug, PartialEq)]
pub struct Batch {
    pub seq: u64,
    /// Events in the publisher's batches before this one.
    pub events_before: u64,
    /// Events the publisher put in it.
    pub count: u64,
    pub first_t_ns: Option<TimeNs>,
    pub events: Vec<Event>,
    /// Lines that did not parse (named, with their line in the batch).
    pub bad_lines: Vec<String>,
}

/// Parses an `events` payload with the run's sources (a CAN interface not
/// in the table is added, as a replay of a log adds it). The lines are
/// read by the recording reader itself, behind a header that declares the
/// sources, so a line means here exactly what it means in a recording.
pub fn parse_batch(v: &Value, sources: &mut SourceTable) -> Result<Batch, RemoteError> {
    const K: &str = "event batch";
    let seq = field(v, K, "seq")?.as_u64().filter(|s| *s > 0).ok_or(RemoteError::Field { kind: K, field: "seq" })?;
    let events_before =
        field(v, K, "events_before")?.as_u64().ok_or(RemoteError::Field { kind: K, field: "events_before" })?;
    let lines = field(v, K, "lines")?.as_str().ok_or(RemoteError::Field { kind: K, field: "lines" })?;
    let mut text = Vec::with_capacity(lines.len() + 64 * sources.len() + 64);
    text.extend_from_slice(format!("{} {}\n", crate::record::MAGIC, crate::record::VERSION).as_bytes());
    let mut header_lines = 1;
    for (_, s) in sources.iter() {
        text.extend_from_slice(
            format!("%source {} {}\n", crate::record::escaped_name(&s.name), s.kind.as_str()).as_bytes(),
        );
        header_lines += 1;
    }
    text.extend_from_slice(b"%end-header\n");
    header_lines += 1;
    text.extend_from_slice(lines.as_bytes());
    let mut r =
        crate::record::RecordingReader::new(&text[..], "batch").map_err(|e| RemoteError::Sources(e.to_string()))?;
    let events: Vec<Event> = std::iter::from_fn(|| r.next_event()).collect();
    let bad_lines = r
        .stats
        .errors
        .iter()
        .map(|e| format!("event batch {seq}, line {}: {}", e.line.saturating_sub(header_lines), e.message))
        .collect();
    *sources = r.header.sources.clone();
    let count = v["count"].as_u64().unwrap_or(events.len() as u64);
    Ok(Batch { seq, events_before, count, first_t_ns: v["first_t_ns"].as_i64(), events, bad_lines })
}

/// Batches that did not arrive, between two that did.
#[derive(Clone, Debug, PartialEq)]
pub struct Gap {
    pub batches: u64,
    pub events: u64,
    /// Stream time of the last event before the gap and of the first after.
    pub after_t_ns: Option<TimeNs>,
    pub before_t_ns: Option<TimeNs>,
}

fn secs(t: Option<TimeNs>) -> String {
    t.map_or("?".into(), |t| format!("{:.3} s", t as f64 * 1e-9))
}

impl Gap {
    /// The session note a recording keeps where the gap is.
    pub fn note(&self) -> String {
        format!(
            "{}{} event batch{} lost between {} and {} ({} events)",
            crate::record::SHARE_NOTE_PREFIX,
            self.batches,
            if self.batches == 1 { "" } else { "es" },
            secs(self.after_t_ns),
            secs(self.before_t_ns),
            self.events
        )
    }
}

/// The first batch a follower received was not the run's first.
#[derive(Clone, Debug, PartialEq)]
pub struct Late {
    pub seq: u64,
    /// Events of the batches before it, not received.
    pub events_before: u64,
    pub t_ns: Option<TimeNs>,
}

impl Late {
    pub fn note(&self) -> String {
        format!(
            "{}followed from event batch {} at {}: {} events before it were not received (sums such as energy and distance start here)",
            crate::record::SHARE_NOTE_PREFIX,
            self.seq,
            secs(self.t_ns),
            self.events_before
        )
    }
}

/// What a follower received and lost, for its summary and its screens.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RemoteStats {
    pub batches: u64,
    pub events: u64,
    pub batches_lost: u64,
    pub events_lost: u64,
    /// Batches delivered twice (QoS 1 may) or behind ones already taken.
    pub duplicates: u64,
    /// Batches this station could not take in time (its engine behind).
    pub dropped_here: u64,
    pub bad_lines: u64,
    pub bad_batches: u64,
    pub late: Option<Late>,
    /// Every gap, in order (the first ones; all are counted above).
    pub gaps: Vec<Gap>,
}

impl RemoteStats {
    pub fn json(&self) -> Value {
        serde_json::json!({
            "event_batches": self.batches,
            "events": self.events,
            "batches_lost": self.batches_lost,
            "events_lost": self.events_lost,
            "duplicates": self.duplicates,
            "dropped_here": self.dropped_here,
            "bad_lines": self.bad_lines,
            "bad_batches": self.bad_batches,
            "joined_late": self.late.as_ref().map(|l| serde_json::json!({
                "seq": l.seq, "events_before": l.events_before, "t": l.t_ns.map(|t| t as f64 * 1e-9),
            })),
            "gaps": self.gaps.iter().take(MAX_GAPS_LISTED).map(|g| serde_json::json!({
                "batches": g.batches, "events": g.events,
                "after_t": g.after_t_ns.map(|t| t as f64 * 1e-9),
                "before_t": g.before_t_ns.map(|t| t as f64 * 1e-9),
            })).collect::<Vec<_>>(),
        })
    }
}

/// Gaps listed one by one in a summary (all are counted).
pub const MAX_GAPS_LISTED: usize = 100;

/// Puts received batches in the run's order: the events of each new batch,
/// after a note where batches were lost; a batch seen again is dropped.
#[derive(Debug, Default)]
pub struct BatchOrder {
    next_seq: Option<u64>,
    /// Events the publisher had sent before the next expected batch.
    next_events_before: u64,
    last_t_ns: Option<TimeNs>,
    pub stats: RemoteStats,
}

impl BatchOrder {
    /// Takes `b`; returns the events to feed in order (notes first), empty
    /// for a batch seen again.
    pub fn take(&mut self, b: Batch) -> Vec<Event> {
        let first_t = b.events.first().map(|e| e.t_ns).or(b.first_t_ns);
        let mut out = Vec::with_capacity(b.events.len() + 1);
        let note_t = first_t.or(self.last_t_ns).unwrap_or(0);
        match self.next_seq {
            Some(next) if b.seq < next => {
                self.stats.duplicates += 1;
                return Vec::new();
            }
            Some(next) if b.seq > next => {
                let gap = Gap {
                    batches: b.seq - next,
                    events: b.events_before.saturating_sub(self.next_events_before),
                    after_t_ns: self.last_t_ns,
                    before_t_ns: first_t,
                };
                self.stats.batches_lost += gap.batches;
                self.stats.events_lost += gap.events;
                out.push(Event::new(note_t, SESSION, Payload::Note(gap.note())));
                if self.stats.gaps.len() < MAX_GAPS_LISTED {
                    self.stats.gaps.push(gap);
                }
            }
            Some(_) => {}
            None if b.seq > 1 || b.events_before > 0 => {
                let late = Late { seq: b.seq, events_before: b.events_before, t_ns: first_t };
                out.push(Event::new(note_t, SESSION, Payload::Note(late.note())));
                self.stats.late = Some(late);
            }
            None => {}
        }
        self.next_seq = Some(b.seq + 1);
        self.next_events_before = b.events_before + b.count;
        self.stats.batches += 1;
        self.stats.events += b.events.len() as u64;
        self.stats.bad_lines += b.bad_lines.len() as u64;
        if let Some(last) = b.events.last() {
            self.last_t_ns = Some(last.t_ns);
        }
        out.extend(b.events);
        out
    }

    /// Whether any batch was taken yet.
    pub fn started(&self) -> bool {
        self.next_seq.is_some()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::event::{NS_PER_S, SourceId};
    use crate::share::payload;

    fn run_sources() -> SourceTable {
        let mut s = SourceTable::default();
        s.intern("can0", SourceKind::Can);
        s.intern("gnss0", SourceKind::Nmea);
        s
    }

    fn batch_of(seq: u64, before: u64, events: &[Event], sources: &SourceTable) -> Value {
        payload::events(seq, before, events, sources)
    }

    fn line(t_s: f64, src: SourceId) -> Event {
        Event::new((t_s * 1e9) as TimeNs, src, Payload::Line(b"$GPRMC,x*00".to_vec()))
    }

    #[test]
    fn a_description_rebuilds_the_config_and_the_sources() {
        let config = ConfigSet::embedded();
        let sources = run_sources();
        let mut d = payload::description(&payload::RunDescription {
            config: &config,
            command: "rehearse",
            started_unix_ns: 5,
            snapshot_every_ns: 250_000_000,
            sources: &sources,
        });
        d["event_batches"] = serde_json::json!(true);
        let r = RemoteRun::from_description(&d).unwrap();
        assert_eq!(r.config.texts, config.texts, "the same texts under the same names");
        assert_eq!(r.sources, sources);
        assert_eq!((r.snapshot_every_ns, r.event_batches, r.started_unix_ns), (250_000_000, true, 5));
        d["sources"][2]["id"] = serde_json::json!(7);
        assert!(matches!(RemoteRun::from_description(&d), Err(RemoteError::Sources(_))));
        d.as_object_mut().unwrap().remove("config");
        assert!(matches!(RemoteRun::from_description(&d), Err(RemoteError::Field { field: "config", .. })));
    }

    #[test]
    fn a_batch_reads_back_as_the_events_sent() {
        let sources = run_sources();
        let gnss = sources.find("gnss0").unwrap();
        let evs = vec![
            line(1.0, gnss),
            Event::new(NS_PER_S + 5, SESSION, Payload::Tick),
            Event::new(NS_PER_S + 6, crate::event::OPERATOR, Payload::Mark("boost on".into())),
        ];
        let mut here = sources.clone();
        let b = parse_batch(&batch_of(3, 10, &evs, &sources), &mut here).unwrap();
        assert_eq!((b.seq, b.events_before, b.bad_lines.len()), (3, 10, 0));
        assert_eq!(b.events, evs);
        // A line naming a source the description did not: refused, named.
        let mut v = batch_of(4, 13, &evs[..1], &sources);
        v["lines"] = serde_json::json!("[1.000000] nobody line x\n");
        let b = parse_batch(&v, &mut here).unwrap();
        assert!(b.events.is_empty());
        assert!(b.bad_lines[0].starts_with("event batch 4, line 1: "), "{:?}", b.bad_lines);
    }

    // Issue 16, item 3: a batch number skipped is batches lost: the events
    // go on after a session note saying how many and between which times;
    // the summary counts them; a batch delivered twice is taken once.
    #[test]
    fn a_hole_in_the_batch_numbers_is_noted_where_it_is() {
        let sources = run_sources();
        let gnss = sources.find("gnss0").unwrap();
        let mut here = sources.clone();
        let mut order = BatchOrder::default();
        let mut fed = Vec::new();
        // Batches 1, 2, then 5 (3 and 4 lost: 7 events), 5 again, then 6.
        for (seq, before, t) in [(1, 0, 0.0), (2, 2, 0.1), (5, 11, 0.4), (5, 11, 0.4), (6, 13, 0.5)] {
            let evs = [line(t, gnss), line(t + 0.05, gnss)];
            fed.extend(order.take(parse_batch(&batch_of(seq, before, &evs, &sources), &mut here).unwrap()));
        }
        let notes: Vec<(TimeNs, &str)> = fed
            .iter()
            .filter_map(|e| match &e.payload {
                Payload::Note(n) => Some((e.t_ns, n.as_str())),
                _ => None,
            })
            .collect();
        assert_eq!(notes, vec![(400_000_000, "share: 2 event batches lost between 0.150 s and 0.400 s (7 events)")]);
        let times: Vec<TimeNs> = fed.iter().map(|e| e.t_ns).collect();
        assert!(times.windows(2).all(|w| w[0] <= w[1]), "in time order, the note where the hole is");
        assert_eq!(fed.len(), 1 + 4 * 2);
        let s = &order.stats;
        assert_eq!((s.batches, s.events, s.batches_lost, s.events_lost, s.duplicates), (4, 8, 2, 7, 1));
        assert_eq!(s.json()["gaps"][0]["batches"], 2);
    }

    // Issue 16, item 1: a follower that joins late starts at the first
    // batch it receives and says so.
    #[test]
    fn a_late_start_is_said() {
        let sources = run_sources();
        let gnss = sources.find("gnss0").unwrap();
        let mut here = sources.clone();
        let mut order = BatchOrder::default();
        let fed = order.take(parse_batch(&batch_of(40, 900, &[line(4.0, gnss)], &sources), &mut here).unwrap());
        assert!(
            matches!(&fed[0].payload, Payload::Note(n) if n.starts_with("share: followed from event batch 40 at 4.000 s: 900 events")),
            "{fed:?}"
        );
        assert_eq!(order.stats.late, Some(Late { seq: 40, events_before: 900, t_ns: Some(4 * NS_PER_S) }));
        assert_eq!((order.stats.batches_lost, order.stats.events_lost), (0, 0), "not counted as a gap");
    }
}
