//! sim: the rehearsal simulator. It runs the simulated car ([`car`]) and
//! puts on the wire what a real car would: CAN frames encoded through the
//! signal map at each message's period, NMEA sentences from a GNSS receiver
//! at its rate, with the plan's sensor noise and injected faults. It is an
//! [`EventSource`], so a rehearsal goes through the same decoders, engine,
//! recorder and screens as a replay or a live run.

pub mod car;
pub mod demo;
pub mod rng;

use std::collections::VecDeque;
use std::sync::Arc;

use crate::config::run_plan::{FaultKind, Plan, Trigger};
use crate::config::signals::Signal;
use crate::config::{ConfigSet, Signals};
use crate::decode::can::encode_signal;
use crate::decode::nmea;
use crate::event::{
    CanFrame, DataFrame, ErrorFrame, Event, FdFrame, LinkState, NS_PER_S, Payload, SESSION, SourceId, SourceKind,
    SourceTable, TimeNs, err_class, fd_flags,
};
use crate::sources::EventSource;
use car::{Car, Phase};
use rng::Rng;

/// Integration step, ns.
pub const STEP_NS: TimeNs = 1_000_000;
/// Interval of the clock ticks a live session would record, ns.
pub const TICK_NS: TimeNs = NS_PER_S / 10;
/// Truth is logged at this interval, ns.
pub const TRUTH_EVERY_NS: TimeNs = 10_000_000;
/// A rehearsal stops after this long whatever happens, s.
pub const MAX_DURATION_S: f64 = 1800.0;
/// Mean Earth radius for the flat-earth position offsets, m (IUGG mean radius, from memory).
const EARTH_R_M: f64 = 6_371_008.8;

/// What the simulator knew at one instant, for ground-truth checks.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TruthPoint {
    pub t_ns: TimeNs,
    pub x_m: f64,
    pub v_mps: f64,
    pub a_mps2: f64,
    pub rho: f64,
    pub boosting: bool,
    pub throttle: f64,
    /// Battery power deliverable now (the truth behind `battery.power_limit`), W.
    pub battery_limit_w: f64,
    pub motor_power_w: f64,
    pub wheel_power_w: f64,
    pub soc: f64,
    pub pack_temp_c: f64,
    pub energy_above_reserve_j: f64,
    pub boost_time_s: f64,
    pub braking: bool,
}

struct MessagePlan {
    index: usize,
    period_ns: TimeNs,
    next_ns: TimeNs,
    signals: Vec<Signal>,
}

#[derive(Clone, Debug, Default)]
struct FaultRun {
    started_s: Option<f64>,
    ended: bool,
    stuck: Vec<(String, f64)>,
}

/// The rehearsal simulator.
pub struct Simulator {
    cfg: Arc<ConfigSet>,
    plan: Arc<Plan>,
    car: Car,
    rng: Rng,
    sources: SourceTable,
    can_src: SourceId,
    gnss_src: SourceId,
    messages: Vec<MessagePlan>,
    gnss_next_ns: TimeNs,
    gnss_period_ns: TimeNs,
    tick_next_ns: TimeNs,
    truth_next_ns: TimeNs,
    /// Time since the rehearsal's start, ns.
    t_rel_ns: TimeNs,
    queue: VecDeque<Event>,
    faults: Vec<FaultRun>,
    truth: Vec<TruthPoint>,
    finished: bool,
}

impl Simulator {
    pub fn new(cfg: Arc<ConfigSet>, plan: Arc<Plan>) -> Simulator {
        let mut rng = Rng::new(plan.seed);
        let gust_phase = rng.range(0.0, std::f64::consts::TAU);
        let mut sources = SourceTable::default();
        let can_src = sources.intern("can0", SourceKind::Can);
        let gnss_src = sources.intern("gnss0", SourceKind::Nmea);
        let messages = plan_messages(&cfg.signals, &mut rng);
        let gnss_period_ns = (1e9 / plan.sensors.gnss_rate_hz).round() as TimeNs;
        let faults = vec![FaultRun::default(); plan.faults.len()];
        Simulator {
            car: Car::new(cfg.clone(), plan.clone(), gust_phase),
            cfg,
            plan,
            rng,
            sources,
            can_src,
            gnss_src,
            messages,
            gnss_next_ns: 7_000_000,
            gnss_period_ns,
            tick_next_ns: TICK_NS,
            truth_next_ns: 0,
            t_rel_ns: 0,
            queue: VecDeque::new(),
            faults,
            truth: Vec::new(),
            finished: false,
        }
    }

    /// What the simulator knew, every 10 ms so far.
    pub fn truth(&self) -> &[TruthPoint] {
        &self.truth
    }

    /// The simulated car (for ground-truth checks).
    pub fn car(&self) -> &Car {
        &self.car
    }

    /// Absolute stream time of a time since start.
    fn abs(&self, t_rel_ns: TimeNs) -> TimeNs {
        self.plan.start_ns + t_rel_ns
    }

    fn fault_active(&self, i: usize) -> bool {
        self.faults[i].started_s.is_some() && !self.faults[i].ended
    }

    fn any_fault(&self, pred: impl Fn(&FaultKind) -> bool) -> Option<usize> {
        (0..self.faults.len()).find(|&i| self.fault_active(i) && pred(&self.plan.faults[i].kind))
    }

    /// Starts and ends faults; emits the link events of dropouts and the
    /// frames of error bursts.
    fn update_faults(&mut self, out: &mut Vec<(TimeNs, u32, Event)>) {
        let t_s = self.t_rel_ns as f64 * 1e-9;
        let now = self.abs(self.t_rel_ns);
        for i in 0..self.plan.faults.len() {
            let f = &self.plan.faults[i];
            let run = &self.faults[i];
            if run.started_s.is_none() {
                let due = match f.trigger {
                    Trigger::AtTime(s) => t_s >= s,
                    Trigger::AtDistance(m) => self.car.s.x_m >= m,
                };
                if !due {
                    continue;
                }
                self.faults[i].started_s = Some(t_s);
                match &f.kind {
                    FaultKind::Dropout { source } => {
                        let src = if source == "can" { self.can_src } else { self.gnss_src };
                        out.push((
                            now,
                            0,
                            Event::new(now, src, Payload::Link(LinkState::Down, "simulated dropout".into())),
                        ));
                    }
                    FaultKind::ErrorBurst { count } => {
                        for k in 0..*count {
                            let t = now + k as TimeNs * 500_000;
                            let mut data = [0u8; 8];
                            data[2] = 0x08; // protocol violation: bit stuffing error
                            let class = if k == count / 2 {
                                err_class::CONTROLLER
                            } else {
                                err_class::PROTOCOL | err_class::BUS_ERROR
                            };
                            if class == err_class::CONTROLLER {
                                data[1] = err_class::CTRL_RX_PASSIVE;
                            }
                            let frame = ErrorFrame::new(class, &data).expect("valid class");
                            out.push((t, 1, Event::new(t, self.can_src, Payload::Can(CanFrame::Error(frame)))));
                        }
                    }
                    FaultKind::Stuck { channel } => {
                        let v = self.car.channel(channel).unwrap_or(0.0);
                        self.faults[i].stuck.push((channel.clone(), v));
                    }
                    FaultKind::Derate { factor } => self.car.s.derate_speedup = *factor,
                    _ => {}
                }
            } else if !run.ended
                && let (Some(start), Some(len)) = (run.started_s, f.for_s)
                && t_s >= start + len
            {
                self.faults[i].ended = true;
                match &f.kind {
                    FaultKind::Dropout { source } => {
                        let src = if source == "can" { self.can_src } else { self.gnss_src };
                        out.push((
                            now,
                            0,
                            Event::new(now, src, Payload::Link(LinkState::Up, "simulated source back".into())),
                        ));
                    }
                    FaultKind::Derate { .. } => self.car.s.derate_speedup = 1.0,
                    _ => {}
                }
            }
        }
    }

    /// A sensor reading of `channel`: truth plus the plan's noise.
    fn measure(&mut self, channel: &str) -> Option<f64> {
        let truth = self.car.channel(channel)?;
        let n = &self.plan.sensors;
        let sigma = match channel {
            "vehicle.speed" => n.noise_speed_mps,
            "vehicle.accel" => n.noise_accel_mps2,
            "engine.power" | "motor.power" | "engine.torque" => n.noise_power_frac * truth.abs(),
            "battery.voltage" => n.noise_voltage_v,
            "battery.current" => n.noise_current_a,
            c if c.ends_with(".temp") => n.noise_temp_c,
            _ => 0.0,
        };
        let v = if sigma > 0.0 { truth + sigma * self.rng.normal() } else { truth };
        // A standing car reads zero speed and acceleration, not noise.
        Some(if self.car.s.v_mps == 0.0 && (channel == "vehicle.speed") { v.max(0.0) } else { v })
    }

    fn emit_message(&mut self, mi: usize, t_ns: TimeNs, out: &mut Vec<(TimeNs, u32, Event)>) {
        if self.any_fault(|k| matches!(k, FaultKind::Dropout { source } if source == "can")).is_some() {
            return;
        }
        let signals = std::mem::take(&mut self.messages[mi].signals);
        let stale = signals
            .iter()
            .any(|s| self.any_fault(|k| matches!(k, FaultKind::Stale { channel } if *channel == s.channel)).is_some());
        if stale {
            self.messages[mi].signals = signals;
            return;
        }
        let loss =
            self.any_fault(|k| matches!(k, FaultKind::FrameLoss { .. })).map(|i| match self.plan.faults[i].kind {
                FaultKind::FrameLoss { rate } => rate,
                _ => 0.0,
            });
        if let Some(rate) = loss
            && self.rng.uniform() < rate
        {
            self.messages[mi].signals = signals;
            return;
        }
        let cfg = self.cfg.clone();
        let m = &cfg.signals.messages[self.messages[mi].index];
        let mut data = vec![0u8; m.length as usize];
        for s in &signals {
            let oor = (0..self.faults.len()).find_map(|i| match &self.plan.faults[i].kind {
                FaultKind::OutOfRange { channel, value } if self.fault_active(i) && *channel == s.channel => {
                    Some(*value)
                }
                _ => None,
            });
            let stuck = (0..self.faults.len()).find_map(|i| {
                if !self.fault_active(i) {
                    return None;
                }
                self.faults[i].stuck.iter().find(|(c, _)| *c == s.channel).map(|(_, v)| *v)
            });
            let phys = if let Some(v) = oor {
                v
            } else if let Some(v) = stuck {
                s.unit.from_si(v)
            } else {
                match self.measure(&s.channel) {
                    Some(v) => s.unit.from_si(v),
                    None => continue,
                }
            };
            encode_signal(s, phys, &mut data);
        }
        let frame = if m.fd {
            CanFrame::Fd(FdFrame::new(m.id, fd_flags::BRS, &data).expect("validated FD length"))
        } else {
            CanFrame::Data(DataFrame::new(m.id, &data).expect("validated classic length"))
        };
        out.push((t_ns, 10 + mi as u32, Event::new(t_ns, self.can_src, Payload::Can(frame))));
        self.messages[mi].signals = signals;
    }

    fn emit_gnss(&mut self, t_ns: TimeNs, out: &mut Vec<(TimeNs, u32, Event)>) {
        if self.any_fault(|k| matches!(k, FaultKind::Dropout { source } if source == "gnss")).is_some() {
            return;
        }
        let sens = self.plan.sensors.clone();
        let x = self.car.s.x_m;
        let h = sens.heading_deg.to_radians();
        let lat = sens.latitude + (x * h.cos() / EARTH_R_M).to_degrees();
        let lon = sens.longitude + (x * h.sin() / (EARTH_R_M * sens.latitude.to_radians().cos())).to_degrees();
        let v = (self.car.s.v_mps + sens.noise_gnss_speed_mps * self.rng.normal()).max(0.0);
        let kn = v / crate::units::KNOT_MPS;
        let (y, mo, d, hh, mi, ss) = crate::civil_time::utc_parts(t_ns.div_euclid(NS_PER_S));
        let cs = t_ns.rem_euclid(NS_PER_S) / 10_000_000;
        let time = format!("{hh:02}{mi:02}{ss:02}.{cs:02}");
        let date = format!("{d:02}{mo:02}{:02}", y % 100);
        let (lat_s, ns) = nmea_coord(lat, 2, 'N', 'S');
        let (lon_s, ew) = nmea_coord(lon, 3, 'E', 'W');
        let alt = self.cfg.track.elevation_m;
        let rmc = nmea::sentence(&format!(
            "GPRMC,{time},A,{lat_s},{ns},{lon_s},{ew},{kn:.3},{:.1},{date},,,A",
            sens.heading_deg
        ));
        let gga = nmea::sentence(&format!("GPGGA,{time},{lat_s},{ns},{lon_s},{ew},1,14,0.7,{alt:.1},M,0.0,M,,"));
        let vtg = nmea::sentence(&format!("GPVTG,{:.1},T,,M,{kn:.3},N,{:.3},K,A", sens.heading_deg, v * 3.6));
        for (k, s) in [rmc, gga, vtg].into_iter().enumerate() {
            out.push((
                t_ns + k as TimeNs * 1000,
                2,
                Event::new(t_ns + k as TimeNs * 1000, self.gnss_src, Payload::Line(s.into_bytes())),
            ));
        }
    }

    /// Advances one step and queues the events it produced, in time order.
    fn step(&mut self) {
        if self.finished {
            return;
        }
        let from = self.t_rel_ns;
        self.t_rel_ns += STEP_NS;
        let to = self.t_rel_ns;
        self.car.step(STEP_NS as f64 * 1e-9);
        let mut out: Vec<(TimeNs, u32, Event)> = Vec::new();
        self.update_faults(&mut out);
        for mi in 0..self.messages.len() {
            while self.messages[mi].next_ns <= to {
                let t = self.messages[mi].next_ns;
                self.messages[mi].next_ns += self.messages[mi].period_ns;
                if t > from {
                    self.emit_message(mi, self.abs(t), &mut out);
                }
            }
        }
        while self.gnss_next_ns <= to {
            let t = self.abs(self.gnss_next_ns);
            self.gnss_next_ns += self.gnss_period_ns;
            self.emit_gnss(t, &mut out);
        }
        while self.tick_next_ns <= to {
            let t = self.abs(self.tick_next_ns);
            self.tick_next_ns += TICK_NS;
            out.push((t, 3, Event::new(t, SESSION, Payload::Tick)));
        }
        if self.t_rel_ns >= self.truth_next_ns {
            self.truth_next_ns += TRUTH_EVERY_NS;
            let c = &self.car;
            self.truth.push(TruthPoint {
                t_ns: self.abs(self.t_rel_ns),
                x_m: c.s.x_m,
                v_mps: c.s.v_mps,
                a_mps2: c.s.a_mps2,
                rho: c.s.rho,
                boosting: c.s.boosting,
                throttle: c.s.throttle,
                battery_limit_w: c.battery_limit_w(),
                motor_power_w: c.s.motor_power_w,
                wheel_power_w: c.s.wheel_power_w,
                soc: c.s.soc,
                pack_temp_c: c.s.pack_temp_c,
                energy_above_reserve_j: c.energy_above_reserve_j(),
                boost_time_s: c.s.boost_time_s,
                braking: c.s.phase == Phase::Braking,
            });
        }
        out.sort_by_key(|(t, order, _)| (*t, *order));
        self.queue.extend(out.into_iter().map(|(_, _, e)| e));
        if self.car.finished() || self.t_rel_ns as f64 * 1e-9 > MAX_DURATION_S {
            self.finished = true;
        }
    }

    /// Runs to the end, returning every event (for generating recordings).
    pub fn run_to_end(&mut self) -> Vec<Event> {
        let mut all = Vec::new();
        while let Some(e) = self.next_event() {
            all.push(e);
        }
        all
    }
}

/// `ddmm.mmmmm` (or `dddmm.mmmmm`) and the hemisphere letter.
fn nmea_coord(deg: f64, deg_digits: usize, pos: char, neg: char) -> (String, char) {
    let hemi = if deg < 0.0 { neg } else { pos };
    // Whole 1e-5 minutes, so rounding can never print 60 minutes.
    let total = (deg.abs() * 60.0 * 1e5).round() as u64;
    let d = total / (60 * 100_000);
    let m = total % (60 * 100_000);
    (format!("{d:0w$}{:02}.{:05}", m / 100_000, m % 100_000, w = deg_digits), hemi)
}

/// Schedules every message with a signal the car can fill, each at its
/// period with a fixed random phase (so frames do not all share one instant).
fn plan_messages(signals: &Signals, rng: &mut Rng) -> Vec<MessagePlan> {
    signals
        .messages
        .iter()
        .enumerate()
        .map(|(i, m)| {
            let phase = (rng.uniform() * m.period_ns as f64 / 1000.0).floor() as TimeNs * 1000;
            MessagePlan { index: i, period_ns: m.period_ns, next_ns: phase + 1000, signals: m.signals.clone() }
        })
        .collect()
}

impl EventSource for Simulator {
    fn next_event(&mut self) -> Option<Event> {
        while self.queue.is_empty() && !self.finished {
            self.step();
        }
        self.queue.pop_front()
    }

    fn sources(&self) -> &SourceTable {
        &self.sources
    }

    fn rewind(&mut self) -> Result<(), crate::sources::RewindError> {
        *self = Simulator::new(self.cfg.clone(), self.plan.clone());
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nmea_coordinates() {
        // 51.5636667° = 51° 33.82002' (REFERENCES.md RMC example, 5133.82,N).
        assert_eq!(nmea_coord(51.563_667, 2, 'N', 'S'), ("5133.82002".into(), 'N'));
        assert_eq!(nmea_coord(-0.704, 3, 'E', 'W'), ("00042.24000".into(), 'W'));
        // Rounding up to a whole degree carries into the degrees.
        assert_eq!(nmea_coord(12.999_999_999, 2, 'N', 'S'), ("1300.00000".into(), 'N'));
    }
}
