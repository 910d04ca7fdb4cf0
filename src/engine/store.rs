//! The channel store: per channel the latest value, its time and validity,
//! the range seen, and whether it has gone stale.

use crate::channel::{ChannelId, ChannelTable};
use crate::decode::Sample;
use crate::event::{SourceId, TimeNs};

/// What is known of one channel.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChannelState {
    /// Latest value received, valid or not.
    pub value: f64,
    pub t_ns: TimeNs,
    /// Whether the latest value was inside its valid range.
    pub valid: bool,
    /// Latest value that was valid, and when.
    pub last_valid: f64,
    pub last_valid_t_ns: Option<TimeNs>,
    /// Range of the valid values seen.
    pub min: f64,
    pub max: f64,
    pub samples: u64,
    pub invalid: u64,
    /// The source of the latest sample.
    pub source: SourceId,
}

impl Default for ChannelState {
    fn default() -> Self {
        ChannelState {
            value: f64::NAN,
            t_ns: 0,
            valid: false,
            last_valid: f64::NAN,
            last_valid_t_ns: None,
            min: f64::INFINITY,
            max: f64::NEG_INFINITY,
            samples: 0,
            invalid: 0,
            source: SourceId(0),
        }
    }
}

/// All channels, indexed by [`ChannelId`].
#[derive(Clone, Debug, Default)]
pub struct ChannelStore {
    states: Vec<ChannelState>,
    /// Stale threshold per channel, ns (None: never stale).
    stale_after_ns: Vec<Option<TimeNs>>,
    stale_periods: f64,
}

impl ChannelStore {
    pub fn new(stale_periods: f64) -> ChannelStore {
        ChannelStore { states: Vec::new(), stale_after_ns: Vec::new(), stale_periods }
    }

    /// Takes note of channels added to the table since the last call.
    pub fn sync(&mut self, table: &ChannelTable) {
        while self.states.len() < table.len() {
            let id = ChannelId(self.states.len() as u16);
            self.states.push(ChannelState::default());
            let p = table.get(id).expected_period_ns;
            self.stale_after_ns.push(p.map(|p| (p as f64 * self.stale_periods) as TimeNs));
        }
    }

    /// Applies a sample from `source`. Non-finite values are stored as invalid.
    #[inline]
    pub fn apply(&mut self, s: &Sample, source: SourceId) {
        let Some(st) = self.states.get_mut(s.channel.0 as usize) else { return };
        st.samples += 1;
        st.source = source;
        st.value = s.value;
        st.t_ns = s.t_ns;
        let valid = s.valid && s.value.is_finite();
        st.valid = valid;
        if valid {
            st.last_valid = s.value;
            st.last_valid_t_ns = Some(s.t_ns);
            if s.value < st.min {
                st.min = s.value;
            }
            if s.value > st.max {
                st.max = s.value;
            }
        } else {
            st.invalid += 1;
        }
    }

    pub fn get(&self, id: ChannelId) -> Option<&ChannelState> {
        self.states.get(id.0 as usize).filter(|s| s.samples > 0)
    }

    /// Whether the channel has had samples but none for its stale threshold.
    pub fn is_stale(&self, id: ChannelId, now_ns: TimeNs) -> bool {
        match (self.get(id), self.stale_after_ns.get(id.0 as usize).copied().flatten()) {
            (Some(st), Some(limit)) => now_ns - st.t_ns > limit,
            _ => false,
        }
    }

    /// The latest valid value if it is fresh (not stale) at `now_ns`.
    #[inline]
    pub fn fresh(&self, id: ChannelId, now_ns: TimeNs) -> Option<f64> {
        let st = self.get(id)?;
        let t = st.last_valid_t_ns?;
        let limit = self.stale_after_ns.get(id.0 as usize).copied().flatten().unwrap_or(TimeNs::MAX);
        (now_ns - t <= limit).then_some(st.last_valid)
    }

    /// The latest valid value, however old, with its time.
    pub fn last_valid(&self, id: ChannelId) -> Option<(f64, TimeNs)> {
        let st = self.get(id)?;
        st.last_valid_t_ns.map(|t| (st.last_valid, t))
    }

    pub fn len(&self) -> usize {
        self.states.len()
    }

    #[cfg(test)]
    fn apply_test(&mut self, s: &Sample) {
        self.apply(s, SourceId(2));
    }

    pub fn is_empty(&self) -> bool {
        self.states.is_empty()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::channel::ch;

    fn sample(t: TimeNs, v: f64, valid: bool) -> Sample {
        Sample { t_ns: t, channel: ch::VEHICLE_SPEED, value: v, valid }
    }

    #[test]
    fn stale_after_three_periods() {
        let mut table = ChannelTable::default();
        table.expect_period(ch::VEHICLE_SPEED, 10_000_000);
        let mut s = ChannelStore::new(3.0);
        s.sync(&table);
        s.apply_test(&sample(1_000_000_000, 50.0, true));
        assert!(!s.is_stale(ch::VEHICLE_SPEED, 1_030_000_000), "exactly 3 periods is not yet stale");
        assert!(s.is_stale(ch::VEHICLE_SPEED, 1_030_000_001));
        assert_eq!(s.fresh(ch::VEHICLE_SPEED, 1_020_000_000), Some(50.0));
        assert_eq!(s.fresh(ch::VEHICLE_SPEED, 1_040_000_000), None);
    }

    #[test]
    fn invalid_values_are_kept_apart() {
        let mut s = ChannelStore::new(3.0);
        s.sync(&ChannelTable::default());
        s.apply_test(&sample(1, 50.0, true));
        s.apply_test(&sample(2, 900.0, false));
        s.apply_test(&sample(3, f64::NAN, true));
        let st = s.get(ch::VEHICLE_SPEED).unwrap();
        assert_eq!((st.min, st.max, st.last_valid), (50.0, 50.0, 50.0));
        assert_eq!(st.invalid, 2);
        assert!(!st.valid);
    }
}
