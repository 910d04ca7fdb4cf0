//! The engineer's own alert rules, from the alert configuration: a channel
//! or derived quantity above or below a threshold for a duration, cleared
//! past a hysteresis band. Keys are `rule:<name>`.

use super::AlertBook;
use crate::channel::ChannelTable;
use crate::config::alerts::{AlertRule, Comparison};
use crate::engine::store::ChannelStore;
use crate::event::TimeNs;

/// One rule's state between ticks.
#[derive(Clone, Debug, Default)]
pub struct RuleState {
    /// Since when the value has been beyond the threshold.
    since: Option<TimeNs>,
    active: bool,
}

impl AlertBook {
    /// Evaluates the configured rules; `value` gives a channel's or derived
    /// quantity's current value (None when unknown or stale, which holds a
    /// rule where it is).
    pub fn evaluate_rules(&mut self, t_ns: TimeNs, rules: &[AlertRule], value: impl Fn(&str) -> Option<f64>) {
        self.rules.resize(rules.len(), RuleState::default());
        for (i, r) in rules.iter().enumerate() {
            let Some(v) = value(&r.channel) else { continue };
            let st = &mut self.rules[i];
            let (beyond, back) = match r.comparison {
                Comparison::Above(th) => (v > th, v < th - r.hysteresis),
                Comparison::Below(th) => (v < th, v > th + r.hysteresis),
            };
            if beyond {
                let since = *st.since.get_or_insert(t_ns);
                if !st.active && (t_ns - since) as f64 * 1e-9 >= r.for_s {
                    st.active = true;
                }
            } else {
                st.since = None;
                if back {
                    st.active = false;
                }
            }
            let on = st.active;
            let key = format!("rule:{}", r.name);
            self.set(t_ns, &key, r.severity, on, || r.message.clone().into());
        }
    }
}

/// Evaluates the configured `rules` at stream time `t`: a name starting
/// with `derived.` is looked up with `derived_value`, any other in the
/// channel table, as the channel's fresh value.
pub fn evaluate(
    book: &mut AlertBook,
    t: TimeNs,
    rules: &[AlertRule],
    derived_value: impl Fn(&str) -> Option<f64>,
    channels: &ChannelTable,
    store: &ChannelStore,
) {
    book.evaluate_rules(t, rules, |name| {
        if name.starts_with("derived.") {
            derived_value(name)
        } else {
            channels.find(name).and_then(|id| store.fresh(id, t))
        }
    });
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::Severity;

    const S: TimeNs = 1_000_000_000;

    fn rule(cmp: Comparison, for_s: f64, hyst: f64) -> AlertRule {
        AlertRule {
            name: "hot".into(),
            channel: "x".into(),
            comparison: cmp,
            for_s,
            hysteresis: hyst,
            severity: Severity::Caution,
            message: "x hot".into(),
        }
    }

    #[test]
    fn rule_duration_and_hysteresis() {
        let rules = [rule(Comparison::Above(100.0), 2.0, 5.0)];
        let mut b = AlertBook::default();
        let at = |b: &mut AlertBook, t: TimeNs, v: f64| b.evaluate_rules(t, &rules, |_| Some(v));
        at(&mut b, 0, 101.0);
        at(&mut b, S, 101.0);
        assert!(!b.is_active("rule:hot"), "not yet held for 2 s");
        at(&mut b, 2 * S, 101.0);
        assert!(b.is_active("rule:hot"));
        at(&mut b, 3 * S, 97.0);
        assert!(b.is_active("rule:hot"), "97 is inside the 5-unit hysteresis");
        at(&mut b, 4 * S, 94.9);
        assert!(!b.is_active("rule:hot"));
        // Below, and an interruption restarts the duration.
        let rules = [rule(Comparison::Below(3.0), 1.0, 0.1)];
        let mut b = AlertBook::default();
        let at = |b: &mut AlertBook, t: TimeNs, v: f64| b.evaluate_rules(t, &rules, |_| Some(v));
        at(&mut b, 0, 2.9);
        at(&mut b, S / 2, 3.05);
        at(&mut b, S, 2.9);
        at(&mut b, 3 * S / 2, 2.9);
        assert!(!b.is_active("rule:hot"));
        at(&mut b, 2 * S, 2.9);
        assert!(b.is_active("rule:hot"));
    }

    #[test]
    fn derived_names_go_to_the_derived_lookup_and_unknown_values_hold() {
        let mut r = rule(Comparison::Above(10.0), 0.0, 1.0);
        r.channel = "derived.boost_left_s".into();
        let rules = [r];
        let channels = ChannelTable::default();
        let store = ChannelStore::new(3.0);
        let mut b = AlertBook::default();
        let lookup = |v: Option<f64>| move |name: &str| (name == "derived.boost_left_s").then_some(v).flatten();
        evaluate(&mut b, 0, &rules, lookup(Some(11.0)), &channels, &store);
        assert!(b.is_active("rule:hot"));
        assert_eq!(b.visible()[0].message, "x hot");
        // Unknown (stale) leaves it where it is.
        evaluate(&mut b, S, &rules, lookup(None), &channels, &store);
        assert!(b.is_active("rule:hot"));
        evaluate(&mut b, 2 * S, &rules, lookup(Some(8.9)), &channels, &store);
        assert!(!b.is_active("rule:hot"));
    }
}
