//! Data-quality alerts: stale channels (grouped by the message or source
//! they come in), messages short of their rate, channels reading outside
//! their valid range, and wheel speed disagreeing with GNSS speed.

use std::collections::BTreeMap;

use super::{AlertBook, AlertText};
use crate::channel::{ChannelId, ChannelTable};
use crate::config::Severity;
use crate::decode::can::MessageCount;
use crate::engine::store::ChannelStore;
use crate::engine::{RATE_SHORT, RATE_WINDOW_NS, SPEED_AGREE_FRAC, SPEED_AGREE_MPS, SPEED_DISAGREE_NS};
use crate::event::{NS_PER_S, SourceId, SourceTable, TimeNs};
use crate::units::Measure;

/// A channel outside its valid range keeps its alert this long after its
/// last such reading, ns.
pub const RANGE_RECENT_NS: TimeNs = 5 * NS_PER_S;

/// Raises one alert per CAN message (or serial source) whose channels have
/// gone stale, listing them, with the age of the oldest. Channels of a
/// source in `quiet` (down, silent, returning) are left to that source's
/// alert. Every group with an expected period is evaluated, so a group
/// whose channels come back clears.
pub fn stale_channels(
    book: &mut AlertBook,
    t: TimeNs,
    channels: &ChannelTable,
    store: &ChannelStore,
    channel_message: &[(ChannelId, String)],
    sources: &SourceTable,
    quiet: &[SourceId],
) {
    let mut groups: BTreeMap<String, (Vec<&str>, f64)> = BTreeMap::new();
    for (id, info) in channels.iter() {
        let Some(stc) = store.get(id) else { continue };
        if info.expected_period_ns.is_none() {
            continue;
        }
        let group = match channel_message.iter().find(|(c, _)| *c == id) {
            Some((_, m)) => m.clone(),
            None => sources.name(stc.source).to_string(),
        };
        let entry = groups.entry(group).or_insert((Vec::new(), 0.0));
        if store.is_stale(id, t) && !quiet.contains(&stc.source) {
            entry.0.push(&info.name);
            entry.1 = entry.1.max((t - stc.t_ns) as f64 * 1e-9);
        }
    }
    for (group, (stale, age_s)) in &groups {
        book.set(t, &format!("stale:{group}"), Severity::Caution, !stale.is_empty(), || {
            let list = if stale.len() <= 2 {
                stale.join(", ")
            } else {
                format!("{}, {} and {} more", stale[0], stale[1], stale.len() - 2)
            };
            format!("{group} stale {age_s:.1} s: {list}").into()
        });
    }
}

/// Each message's frames over the last [`RATE_WINDOW_NS`] against what its
/// period promises.
#[derive(Clone, Debug, Default)]
pub struct RateCheck {
    /// Start of the window and each message's frame count then.
    window: (TimeNs, Vec<u64>),
    /// Messages short of their rate in the last full window: (name, fraction).
    pub short: Vec<(String, f64)>,
}

impl RateCheck {
    /// Every [`RATE_WINDOW_NS`], compares each message's frames with what
    /// its period promises; a message that has arrived at all but below
    /// [`RATE_SHORT`] of its rate (and is expected at least 5 times in the
    /// window) is short: lost frames, a failing node.
    pub fn update(&mut self, t: TimeNs, counts: &[MessageCount]) {
        if self.window.1.len() != counts.len() {
            self.window = (t, counts.iter().map(|c| c.frames).collect());
            return;
        }
        let span = t - self.window.0;
        if span < RATE_WINDOW_NS {
            return;
        }
        self.short.clear();
        for (c, &before) in counts.iter().zip(&self.window.1) {
            let got = (c.frames - before) as f64;
            let expected = span as f64 / c.period_ns as f64;
            if c.frames > 0 && expected >= 5.0 && got > 0.0 && got < RATE_SHORT * expected {
                self.short.push((c.name.clone(), got / expected));
            }
        }
        self.window = (t, counts.iter().map(|c| c.frames).collect());
    }
}

/// One alert per message of the map: raised while it is in `short`.
pub fn message_rates(book: &mut AlertBook, t: TimeNs, counts: &[MessageCount], short: &[(String, f64)]) {
    for c in counts {
        let s = short.iter().find(|(n, _)| *n == c.name);
        book.set(t, &format!("rate:{}", c.name), Severity::Caution, s.is_some(), || {
            format!("{} arriving at {:.0} % of its rate: frames lost", c.name, s.map_or(0.0, |x| x.1 * 100.0)).into()
        });
    }
}

/// One alert per channel that has ever read outside its valid range:
/// raised while its latest reading is out of range and under
/// [`RANGE_RECENT_NS`] old.
pub fn out_of_range(book: &mut AlertBook, t: TimeNs, channels: &ChannelTable, store: &ChannelStore) {
    for (id, info) in channels.iter() {
        let Some(stc) = store.get(id) else { continue };
        if stc.invalid == 0 {
            continue;
        }
        let out = !stc.valid && t - stc.t_ns < RANGE_RECENT_NS;
        let v = stc.value;
        book.set(t, &format!("range:{}", info.name), Severity::Caution, out, || {
            // In SI as decoded: a diagnostic of the signal, not a figure to read.
            format!("{} reads {v:.4} {}: outside its valid range, not used", info.name, info.dimension.si_unit()).into()
        });
    }
}

/// Wheel speed against GNSS speed (fresh values, m/s): they disagree when
/// they differ by more than [`SPEED_AGREE_MPS`] or [`SPEED_AGREE_FRAC`] of
/// the GNSS speed, whichever is larger; the alert (a stuck or failing
/// sensor) is raised after [`SPEED_DISAGREE_NS`] of disagreement. `since`
/// holds when the disagreement began.
pub fn speed_agreement(
    book: &mut AlertBook,
    t: TimeNs,
    wheel_mps: Option<f64>,
    gnss_mps: Option<f64>,
    since: &mut Option<TimeNs>,
) {
    let disagree = match (wheel_mps, gnss_mps) {
        (Some(w), Some(g)) => (w - g).abs() > SPEED_AGREE_MPS.max(SPEED_AGREE_FRAC * g.abs()),
        _ => false,
    };
    let from = if disagree { Some(*since.get_or_insert(t)) } else { None };
    if !disagree {
        *since = None;
    }
    let (w, g) = (wheel_mps.unwrap_or(0.0), gnss_mps.unwrap_or(0.0));
    book.set(t, "speed-disagree", Severity::Caution, from.is_some_and(|s| t - s >= SPEED_DISAGREE_NS), || {
        AlertText::new("wheel speed ")
            .value(Measure::Speed, w)
            .then(" and GNSS ")
            .value(Measure::Speed, g)
            .then(" disagree: a sensor may be stuck")
    });
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::decode::can::Sample;
    use crate::units::Dimension;

    const S: TimeNs = NS_PER_S;

    /// A table of three channels on one message at 10 Hz (stale after 3
    /// periods, 0.3 s), and a store holding a sample of each at `t0`.
    fn setup(t0: TimeNs) -> (ChannelTable, ChannelStore, Vec<(ChannelId, String)>, SourceTable, SourceId) {
        let mut channels = ChannelTable::default();
        let mut ids = Vec::new();
        for name in ["x.a", "x.b", "x.c"] {
            let id = channels.intern(name, Dimension::Power);
            channels.expect_period(id, S / 10);
            ids.push(id);
        }
        let mut store = ChannelStore::new(3.0);
        store.sync(&channels);
        let mut sources = SourceTable::default();
        let src = sources.intern("can0", crate::event::SourceKind::Can);
        for &id in &ids {
            store.apply(&Sample { t_ns: t0, channel: id, value: 1.0, valid: true }, src);
        }
        let message = ids.iter().map(|&id| (id, "X".to_string())).collect();
        (channels, store, message, sources, src)
    }

    #[test]
    fn stale_channels_are_one_alert_per_message() {
        let (channels, store, message, sources, src) = setup(10 * S);
        let mut book = AlertBook::default();
        stale_channels(&mut book, 10 * S + S / 10, &channels, &store, &message, &sources, &[]);
        assert!(book.visible().is_empty(), "0.1 s old: fresh");
        stale_channels(&mut book, 11 * S, &channels, &store, &message, &sources, &[]);
        let v = book.visible();
        assert_eq!(v.len(), 1);
        assert_eq!((v[0].key.as_str(), v[0].message.as_str()), ("stale:X", "X stale 1.0 s: x.a, x.b and 1 more"));
        // The source itself is reported quiet: its channels say nothing, the alert clears.
        stale_channels(&mut book, 12 * S, &channels, &store, &message, &sources, &[src]);
        assert!(!book.is_active("stale:X"));
    }

    #[test]
    fn a_message_at_half_its_rate_is_short() {
        // 10 Hz message: 20 frames expected in the 2 s window, 10 arrived.
        let mut counts = vec![MessageCount { name: "X".into(), period_ns: S / 10, frames: 100 }];
        let mut rates = RateCheck::default();
        rates.update(0, &counts);
        counts[0].frames = 110;
        rates.update(S, &counts);
        assert!(rates.short.is_empty(), "the window is not over yet");
        rates.update(2 * S, &counts);
        assert_eq!(rates.short, vec![("X".to_string(), 0.5)]);
        let mut book = AlertBook::default();
        message_rates(&mut book, 2 * S, &counts, &rates.short);
        assert_eq!(book.visible()[0].message, "X arriving at 50 % of its rate: frames lost");
        // The next window at full rate (20 more frames) clears it.
        counts[0].frames = 130;
        rates.update(4 * S, &counts);
        message_rates(&mut book, 4 * S, &counts, &rates.short);
        assert!(!book.is_active("rate:X"));
    }

    #[test]
    fn an_out_of_range_reading_alerts_for_five_seconds() {
        let (channels, mut store, _, _, src) = setup(10 * S);
        let id = channels.find("x.b").unwrap();
        store.apply(&Sample { t_ns: 10 * S, channel: id, value: -5.0, valid: false }, src);
        let mut book = AlertBook::default();
        out_of_range(&mut book, 10 * S, &channels, &store);
        assert_eq!(book.visible()[0].message, "x.b reads -5.0000 W: outside its valid range, not used");
        out_of_range(&mut book, 15 * S, &channels, &store);
        assert!(!book.is_active("range:x.b"));
    }

    #[test]
    fn speed_disagreement_must_last_a_second() {
        let mut book = AlertBook::default();
        let mut since = None;
        // 100 m/s: the band is max(3, 5 % of 100) = 5 m/s; 5.5 m/s apart disagrees.
        speed_agreement(&mut book, 0, Some(105.5), Some(100.0), &mut since);
        assert_eq!(since, Some(0));
        speed_agreement(&mut book, S - 1, Some(105.5), Some(100.0), &mut since);
        assert!(!book.is_active("speed-disagree"));
        speed_agreement(&mut book, S, Some(105.5), Some(100.0), &mut since);
        assert!(book.is_active("speed-disagree"));
        // 4.5 m/s apart is within the band: cleared, and the clock restarts.
        speed_agreement(&mut book, 2 * S, Some(104.5), Some(100.0), &mut since);
        assert!(!book.is_active("speed-disagree"));
        assert_eq!(since, None);
    }
}
