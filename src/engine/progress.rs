//! The run so far: the peak reached and where, whether and where the target
//! was reached, the phase of the run (waiting, running, braking, stopped),
//! where the car will be down to the exit speed against the stop-by line,
//! and two cross-checks an engineer reads beside the speed (GNSS against
//! wheel speed, the wind). The screens' braking line and end-of-run verdict
//! come from here, so they read the same numbers as the headless JSON.

use crate::event::TimeNs;

/// Below this speed the car counts as standing (m/s, about 3.6 km/h).
pub const STANDING_MPS: f64 = 1.0;
/// Brake demand above which the car counts as braking (fraction).
pub const BRAKING_DEMAND: f64 = 0.1;

/// Where the run is.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Phase {
    /// Not yet moving.
    #[default]
    Waiting,
    /// Moving, not braking.
    Running,
    /// Braking after having run.
    Braking,
    /// Standing again after having run.
    Stopped,
}

impl Phase {
    pub fn as_str(self) -> &'static str {
        match self {
            Phase::Waiting => "waiting",
            Phase::Running => "running",
            Phase::Braking => "braking",
            Phase::Stopped => "stopped",
        }
    }
}

/// The run so far, as of one snapshot.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct ProgressView {
    pub phase: Phase,
    /// Highest speed so far, m/s, and where, m from the start.
    pub peak_mps: Option<f64>,
    pub peak_at_m: Option<f64>,
    /// Peak minus the target, m/s: positive reached with room, negative missed by.
    pub peak_minus_target_mps: Option<f64>,
    /// Where the speed first reached the target, m (`None`: not reached).
    pub target_at_m: Option<f64>,
    /// Where the car will be (or was) down to the exit speed, m: the present
    /// distance plus the stopping distance while running or braking.
    pub exit_speed_at_m: Option<f64>,
    /// The stop-by line (for the exit speed) minus that, m: negative is over.
    pub stop_margin_m: Option<f64>,
    /// GNSS speed minus wheel speed, m/s: wheel slip, tyre growth or a
    /// sensor fault when large.
    pub gnss_minus_wheel_mps: Option<f64>,
}

/// The inputs of one update.
#[derive(Clone, Copy, Debug, Default)]
pub struct ProgressInputs {
    pub t_ns: TimeNs,
    pub speed_mps: Option<f64>,
    pub distance_m: f64,
    pub brake: Option<f64>,
    pub target_mps: f64,
    /// Distance to slow to the exit speed from the present speed, m.
    pub stopping_m: Option<f64>,
    pub stop_by_m: f64,
    pub wheel_mps: Option<f64>,
    pub gnss_mps: Option<f64>,
}

/// Follows a run from snapshot to snapshot.
#[derive(Clone, Debug, Default)]
pub struct ProgressTracker {
    view: ProgressView,
    /// Where the car was when it came down to the exit speed (fixed once).
    exit_reached_at_m: Option<f64>,
}

impl ProgressTracker {
    /// Updates with one tick's inputs and returns the view.
    pub fn update(&mut self, i: &ProgressInputs, exit_speed_mps: f64) -> ProgressView {
        let v = &mut self.view;
        if let Some(speed) = i.speed_mps {
            if v.peak_mps.is_none_or(|p| speed > p) {
                v.peak_mps = Some(speed);
                v.peak_at_m = Some(i.distance_m);
            }
            if v.target_at_m.is_none() && speed >= i.target_mps {
                v.target_at_m = Some(i.distance_m);
            }
            let moved = v.phase != Phase::Waiting;
            let braking = i.brake.is_some_and(|b| b > BRAKING_DEMAND);
            v.phase = match (moved, speed < STANDING_MPS, braking) {
                (false, true, _) => Phase::Waiting,
                (true, true, _) => Phase::Stopped,
                (_, false, true) => Phase::Braking,
                (_, false, false) if v.phase == Phase::Braking => Phase::Braking,
                (_, false, false) => Phase::Running,
            };
            if self.exit_reached_at_m.is_none() && moved && speed <= exit_speed_mps && v.phase != Phase::Running {
                self.exit_reached_at_m = Some(i.distance_m);
            }
        }
        v.peak_minus_target_mps = v.peak_mps.map(|p| p - i.target_mps);
        v.exit_speed_at_m = self.exit_reached_at_m.or(i.stopping_m.map(|s| i.distance_m + s));
        v.stop_margin_m = v.exit_speed_at_m.map(|x| i.stop_by_m - x);
        v.gnss_minus_wheel_mps = match (i.gnss_mps, i.wheel_mps) {
            (Some(g), Some(w)) => Some(g - w),
            _ => None,
        };
        *v
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn at(speed: f64, distance_m: f64, brake: f64, stopping_m: f64) -> ProgressInputs {
        ProgressInputs {
            t_ns: 0,
            speed_mps: Some(speed),
            distance_m,
            brake: Some(brake),
            target_mps: 100.0,
            stopping_m: Some(stopping_m),
            stop_by_m: 6800.0,
            wheel_mps: Some(speed),
            gnss_mps: Some(speed + 0.5),
        }
    }

    // Issue 15, items 5, 18 and 22: once braking the screen lost the peak and
    // the verdict, and the stop was not set against the stop-by line.
    #[test]
    fn a_run_keeps_its_peak_and_verdict_through_braking_and_the_stop() {
        let mut p = ProgressTracker::default();
        let exit = 22.0;
        assert_eq!(p.update(&at(0.0, 0.0, 0.0, 0.0), exit).phase, Phase::Waiting);
        assert_eq!(p.update(&at(60.0, 1000.0, 0.0, 400.0), exit).phase, Phase::Running);
        let v = p.update(&at(101.0, 5000.0, 0.0, 1500.0), exit);
        assert_eq!(v.target_at_m, Some(5000.0));
        assert_eq!(v.exit_speed_at_m, Some(6500.0));
        assert_eq!(v.stop_margin_m, Some(300.0));
        assert_eq!(v.gnss_minus_wheel_mps, Some(0.5));
        // Braking: the peak and where stay; the stop is set against stop-by.
        let v = p.update(&at(95.0, 5300.0, 0.8, 1400.0), exit);
        assert_eq!((v.phase, v.peak_mps, v.peak_at_m), (Phase::Braking, Some(101.0), Some(5000.0)));
        assert_eq!(v.peak_minus_target_mps, Some(1.0));
        assert_eq!(v.stop_margin_m, Some(6800.0 - 6700.0));
        // The driver eases off the pedal: still the braking phase.
        assert_eq!(p.update(&at(50.0, 6200.0, 0.0, 300.0), exit).phase, Phase::Braking);
        // Down to the exit speed at 6.6 km: that position is kept.
        let v = p.update(&at(21.0, 6600.0, 0.5, 0.0), exit);
        assert_eq!(v.exit_speed_at_m, Some(6600.0));
        let v = p.update(&at(0.5, 6750.0, 0.5, 0.0), exit);
        assert_eq!(v.phase, Phase::Stopped);
        assert_eq!(v.exit_speed_at_m, Some(6600.0));
        assert_eq!(v.stop_margin_m, Some(200.0));
        assert_eq!(v.peak_mps, Some(101.0));
    }

    #[test]
    fn a_missed_target_says_by_how_much() {
        let mut p = ProgressTracker::default();
        p.update(&at(10.0, 10.0, 0.0, 0.0), 22.0);
        let v = p.update(&at(97.5, 5000.0, 0.0, 900.0), 22.0);
        assert_eq!(v.target_at_m, None);
        assert_eq!(v.peak_minus_target_mps, Some(-2.5));
    }
}
