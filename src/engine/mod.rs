//! engine: all derived state, as a pure function of the ordered event stream.
//!
//! The engine never reads a clock: time comes from the events. It decodes
//! each event, updates the channel store, the per-source health and the
//! online estimators (cheap, per sample), and at every multiple of the
//! snapshot interval of stream time computes the derived quantities and the
//! alerts and publishes an immutable [`Snapshot`]. The grid is aligned to
//! whole multiples of the interval since the epoch, so a live run and its
//! replay snapshot at the same instants and produce the same values, bit
//! for bit.

pub mod alerts;
pub mod derived;
pub mod estimators;
pub mod physics;
pub mod power_curve;
pub mod projection;
pub mod quantities;
pub mod rls;
pub mod snapshot;
pub mod store;

pub use alerts::{Alert, AlertBook};
pub use derived::Derived;
pub use snapshot::{ChannelView, Counters, Snapshot, SourceView};
pub use store::{ChannelState, ChannelStore};

use std::sync::Arc;

use crate::channel::{ChannelId, ch};
use crate::config::{ConfigSet, Severity};
use crate::decode::{Decoder, Sample};
use crate::event::{Event, LinkState, NS_PER_S, Payload, SourceId, SourceKind, SourceTable, TimeNs};
use derived::TickInputs;
use estimators::{BalanceSample, DeratingTracker, HeatingRate, PackEstimator, RoadLoadEstimator};

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
/// Weather older than this is not used for air density.
pub const WEATHER_MAX_AGE_NS: TimeNs = 60 * NS_PER_S;
/// Time constant of the filter deriving acceleration from speed, s.
pub const ACCEL_FILTER_S: f64 = 0.3;
/// Window of the mean wind used for predictions, ns: a moving average
/// rejects gusts far better than an exponential filter of the same memory.
pub const WIND_WINDOW_NS: TimeNs = 30 * NS_PER_S;
/// Window of the message-rate check, ns.
pub const RATE_WINDOW_NS: TimeNs = 2 * NS_PER_S;
/// A message below this fraction of its configured rate is short.
pub const RATE_SHORT: f64 = 0.8;
/// Wheel and GNSS speed may differ by this much (m/s, or this fraction,
/// whichever is larger) before they disagree.
pub const SPEED_AGREE_MPS: f64 = 3.0;
pub const SPEED_AGREE_FRAC: f64 = 0.05;
/// ... for this long before the alert.
pub const SPEED_DISAGREE_NS: TimeNs = NS_PER_S;
/// The projection must say "out of reach" this long before the alert.
pub const TARGET_PERSIST_NS: TimeNs = 2 * NS_PER_S;
/// A source back up may take this long to deliver before its channels count as stale.
pub const RETURN_GRACE_NS: TimeNs = NS_PER_S;
/// A source that delivered at least this rate and then nothing for this
/// long is reported silent.
pub const SILENT_AFTER_NS: TimeNs = NS_PER_S;

/// The mean wind over the last [`WIND_WINDOW_NS`] (predictions use the
/// wind the car will meet on average, not the gust of the moment).
#[derive(Clone, Debug, Default)]
struct WindMean {
    samples: std::collections::VecDeque<(TimeNs, f64)>,
    sum: f64,
}

impl WindMean {
    fn push(&mut self, t_ns: TimeNs, w: f64) {
        self.samples.push_back((t_ns, w));
        self.sum += w;
        while let Some(&(t0, w0)) = self.samples.front() {
            if t_ns - t0 > WIND_WINDOW_NS || self.samples.len() > 10_000 {
                self.samples.pop_front();
                self.sum -= w0;
            } else {
                break;
            }
        }
    }

    /// The mean, unless the latest sample is older than the weather limit.
    fn mean(&self, t_ns: TimeNs) -> Option<f64> {
        let &(last, _) = self.samples.back()?;
        (t_ns - last <= WEATHER_MAX_AGE_NS).then(|| self.sum / self.samples.len() as f64)
    }
}

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
    /// When the source last reported itself up again.
    pub up_since_ns: Option<TimeNs>,
    /// Arrival gaps longer than [`SourceHealth::GAP_NS`].
    pub gaps: u64,
    window_start_ns: TimeNs,
    window_count: u64,
    pub rate_per_s: f64,
    /// CAN error frames, and among them bus-off, error-passive and
    /// lost-arbitration reports.
    pub error_frames: u64,
    pub bus_off: u64,
    pub error_passive: u64,
    pub lost_arbitration: u64,
    last_bus_error_ns: Option<TimeNs>,
    /// Frames lost before termvel could read them (kernel queue overflow).
    pub lost: u64,
    last_lost_ns: Option<TimeNs>,
    parse_errors_seen: u64,
    last_parse_error_ns: Option<TimeNs>,
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
    now_ns: Option<TimeNs>,
    next_snapshot_ns: Option<TimeNs>,
    last_tick_ns: Option<TimeNs>,
    pub health: Vec<SourceHealth>,
    pub counters: Counters,
    samples: Vec<Sample>,
    names: Vec<Arc<str>>,
    marks: Vec<(TimeNs, String)>,
    // Estimators and per-sample state.
    road: RoadLoadEstimator,
    pack: PackEstimator,
    derate: DeratingTracker,
    heating: HeatingRate,
    odo_m: f64,
    odo_last: Option<(TimeNs, f64)>,
    accel_from_speed: Option<f64>,
    /// The wind's recent samples for the mean the predictions use.
    wind: WindMean,
    pub alerts: AlertBook,
    derived: Derived,
    /// Derived quantities rejected for being non-finite.
    pub rejected_values: u64,
    /// Per-message frame counts at the start of the rate window, and when.
    rate_window: (TimeNs, Vec<u64>),
    /// Messages short of their rate in the last window: (name, fraction).
    short_messages: Vec<(String, f64)>,
    /// Since when wheel and GNSS speed disagree.
    speed_disagree_since: Option<TimeNs>,
    /// Since when the projection has said the target is out of reach.
    target_lost_since: Option<TimeNs>,
}

impl Engine {
    pub fn new(config: Arc<ConfigSet>, opts: EngineOptions) -> Engine {
        let decoder = Decoder::new(&config.signals);
        let mut store = ChannelStore::new(config.alerts.limits.stale_after_periods);
        store.sync(&decoder.channels);
        let mut e = Engine {
            road: RoadLoadEstimator::new(&config.vehicle),
            pack: PackEstimator::new(&config.vehicle),
            config,
            decoder,
            store,
            opts,
            now_ns: None,
            next_snapshot_ns: None,
            last_tick_ns: None,
            health: Vec::new(),
            counters: Counters::default(),
            samples: Vec::with_capacity(64),
            names: Vec::new(),
            marks: Vec::new(),
            derate: DeratingTracker::default(),
            heating: HeatingRate::default(),
            odo_m: 0.0,
            odo_last: None,
            accel_from_speed: None,
            wind: WindMean::default(),
            alerts: AlertBook::default(),
            derived: Derived::default(),
            rejected_values: 0,
            rate_window: (0, Vec::new()),
            short_messages: Vec::new(),
            speed_disagree_since: None,
            target_lost_since: None,
        };
        e.sync_names();
        e
    }

    fn sync_names(&mut self) {
        while self.names.len() < self.decoder.channels.len() {
            let id = ChannelId(self.names.len() as u16);
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

    /// The derived quantities of the latest tick.
    pub fn derived(&self) -> &Derived {
        &self.derived
    }

    /// Annotations (alert raises, clears, acknowledgements) since the last call.
    pub fn take_notes(&mut self) -> Vec<(TimeNs, String)> {
        self.alerts.take_notes()
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
            Payload::Can(frame) => {
                self.counters.can_frames += 1;
                let h = &mut self.health[idx];
                h.can_frames += 1;
                if let crate::event::CanFrame::Error(e) = frame {
                    h.error_frames += 1;
                    h.last_bus_error_ns = Some(ev.t_ns);
                    h.bus_off += u64::from(e.is_bus_off());
                    h.error_passive += u64::from(e.is_error_passive());
                    h.lost_arbitration += u64::from(e.is_lost_arbitration());
                }
            }
            Payload::Line(_) => self.health[idx].lines += 1,
            Payload::Mark(text) => self.marks.push((ev.t_ns, text.clone())),
            Payload::Ack(key) => self.alerts.ack(ev.t_ns, key),
            Payload::Link(state, reason) => {
                let h = &mut self.health[idx];
                if *state == LinkState::Up && h.link.is_some_and(|l| l != LinkState::Up) {
                    h.up_since_ns = Some(ev.t_ns);
                }
                h.link = Some(*state);
                h.link_reason = reason.clone();
            }
            Payload::Lost(n) => {
                let h = &mut self.health[idx];
                h.lost += n;
                h.last_lost_ns = Some(ev.t_ns);
            }
            Payload::Tick | Payload::Note(_) => {}
        }
        let kind = sources.get(ev.source).map_or(SourceKind::Can, |s| s.kind);
        self.samples.clear();
        self.decoder.decode(ev, kind, &mut self.samples);
        if self.decoder.channels.len() > self.store.len() {
            self.store.sync(&self.decoder.channels);
            self.sync_names();
        }
        let samples = std::mem::take(&mut self.samples);
        for s in &samples {
            self.store.apply(s, ev.source);
            if s.valid && s.value.is_finite() {
                self.on_sample(s);
            }
        }
        self.counters.samples += samples.len() as u64;
        self.samples = samples;
        if self.now_ns.is_none_or(|n| ev.t_ns > n) {
            self.now_ns = Some(ev.t_ns);
        }
    }

    /// Feeds one event as [`Engine::feed`] does, then passes each sample the
    /// engine decoded from it to `tap`: a reader of the decoded stream (the
    /// long export) uses the engine's own decoding instead of a second one.
    pub fn feed_tapped(
        &mut self,
        ev: &Event,
        sources: &SourceTable,
        sink: &mut impl FnMut(Snapshot),
        tap: &mut impl FnMut(&Sample, &crate::channel::ChannelInfo),
    ) {
        // `feed` leaves the samples of the last input event in place; an
        // event that is not an input decodes to nothing.
        if !ev.is_input() {
            return;
        }
        self.feed(ev, sources, sink);
        for s in &self.samples {
            tap(s, self.decoder.channels.get(s.channel));
        }
    }

    /// The per-sample work: odometer, acceleration from speed and the
    /// estimators, each only for the channels it needs.
    #[inline]
    fn on_sample(&mut self, s: &Sample) {
        match s.channel {
            ch::VEHICLE_SPEED => {
                self.odometer(s.t_ns, s.value);
                self.road_load_update(s.t_ns, s.value);
            }
            ch::GNSS_SPEED if self.store.fresh(ch::VEHICLE_SPEED, s.t_ns).is_none() => self.odometer(s.t_ns, s.value),
            ch::BATTERY_VOLTAGE => {
                if let Some(i) = self.store.fresh(ch::BATTERY_CURRENT, s.t_ns) {
                    self.pack.update(s.value, i, self.store.fresh(ch::BATTERY_SOC, s.t_ns));
                }
            }
            ch::AMBIENT_WIND => self.wind.push(s.t_ns, s.value),
            ch::BATTERY_TEMP => self.heating.push(s.t_ns, s.value),
            _ => {}
        }
    }

    fn odometer(&mut self, t_ns: TimeNs, v: f64) {
        if let Some((t0, v0)) = self.odo_last {
            let dt = (t_ns - t0) as f64 * 1e-9;
            if dt > 0.0 && dt < 2.0 {
                self.odo_m += 0.5 * (v + v0) * dt;
                let a = (v - v0) / dt;
                let alpha = dt / (ACCEL_FILTER_S + dt);
                self.accel_from_speed = Some(match self.accel_from_speed {
                    Some(prev) => prev + alpha * (a - prev),
                    None => a,
                });
            }
        }
        self.odo_last = Some((t_ns, v));
    }

    fn road_load_update(&mut self, t_ns: TimeNs, v: f64) {
        let st = &self.store;
        let Some(a) = st.fresh(ch::VEHICLE_ACCEL, t_ns).or(self.accel_from_speed) else { return };
        let engine_w = st.fresh(ch::ENGINE_POWER, t_ns);
        let motor_w = st.fresh(ch::MOTOR_POWER, t_ns);
        if engine_w.is_none() && motor_w.is_none() {
            return;
        }
        let sample = BalanceSample {
            v_mps: v,
            a_mps2: a,
            rho: if self.derived.air_density > 0.0 { self.derived.air_density } else { return },
            wind_mps: st
                .last_valid(ch::AMBIENT_WIND)
                .filter(|(_, ts)| t_ns - ts <= WEATHER_MAX_AGE_NS)
                .map_or(0.0, |w| w.0),
            grade: self.config.track.grade_at(self.odo_m),
            engine_w: engine_w.unwrap_or(0.0),
            motor_w: motor_w.unwrap_or(0.0),
            throttle: st.fresh(ch::DRIVER_THROTTLE, t_ns).unwrap_or(1.0),
            brake: st.fresh(ch::DRIVER_BRAKE, t_ns).unwrap_or(0.0),
        };
        self.road.update(&self.config.vehicle, &sample);
    }

    /// Emits the snapshots due before `t_ns` without an event (a step in a
    /// paused replay, a clock in a live session). The same snapshots would
    /// come with the next event later than them, so this changes nothing
    /// but when they are seen.
    pub fn advance(&mut self, t_ns: TimeNs, sources: &SourceTable, sink: &mut impl FnMut(Snapshot)) {
        if self.next_snapshot_ns.is_some() {
            self.advance_to(t_ns, sources, sink);
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
            self.tick(next, sources);
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
            self.tick(next, sources);
            sink(self.snapshot_at(next, sources));
            self.next_snapshot_ns = Some(next + self.opts.snapshot_every_ns);
        }
    }

    fn tick_inputs(&self, t: TimeNs) -> TickInputs {
        let st = &self.store;
        let f = |id| st.fresh(id, t);
        let speed = match (f(ch::VEHICLE_SPEED), f(ch::GNSS_SPEED)) {
            (Some(v), _) => Some((v, "vehicle.speed", age(st, ch::VEHICLE_SPEED, t))),
            (None, Some(v)) => Some((v, "gnss.speed", age(st, ch::GNSS_SPEED, t))),
            _ => None,
        };
        let accel = match f(ch::VEHICLE_ACCEL) {
            Some(a) => Some((a, "channel")),
            None => self.accel_from_speed.filter(|_| speed.is_some()).map(|a| (a, "from speed")),
        };
        let recent = |id| st.last_valid(id).filter(|(_, ts)| t - ts <= WEATHER_MAX_AGE_NS);
        let weather = match (recent(ch::AMBIENT_TEMP), recent(ch::AMBIENT_PRESSURE)) {
            (Some((tc, t1)), Some((p, t2))) => {
                let rh = recent(ch::AMBIENT_HUMIDITY);
                let oldest = [Some(t1), Some(t2), rh.map(|r| r.1)].into_iter().flatten().min().unwrap_or(t1);
                Some((tc, p, rh.map(|r| r.0), (t - oldest) as f64 * 1e-9))
            }
            _ => None,
        };
        let rated_motor = self.config.vehicle.motor_rated_power_w;
        let boosting = match f(ch::DRIVER_BOOST) {
            Some(b) => b >= 0.5,
            None => f(ch::MOTOR_POWER).is_some_and(|p| p > 0.05 * rated_motor),
        };
        TickInputs {
            speed,
            distance_m: self.odo_m,
            accel,
            weather,
            wind_mps: self.wind.mean(t),
            engine_w: f(ch::ENGINE_POWER),
            motor_w: f(ch::MOTOR_POWER),
            voltage_v: f(ch::BATTERY_VOLTAGE),
            current_a: f(ch::BATTERY_CURRENT),
            soc: f(ch::BATTERY_SOC),
            temp_c: f(ch::BATTERY_TEMP),
            power_limit_w: f(ch::BATTERY_POWER_LIMIT),
            boosting,
            throttle: f(ch::DRIVER_THROTTLE),
            brake: f(ch::DRIVER_BRAKE),
        }
    }

    /// The work of one snapshot tick: derived quantities, the derating
    /// tracker and the alerts.
    fn tick(&mut self, t: TimeNs, sources: &SourceTable) {
        let dt = self.last_tick_ns.map_or(0.0, |l| (t - l) as f64 * 1e-9);
        self.last_tick_ns = Some(t);
        let inp = self.tick_inputs(t);
        // The derating tracker runs on the ratio of the previous tick's
        // deliverable power, then the derived block uses its fit.
        self.derate.tick(dt, inp.boosting, self.derived.battery.derating_ratio.filter(|_| inp.boosting));
        let mut d = derived::compute(
            &self.config,
            &inp,
            &self.road.estimate(),
            self.pack.estimate(),
            self.derate.time_in_boost_s,
            self.derate.fit,
            self.heating.rate_c_per_s(),
        );
        // The engine rejects non-finite derived values rather than show them.
        if !d.air_density.is_finite() || d.air_density <= 0.0 {
            self.rejected_values += 1;
            d.air_density = physics::air::isa_troposphere(0.0).2;
        }
        if d.projection.as_ref().is_some_and(|p| !p.peak_mps.is_finite()) {
            self.rejected_values += 1;
            d.projection = None;
            d.projection_note = Some("rejected: non-finite result");
        }
        self.derived = d;
        self.check_message_rates(t);
        self.evaluate_alerts(t, sources, &inp);
    }

    /// Every [`RATE_WINDOW_NS`], compares each message's frames with what
    /// its period promises; a message that has arrived at all but below
    /// [`RATE_SHORT`] of its rate is short (lost frames, a failing node).
    fn check_message_rates(&mut self, t: TimeNs) {
        let counts = &self.decoder.can.message_counts;
        if self.rate_window.1.len() != counts.len() {
            self.rate_window = (t, counts.iter().map(|c| c.frames).collect());
            return;
        }
        let span = t - self.rate_window.0;
        if span < RATE_WINDOW_NS {
            return;
        }
        self.short_messages.clear();
        for (c, &before) in counts.iter().zip(&self.rate_window.1) {
            let got = (c.frames - before) as f64;
            let expected = span as f64 / c.period_ns as f64;
            if c.frames > 0 && expected >= 5.0 && got > 0.0 && got < RATE_SHORT * expected {
                self.short_messages.push((c.name.clone(), got / expected));
            }
        }
        self.rate_window = (t, counts.iter().map(|c| c.frames).collect());
    }

    fn evaluate_alerts(&mut self, t: TimeNs, sources: &SourceTable, inp: &TickInputs) {
        let cfg = self.config.clone();
        let lim = &cfg.alerts.limits;
        let d = &self.derived;
        let book = &mut self.alerts;
        // Sources: down, silent, parse errors, CAN bus errors.
        let mut quiet_sources: Vec<SourceId> = Vec::new();
        for (id, info) in sources.iter() {
            let Some(h) = self.health.get_mut(id.0 as usize) else { continue };
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
            let reason = h.link_reason.clone();
            book.set(t, &format!("down:{}", info.name), Severity::Alarm, down, || {
                format!("{} is down: {reason}", info.name)
            });
            let last = h.last_t_ns.unwrap_or(t);
            book.set(t, &format!("silent:{}", info.name), Severity::Alarm, silent, || {
                format!("{} silent for {:.1} s", info.name, (t - last) as f64 * 1e-9)
            });
            let pe = self.decoder.source_stats(id);
            if pe.parse_errors > h.parse_errors_seen {
                h.parse_errors_seen = pe.parse_errors;
                h.last_parse_error_ns = Some(t);
            }
            let recent = h.last_parse_error_ns.is_some_and(|p| t - p < 5 * NS_PER_S);
            let n = pe.parse_errors;
            book.set(t, &format!("parse:{}", info.name), Severity::Caution, recent, || {
                format!("{}: {n} bad lines ({})", info.name, pe.last_error.clone().unwrap_or_default())
            });
            let lost_recent = h.last_lost_ns.is_some_and(|p| t - p < 5 * NS_PER_S);
            let lost = h.lost;
            book.set(t, &format!("lost:{}", info.name), Severity::Caution, lost_recent, || {
                format!("{}: {lost} frames lost before termvel could read them (receive queue full)", info.name)
            });
            let bus = h.last_bus_error_ns.is_some_and(|p| t - p < 5 * NS_PER_S);
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
                },
            );
        }
        // Stale channels, grouped by the CAN message they come in (or the
        // source, for serial channels): one dropped message is one alert
        // listing its channels. Not when the source is already reported quiet.
        let mut groups: std::collections::BTreeMap<String, (Vec<&str>, f64)> = std::collections::BTreeMap::new();
        for (id, info) in self.decoder.channels.iter() {
            let Some(stc) = self.store.get(id) else { continue };
            if info.expected_period_ns.is_none() {
                continue;
            }
            let group = match self.decoder.can.channel_message.iter().find(|(c, _)| *c == id) {
                Some((_, m)) => m.clone(),
                None => sources.name(stc.source).to_string(),
            };
            let entry = groups.entry(group).or_insert((Vec::new(), 0.0));
            if self.store.is_stale(id, t) && !quiet_sources.contains(&stc.source) {
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
                format!("{group} stale {age_s:.1} s: {list}")
            });
        }
        // Messages short of their rate (frames lost on the way).
        let short = &self.short_messages;
        for c in &self.decoder.can.message_counts {
            let s = short.iter().find(|(n, _)| *n == c.name);
            book.set(t, &format!("rate:{}", c.name), Severity::Caution, s.is_some(), || {
                format!("{} arriving at {:.0} % of its rate: frames lost", c.name, s.map_or(0.0, |x| x.1 * 100.0))
            });
        }
        // Channels reading outside their valid range.
        for (id, info) in self.decoder.channels.iter() {
            let Some(stc) = self.store.get(id) else { continue };
            if stc.invalid == 0 {
                continue;
            }
            let out = !stc.valid && t - stc.t_ns < 5 * NS_PER_S;
            let v = stc.value;
            book.set(t, &format!("range:{}", info.name), Severity::Caution, out, || {
                format!("{} reads {v:.4} {}: outside its valid range, not used", info.name, info.dimension.si_unit())
            });
        }
        // Wheel speed against GNSS speed: a stuck or failing speed sensor.
        let disagree = match (self.store.fresh(ch::VEHICLE_SPEED, t), self.store.fresh(ch::GNSS_SPEED, t)) {
            (Some(w), Some(g)) => (w - g).abs() > SPEED_AGREE_MPS.max(SPEED_AGREE_FRAC * g.abs()),
            _ => false,
        };
        let since = if disagree { Some(*self.speed_disagree_since.get_or_insert(t)) } else { None };
        if !disagree {
            self.speed_disagree_since = None;
        }
        let (w, g) =
            (self.store.fresh(ch::VEHICLE_SPEED, t).unwrap_or(0.0), self.store.fresh(ch::GNSS_SPEED, t).unwrap_or(0.0));
        book.set(t, "speed-disagree", Severity::Caution, since.is_some_and(|s| t - s >= SPEED_DISAGREE_NS), || {
            format!("wheel speed {:.1} m/s and GNSS {:.1} m/s disagree: a sensor may be stuck", w, g)
        });
        let b = &d.battery;
        let running = d.speed_mps.is_some_and(|v| v > 5.0);
        let ratio = b.derating_ratio.unwrap_or(1.0);
        book.set(t, "derating", Severity::Caution, b.boosting && ratio < lim.derating_onset_ratio, || {
            format!("battery derating: {:.0} % of rated power", ratio * 100.0)
        });
        let left = d.boost_left;
        book.set(
            t,
            "boost-low",
            Severity::Caution,
            b.boosting && left.seconds.is_some_and(|s| s < lim.boost_left_low_s),
            || {
                format!(
                    "boost left {:.1} s ({} limit)",
                    left.seconds.unwrap_or(0.0),
                    left.binding.map_or("?", |l| l.as_str())
                )
            },
        );
        let target_kmh = cfg.track.target_speed_mps * 3.6;
        let peak = d.projection.as_ref().map(|p| p.peak_mps * 3.6);
        // A prediction hovering at the target should not flap the alert:
        // out of reach for TARGET_PERSIST_NS before it is raised.
        let lost = running && d.projection.as_ref().is_some_and(|p| !p.target_reachable);
        let lost_since = if lost { Some(*self.target_lost_since.get_or_insert(t)) } else { None };
        if !lost {
            self.target_lost_since = None;
        }
        book.set(t, "target", Severity::Caution, lost_since.is_some_and(|s| t - s >= TARGET_PERSIST_NS), || {
            format!("target {target_kmh:.0} km/h out of reach: projected peak {:.0} km/h", peak.unwrap_or(0.0))
        });
        let braking_now = inp.brake.is_some_and(|x| x > 0.1);
        let br = d.braking;
        let approach = running && !braking_now && br.is_some_and(|x| !x.passed && x.in_s < lim.braking_approach_s);
        book.set(t, "brake-approach", Severity::Alarm, approach, || {
            format!("braking point in {:.1} s ({:.0} m)", br.map_or(0.0, |x| x.in_s), br.map_or(0.0, |x| x.distance_m))
        });
        let passed = running && !braking_now && br.is_some_and(|x| x.passed);
        book.set(t, "brake-passed", Severity::Alarm, passed, || {
            format!("past the braking point by {:.0} m: brake", br.map_or(0.0, |x| -x.distance_m))
        });
        let ty = d.tyre;
        book.set(t, "tyre", Severity::Alarm, ty.is_some_and(|x| x.margin_mps < lim.tyre_margin_low_mps), || {
            format!("tyre speed margin {:.0} km/h", ty.map_or(0.0, |x| x.margin_mps * 3.6))
        });
        book.set(
            t,
            "tyre-projected",
            Severity::Caution,
            running && ty.is_some_and(|x| x.peak_margin_mps.is_some_and(|m| m < 0.0)),
            || {
                format!(
                    "projected peak above the tyres' rating by {:.0} km/h",
                    ty.and_then(|x| x.peak_margin_mps).map_or(0.0, |m| -m * 3.6)
                )
            },
        );
        let temp_limit = cfg.vehicle.battery.temp_limit_c;
        let temp = b.temp_c;
        let hot = temp.is_some_and(|x| x >= temp_limit - lim.battery_temp_margin_c);
        let sev = if temp.is_some_and(|x| x >= temp_limit) { Severity::Alarm } else { Severity::Caution };
        book.set(t, "battery-temp", sev, hot, || {
            format!("pack at {:.1} °C (limit {temp_limit:.0} °C)", temp.unwrap_or(0.0))
        });
        // The engineer's own rules.
        let store = &self.store;
        let channels = &self.decoder.channels;
        book.evaluate_rules(t, &cfg.alerts.rules, |name| {
            if let Some(q) = quantities::find(name) {
                quantities::value(q, d)
            } else {
                channels.find(name).and_then(|id| store.fresh(id, t))
            }
        });
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
                error_frames: h.error_frames,
                lost: h.lost,
            });
        }
        let mut counters = self.counters;
        counters.out_of_range = self.decoder.can.counters.out_of_range;
        counters.parse_errors = self.decoder.parse_errors();
        counters.rejected_values = self.rejected_values;
        Snapshot {
            t_ns,
            channels,
            sources: source_views,
            counters,
            derived: self.derived.clone(),
            alerts: self.alerts.visible(),
            marks: self.marks.len(),
        }
    }
}

fn age(st: &ChannelStore, id: ChannelId, t: TimeNs) -> f64 {
    st.get(id).map_or(f64::NAN, |s| (t - s.t_ns) as f64 * 1e-9)
}
