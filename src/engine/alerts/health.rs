//! Source health alerts: a source down, silent, sending lines that do not
//! parse, losing frames before termvel reads them, or reporting CAN bus
//! errors. One alert of each kind per source, keyed by the source's name.
//! Also the session's own health: events its recorder dropped (a `lost`
//! line of the session source) and a recording file that does not take
//! writes.

use super::AlertBook;
use crate::config::Severity;
use crate::decode::SourceDecodeStats;
use crate::engine::{RETURN_GRACE_NS, SILENT_AFTER_NS, SourceHealth};
use crate::event::{LinkState, NS_PER_S, SourceId, SourceKind, SourceTable, TimeNs};

/// A parse error, a lost-frame report or a bus error keeps its alert raised
/// this long, ns (long enough to be read, short enough to clear once the
/// cause has gone).
pub const RECENT_NS: TimeNs = 5 * NS_PER_S;

/// Raises and clears the health alerts of every input source (CAN, NMEA,
/// lines) at stream time `t`, and returns the sources that are quiet (down,
/// silent, or just back up and within [`RETURN_GRACE_NS`]): their channels
/// are not reported stale one by one. `stats` gives a source's decode
/// statistics; the parse-error count seen is kept in `health`.
pub fn evaluate(
    book: &mut AlertBook,
    t: TimeNs,
    sources: &SourceTable,
    health: &mut [SourceHealth],
    stats: impl Fn(SourceId) -> SourceDecodeStats,
) -> Vec<SourceId> {
    let mut quiet_sources: Vec<SourceId> = Vec::new();
    for (id, info) in sources.iter() {
        let Some(h) = health.get_mut(id.0 as usize) else { continue };
        if info.kind == SourceKind::Session {
            // The recorder's own losses (its memory was full while the
            // disk failed), recorded as `lost N` of the session.
            let lost_recent = h.last_lost_ns.is_some_and(|p| t - p < RECENT_NS);
            let lost = h.lost;
            book.set(t, "lost:recording", Severity::Alarm, lost_recent, || {
                format!("the recorder dropped {lost} events (its memory was full while the disk failed)").into()
            });
        }
        if !matches!(info.kind, SourceKind::Can | SourceKind::Nmea | SourceKind::Lines) {
            continue;
        }
        let down = h.link == Some(LinkState::Down) || h.link == Some(LinkState::Retrying);
        let silent = !down && h.events >= 10 && h.last_t_ns.is_some_and(|l| t - l > SILENT_AFTER_NS);
        // A source just back up has a moment to deliver before its
        // channels count as stale.
        let returning = h.up_since_ns.is_some_and(|u| t - u < RETURN_GRACE_NS);
        if down || silent || returning {
            quiet_sources.push(id);
        }
        let pe = stats(id);
        if pe.parse_errors > h.parse_errors_seen {
            h.parse_errors_seen = pe.parse_errors;
            h.last_parse_error_ns = Some(t);
        }
        let recent = h.last_parse_error_ns.is_some_and(|p| t - p < RECENT_NS);
        let lost_recent = h.last_lost_ns.is_some_and(|p| t - p < RECENT_NS);
        let bus = h.last_bus_error_ns.is_some_and(|p| t - p < RECENT_NS);
        h.alerted |= down || silent || recent || lost_recent || bus;
        if !h.alerted {
            // Nothing to raise and nothing raised before to clear.
            continue;
        }
        let reason = h.link_reason.clone();
        book.set(t, &format!("down:{}", info.name), Severity::Alarm, down, || {
            format!("{} is down: {reason}", info.name).into()
        });
        let last = h.last_t_ns.unwrap_or(t);
        book.set(t, &format!("silent:{}", info.name), Severity::Alarm, silent, || {
            format!("{} silent for {:.1} s", info.name, (t - last) as f64 * 1e-9).into()
        });
        let n = pe.parse_errors;
        book.set(t, &format!("parse:{}", info.name), Severity::Caution, recent, || {
            format!("{}: {n} bad lines ({})", info.name, pe.last_error.clone().unwrap_or_default()).into()
        });
        let lost = h.lost;
        book.set(t, &format!("lost:{}", info.name), Severity::Caution, lost_recent, || {
            format!("{}: {lost} frames lost before termvel could read them (receive queue full)", info.name).into()
        });
        let (ef, bo, ep, la) = (h.error_frames, h.bus_off, h.error_passive, h.lost_arbitration);
        book.set(
            t,
            &format!("bus:{}", info.name),
            if bo > 0 { Severity::Alarm } else { Severity::Caution },
            bus,
            || {
                format!(
                    "{}: {ef} CAN error frames (bus-off {bo}, error-passive {ep}, lost arbitration {la})",
                    info.name
                )
                .into()
            },
        );
    }
    quiet_sources
}

/// Raises the `recording` alarm while the recording's file does not take
/// writes (`failing` says what failed), clears it when it does again.
pub fn recording(book: &mut AlertBook, t: TimeNs, failing: Option<&str>) {
    book.set(t, "recording", Severity::Alarm, failing.is_some(), || {
        format!("recording failing, events held in memory and retried: {}", failing.unwrap_or_default()).into()
    });
}

#[cfg(test)]
mod tests {
    use super::*;

    const S: TimeNs = NS_PER_S;

    fn table() -> (SourceTable, SourceId) {
        let mut t = SourceTable::default();
        let id = t.intern("can0", SourceKind::Can);
        (t, id)
    }

    fn healthy(id: SourceId, last_t_ns: TimeNs) -> Vec<SourceHealth> {
        let mut h = vec![SourceHealth::default(); id.0 as usize + 1];
        h[id.0 as usize] = SourceHealth { events: 100, last_t_ns: Some(last_t_ns), ..SourceHealth::default() };
        h
    }

    #[test]
    fn a_source_down_is_an_alarm_with_its_reason_and_is_quiet() {
        let (sources, id) = table();
        let mut health = healthy(id, 10 * S);
        health[id.0 as usize].link = Some(LinkState::Down);
        health[id.0 as usize].link_reason = "cable".into();
        let mut book = AlertBook::default();
        let quiet = evaluate(&mut book, 10 * S, &sources, &mut health, |_| SourceDecodeStats::default());
        assert_eq!(quiet, vec![id]);
        let v = book.visible();
        assert_eq!(v.len(), 1);
        assert_eq!(
            (v[0].key.as_str(), v[0].severity, v[0].message.as_str()),
            ("down:can0", Severity::Alarm, "can0 is down: cable")
        );
    }

    #[test]
    fn silence_after_a_second_raises_and_a_new_event_clears() {
        let (sources, id) = table();
        let mut health = healthy(id, 10 * S);
        let mut book = AlertBook::default();
        let none = |_| SourceDecodeStats::default();
        assert!(
            evaluate(&mut book, 10 * S + S, &sources, &mut health, none).is_empty(),
            "1 s exactly is not yet silent"
        );
        let quiet = evaluate(&mut book, 12 * S, &sources, &mut health, none);
        assert_eq!(quiet, vec![id]);
        assert!(book.is_active("silent:can0"));
        assert_eq!(book.visible()[0].message, "can0 silent for 2.0 s");
        health[id.0 as usize].last_t_ns = Some(12 * S);
        evaluate(&mut book, 12 * S + S / 10, &sources, &mut health, none);
        assert!(!book.is_active("silent:can0"));
    }

    #[test]
    fn parse_errors_hold_the_alert_for_five_seconds_after_the_last() {
        let (sources, id) = table();
        let mut health = healthy(id, 10 * S);
        let mut book = AlertBook::default();
        let stats =
            |_| SourceDecodeStats { parse_errors: 3, last_error: Some("bad checksum".into()), ..Default::default() };
        evaluate(&mut book, 10 * S, &sources, &mut health, stats);
        assert!(book.is_active("parse:can0"));
        assert_eq!(book.visible()[0].message, "can0: 3 bad lines (bad checksum)");
        // No new error: still raised 4.9 s later, cleared at 5 s.
        health[id.0 as usize].last_t_ns = Some(15 * S);
        evaluate(&mut book, 15 * S - S / 10, &sources, &mut health, stats);
        assert!(book.is_active("parse:can0"));
        evaluate(&mut book, 15 * S, &sources, &mut health, stats);
        assert!(!book.is_active("parse:can0"));
    }

    #[test]
    fn bus_off_makes_the_bus_alert_an_alarm_and_operator_sources_are_skipped() {
        let (sources, id) = table();
        let mut health = healthy(id, 10 * S);
        let h = &mut health[id.0 as usize];
        (h.error_frames, h.bus_off, h.last_bus_error_ns) = (4, 1, Some(10 * S));
        // The operator source (id 0) has health too, but is not an input.
        health[0] = SourceHealth { link: Some(LinkState::Down), ..SourceHealth::default() };
        let mut book = AlertBook::default();
        evaluate(&mut book, 10 * S, &sources, &mut health, |_| SourceDecodeStats::default());
        let v = book.visible();
        assert_eq!(v.len(), 1, "{v:?}");
        assert_eq!((v[0].key.as_str(), v[0].severity), ("bus:can0", Severity::Alarm));
        assert_eq!(v[0].message, "can0: 4 CAN error frames (bus-off 1, error-passive 0, lost arbitration 0)");
    }
}
