//! The battery screen's derating chart over time in boost: the vehicle
//! file's curve and the fitted one, computed here into the derived block so
//! that the screen only draws (the power curve's way, `power_curve.rs`), each
//! from its one definition: [`derating_ratio`] for the file's curve and
//! [`DeratingFit::ratio_at`] for the fit.

use super::estimators::DeratingFit;
use super::physics::pack::derating_ratio;
use crate::config::vehicle::Battery;

/// Steps of each curve over the chart's span.
pub const CHART_STEPS: usize = 60;
/// The span of time in boost the chart covers, s: at least this…
pub const MIN_SPAN_S: f64 = 30.0;
/// …and at most this.
pub const MAX_SPAN_S: f64 = 300.0;

/// The two curves, in per cent of the pack's rated power.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct DeratingChart {
    /// Time in boost the chart spans, s: the boost so far, or two and a half
    /// of the fit's time constants, within [`MIN_SPAN_S`] and [`MAX_SPAN_S`].
    pub span_s: f64,
    /// The vehicle file's curve from the episode's first measured ratio
    /// (100 % before one is measured), (s, %).
    pub prior: Vec<(f64, f64)>,
    /// The fitted curve, (s, %); empty without a fit.
    pub fitted: Vec<(f64, f64)>,
}

/// The chart for a boost episode whose first measured ratio is
/// `first_ratio`, `time_in_boost_s` into it, with the fit so far.
pub fn chart(b: &Battery, first_ratio: Option<f64>, time_in_boost_s: f64, fit: Option<DeratingFit>) -> DeratingChart {
    let span_s = time_in_boost_s.max(fit.map_or(0.0, |f| f.tau_s * 2.5)).clamp(MIN_SPAN_S, MAX_SPAN_S);
    let at = |i: usize| span_s * i as f64 / CHART_STEPS as f64;
    let r0 = first_ratio.filter(|r| r.is_finite()).unwrap_or(1.0);
    let prior = (0..=CHART_STEPS)
        .map(at)
        .map(|t| (t, r0 * derating_ratio(t, b.derate_tau_s, b.derate_floor) * 100.0))
        .collect();
    let fitted = match fit {
        Some(f) => (0..=CHART_STEPS).map(at).map(|t| (t, f.ratio_at(t) * 100.0)).collect(),
        None => Vec::new(),
    };
    DeratingChart { span_s, prior, fitted }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::ConfigSet;

    fn fit(tau_s: f64, floor: f64, amplitude: f64) -> DeratingFit {
        DeratingFit { tau_s, floor, amplitude, rms: 0.0, r2: 1.0, points: 50, span_s: 20.0, converged: true }
    }

    #[test]
    fn the_curves_are_the_closed_forms_over_the_span() {
        let b = ConfigSet::embedded().vehicle.battery.clone();
        // No boost yet: 30 s of the file's curve from 100 %, no fit.
        let c = chart(&b, None, 0.0, None);
        assert_eq!((c.span_s, c.prior.len(), c.fitted.len()), (MIN_SPAN_S, CHART_STEPS + 1, 0));
        assert_eq!(c.prior[0], (0.0, 100.0));
        // r(t) = floor + (1 − floor)·e^(−t/τ), scaled by the first ratio.
        let c = chart(&b, Some(0.97), 12.0, Some(fit(20.0, 0.6, 0.35)));
        assert_eq!(c.span_s, 50.0, "2.5 time constants of the fit");
        for &(t, p) in &c.prior {
            let want = 0.97 * (b.derate_floor + (1.0 - b.derate_floor) * (-t / b.derate_tau_s).exp()) * 100.0;
            assert!((p - want).abs() < 1e-9, "file's curve at {t} s: {p} against {want}");
        }
        for &(t, p) in &c.fitted {
            let want = (0.6 + 0.35 * (-t / 20.0).exp()) * 100.0;
            assert!((p - want).abs() < 1e-9, "fit at {t} s: {p} against {want}");
        }
        assert_eq!(c.fitted.last().unwrap().0, 50.0);
        // A long boost spans what was boosted, up to 300 s.
        assert_eq!(chart(&b, Some(1.0), 140.0, Some(fit(20.0, 0.6, 0.4))).span_s, 140.0);
        assert_eq!(chart(&b, Some(1.0), 900.0, None).span_s, MAX_SPAN_S);
    }
}
