//! The engine's online estimators: drag area and rolling resistance from
//! the power balance; the battery's open-circuit voltage and internal
//! resistance; the derating curve over time in boost; the pack heating rate.
//! Each is fed only fresh, plausible data and says whether it has converged.

use std::collections::VecDeque;

use super::physics::roadload::{G_MPS2, wheel_power_w};
use super::rls::{Rls, Rls2};
use crate::config::Vehicle;
use crate::event::TimeNs;

/// Slowest speed the road-load estimator uses, m/s: below it clutch slip,
/// tyre transients and the P/v division make the balance unreliable.
pub const ESTIMATOR_MIN_SPEED_MPS: f64 = 20.0;

/// One value with its standard deviation.
#[derive(Clone, Copy, Debug, PartialEq, Default, serde::Serialize)]
pub struct Estimated {
    pub value: f64,
    pub sd: f64,
}

/// What the road-load estimator reports.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct RoadLoadEstimate {
    pub cda_m2: Estimated,
    pub crr: Estimated,
    pub converged: bool,
    /// Samples used (all) and among them coast-down samples.
    pub samples: u64,
    pub coast_samples: u64,
    /// The estimate from coast-down samples alone, once there are enough.
    pub coast: Option<(Estimated, Estimated)>,
    /// Speed range the used samples span, m/s.
    pub speed_span_mps: f64,
}

/// Inputs of one road-load estimator update, SI.
#[derive(Clone, Copy, Debug)]
pub struct BalanceSample {
    pub v_mps: f64,
    pub a_mps2: f64,
    pub rho: f64,
    pub wind_mps: f64,
    pub grade: f64,
    pub engine_w: f64,
    pub motor_w: f64,
    pub throttle: f64,
    pub brake: f64,
}

/// Drag area and rolling resistance by recursive least squares on the
/// longitudinal force balance (SAE J2263 / J1263 road-load practice: the
/// road load F = A + C·v², here with C = ½ρ·CdA and A = Crr·m·g known up
/// to the two coefficients):
///
///   F_wheel − m_eff·a − m·g·sin θ − c₂·v²·m·g·cos θ = CdA·(½ρ·v_air·|v_air|) + Crr·(m·g·cos θ)
///
/// with F_wheel = η·(P_engine + P_motor)/v. Coast-down samples (no throttle,
/// no brake) are the same equation with the drive force near zero and are
/// also fed to a second estimator of their own.
///
/// The noise is not the same on every sample: a powertrain power signal is
/// good to about a per cent of itself, so a full-power sample is noisier
/// than a coasting one, where the drive force is zero and only the
/// accelerometer's noise remains. Samples are weighted by the inverse of
/// their expected noise, σ² = σ₀² + (κ·F_wheel)² (weighted least squares);
/// the estimator's noise scale, learnt from the residuals, corrects σ₀ and
/// κ if the installation is better or worse than assumed. Testing without
/// the weights showed Crr biased by 4 % on data with coasting phases, and
/// its reported uncertainty twenty times too small.
///
/// The standard deviations account for model mismatch. The recursion's own
/// covariance, scaled by the residuals' variance, is right only for
/// residuals independent from sample to sample; a mismatch (a power signal
/// a message behind the speed, a gust the wind vane lags, a gear change
/// straddled by two messages) leaves residuals that run in one direction for
/// many samples and average out far more slowly. [`ScoreBlocks`] measures
/// how much more slowly, from blocks of the residuals times the regressors
/// (batch means of the score), and the reported variances are inflated by
/// that factor (never deflated). Without it, rehearsals ended "converged"
/// with the truth 10 standard deviations away (issue 14).
///
/// Some mismatch never shows in the residuals: a bias the fit absorbs (a
/// power signal reading 1 % high, an accelerometer a hundredth of a m/s²
/// off, a wind vane that sees another wind than the car) moves the
/// coefficients without leaving a trace. [`Systematic`] carries the budget
/// of such biases through the same least squares (the sensitivity of each
/// coefficient to each bias) and adds their effect to the variances.
#[derive(Clone, Debug)]
pub struct RoadLoadEstimator {
    all: Rls2,
    coast: Rls2,
    all_blocks: ScoreBlocks,
    coast_blocks: ScoreBlocks,
    all_sys: Systematic,
    coast_sys: Systematic,

    samples: u64,
    coast_samples: u64,
    v_lo: f64,
    v_hi: f64,
}

/// The systematic-error budget of the force balance, one standard
/// deviation each (common practice for instrumented test cars, not a
/// datasheet): the powertrain power signals' calibration, the
/// accelerometer's offset (a few hundredths of a degree of pitch), the
/// difference between the measured wind and the wind the car meets, and
/// the effective mass (the rotating inertia is rarely known better). The
/// budget was set so that rehearsals with varied cars, winds and noise are
/// calibrated (tests/suite/calibration.rs).
pub const POWER_CAL_REL: f64 = 0.003;
pub const ACCEL_OFFSET_MPS2: f64 = 0.005;
pub const WIND_OFFSET_MPS: f64 = 0.2;
pub const MASS_REL: f64 = 0.005;

/// The sensitivities of the two coefficients to each systematic bias of the
/// budget, propagated through the least squares exactly as the data is
/// (the fit is linear in y: a bias δ on every sample moves θ by the fit of
/// δ alone, with the same gains).
#[derive(Clone, Debug, Default)]
pub struct Systematic {
    /// s[source][parameter]: the coefficient's shift for a one-sigma bias.
    s: [[f64; 2]; 4],
}

impl Systematic {
    fn push(&mut self, k: [f64; 2], phi: [f64; 2], deltas: [f64; 4]) {
        for (s, d) in self.s.iter_mut().zip(deltas) {
            let e = d - (phi[0] * s[0] + phi[1] * s[1]);
            s[0] += k[0] * e;
            s[1] += k[1] * e;
        }
    }

    /// The variance the budget adds to each coefficient (sources independent).
    fn var(&self) -> [f64; 2] {
        let mut v = [0.0; 2];
        for s in &self.s {
            v[0] += s[0] * s[0];
            v[1] += s[1] * s[1];
        }
        v
    }
}

/// How much more slowly than independent residuals the residuals of a
/// least-squares fit average out, per parameter: the score g = φ·e (e the
/// normalised a-priori residual) summed over blocks of [`Self::BLOCK`]
/// samples has second moment B·E[g²] when the residuals are independent,
/// more when they are correlated (the batch-means estimate of the long-run
/// variance; Flegal and Jones, Annals of Statistics 38, 2010). Moments are
/// taken about zero, not the mean: a residual that keeps one sign is the
/// mismatch this is meant to see. Both moments are averaged over the
/// estimator's memory.
#[derive(Clone, Debug, Default)]
pub struct ScoreBlocks {
    sample_m2: [f64; 2],
    block_m2: [f64; 2],
    sum: [f64; 2],
    in_block: u32,
    samples: u64,
    blocks: u64,
}

impl ScoreBlocks {
    /// Samples in a block (about 2 s at 100 updates a second: longer than
    /// a gear change or a message's lag, shorter than a run).
    pub const BLOCK: u32 = 200;
    /// Blocks needed before the factor is trusted; before that it is the
    /// largest of what has been seen and [`Self::EARLY_FACTOR`].
    pub const MIN_BLOCKS: u64 = 3;
    /// The variance factor assumed before [`Self::MIN_BLOCKS`] blocks.
    pub const EARLY_FACTOR: f64 = 4.0;

    fn push(&mut self, phi: [f64; 2], e: f64, lambda: f64) {
        self.samples += 1;
        let rate = (1.0 / self.samples as f64).max(1.0 - lambda);
        for ((m2, sum), x) in self.sample_m2.iter_mut().zip(&mut self.sum).zip(phi) {
            let g = x * e;
            *m2 += rate * (g * g - *m2);
            *sum += g;
        }
        self.in_block += 1;
        if self.in_block == Self::BLOCK {
            self.blocks += 1;
            let rate = (1.0 / self.blocks as f64).max(1.0 - lambda.powi(Self::BLOCK as i32));
            for i in 0..2 {
                self.block_m2[i] += rate * (self.sum[i] * self.sum[i] - self.block_m2[i]);
            }
            self.sum = [0.0; 2];
            self.in_block = 0;
        }
    }

    /// The variance factor per parameter, at least 1.
    pub fn factor(&self) -> [f64; 2] {
        let mut f = [1.0; 2];
        for (i, fi) in f.iter_mut().enumerate() {
            let naive = Self::BLOCK as f64 * self.sample_m2[i];
            let measured = if naive > 0.0 && self.blocks > 0 { self.block_m2[i] / naive } else { 1.0 };
            *fi = if self.blocks >= Self::MIN_BLOCKS { measured } else { measured.max(Self::EARLY_FACTOR) };
            *fi = fi.max(1.0);
        }
        f
    }
}

impl RoadLoadEstimator {
    /// Forgetting per update (at about 100 updates a second: a memory of
    /// some 50 s of data).
    pub const LAMBDA: f64 = 0.9998;
    /// Expected noise of a sample with no drive force (accelerometer,
    /// speed), N.
    pub const SIGMA0_N: f64 = 50.0;
    /// Expected relative noise of the drive force (the power signals).
    pub const KAPPA: f64 = 0.01;
    /// A sample's residual is clipped at this many of its expected
    /// standard deviations (see [`super::rls::Rls::update_robust`]).
    pub const CLIP_SIGMAS: f64 = 4.0;

    /// Prior standard deviations: the vehicle file's values are held loosely.
    pub fn cda_sd(vehicle: &Vehicle) -> f64 {
        0.3 * vehicle.cda_m2
    }
    pub fn crr_sd(vehicle: &Vehicle) -> f64 {
        0.5 * vehicle.crr0.max(0.002)
    }

    pub fn new(vehicle: &Vehicle) -> RoadLoadEstimator {
        // The prior is the vehicle file's values, loosely held. The
        // recursion runs on samples normalised by their expected noise, so
        // its unit noise is 1.
        let prior = [vehicle.cda_m2, vehicle.crr0];
        let sd = [Self::cda_sd(vehicle), Self::crr_sd(vehicle)];
        RoadLoadEstimator {
            all: Rls2::new(prior, sd, 1.0, Self::LAMBDA),
            coast: Rls2::new(prior, sd, 1.0, Self::LAMBDA),
            all_blocks: ScoreBlocks::default(),
            coast_blocks: ScoreBlocks::default(),
            all_sys: Systematic::default(),
            coast_sys: Systematic::default(),

            samples: 0,
            coast_samples: 0,
            v_lo: f64::INFINITY,
            v_hi: 0.0,
        }
    }

    /// Feeds one sample if it is usable; returns whether it was used.
    pub fn update(&mut self, veh: &Vehicle, s: &BalanceSample) -> bool {
        if !(s.v_mps >= ESTIMATOR_MIN_SPEED_MPS && s.brake < 0.02) {
            return false;
        }
        let theta = s.grade.atan();
        let mg_cos = veh.mass_kg * G_MPS2 * theta.cos();
        let v_air = s.v_mps + s.wind_mps;
        let f_wheel = wheel_power_w(s.engine_w, s.motor_w, veh.driveline_efficiency) / s.v_mps;
        let y = f_wheel
            - veh.effective_mass_kg() * s.a_mps2
            - veh.mass_kg * G_MPS2 * theta.sin()
            - veh.crr2_s2_m2 * s.v_mps * s.v_mps * mg_cos;
        let w = 1.0 / (Self::SIGMA0_N * Self::SIGMA0_N + (Self::KAPPA * f_wheel).powi(2)).sqrt();
        let phi = [0.5 * s.rho * v_air * v_air.abs() * w, mg_cos * w];
        let y = y * w;
        // What each bias of the budget would add to this sample's y.
        let deltas = [
            POWER_CAL_REL * f_wheel.abs() * w,
            veh.effective_mass_kg() * ACCEL_OFFSET_MPS2 * w,
            self.all.theta[0].max(0.0) * s.rho * v_air.abs() * WIND_OFFSET_MPS * w,
            MASS_REL * veh.effective_mass_kg() * s.a_mps2 * w,
        ];
        if !(phi.iter().all(|x| x.is_finite()) && y.is_finite() && deltas.iter().all(|x| x.is_finite())) {
            return false;
        }
        let k = self.all.gain(phi);
        let Some(e) = self.all.update_robust(phi, y, Self::CLIP_SIGMAS) else { return false };
        self.all_sys.push(k, phi, deltas);
        self.all_blocks.push(phi, e, Self::LAMBDA);
        self.samples += 1;
        self.v_lo = self.v_lo.min(s.v_mps);
        self.v_hi = self.v_hi.max(s.v_mps);
        if s.throttle < 0.02 {
            let k = self.coast.gain(phi);
            if let Some(e) = self.coast.update_robust(phi, y, Self::CLIP_SIGMAS) {
                self.coast_sys.push(k, phi, deltas);
                self.coast_blocks.push(phi, e, Self::LAMBDA);
            }
            self.coast_samples += 1;
        }
        true
    }

    /// Standard deviations of `rls`, inflated by the mismatch `blocks` saw.
    fn honest_sd(rls: &Rls2, blocks: &ScoreBlocks, sys: &Systematic) -> [f64; 2] {
        let (sd, f, v) = (rls.sd(), blocks.factor(), sys.var());
        [(sd[0] * sd[0] * f[0] + v[0]).sqrt(), (sd[1] * sd[1] * f[1] + v[1]).sqrt()]
    }

    pub fn estimate(&self) -> RoadLoadEstimate {
        let sd = Self::honest_sd(&self.all, &self.all_blocks, &self.all_sys);
        let cda = Estimated { value: self.all.theta[0], sd: sd[0] };
        let crr = Estimated { value: self.all.theta[1], sd: sd[1] };
        let span = if self.samples > 0 { self.v_hi - self.v_lo } else { 0.0 };
        let converged = self.samples >= 300
            && cda.sd < 0.03 * cda.value.abs()
            && crr.sd < 0.3 * crr.value.abs().max(0.003)
            && span >= 10.0;
        let coast = (self.coast_samples >= 200).then(|| {
            let s = Self::honest_sd(&self.coast, &self.coast_blocks, &self.coast_sys);
            (Estimated { value: self.coast.theta[0], sd: s[0] }, Estimated { value: self.coast.theta[1], sd: s[1] })
        });
        RoadLoadEstimate {
            cda_m2: cda,
            crr,
            converged,
            samples: self.samples,
            coast_samples: self.coast_samples,
            coast,
            speed_span_mps: span,
        }
    }
}

/// Open-circuit voltage and internal resistance of the pack from terminal
/// voltage, current and state of charge: V = OCV(soc) − R·I, the
/// zeroth-order equivalent circuit (Plett, Battery Management Systems vol. I,
/// ch. 2) with the open-circuit voltage linear in the state of charge over
/// the window the memory spans, OCV = a + b·soc. Without the slope the
/// voltage sag of a discharging pack would be read as rising resistance.
#[derive(Clone, Debug)]
pub struct PackEstimator {
    rls: Option<Rls<3>>,
    prior_r: f64,
    cells: f64,
    soc: f64,
    i_lo: f64,
    i_hi: f64,
}

/// What the pack estimator reports.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct PackEstimate {
    pub ocv_v: Estimated,
    pub resistance_ohm: Estimated,
    /// How the open-circuit voltage rises with the state of charge, V per
    /// unit of state of charge.
    pub ocv_slope_v: Estimated,
    pub converged: bool,
}

impl PackEstimator {
    /// Forgetting per update (about 50 updates a second: some 10 s of memory).
    pub const LAMBDA: f64 = 0.998;

    pub fn new(vehicle: &Vehicle) -> PackEstimator {
        PackEstimator {
            rls: None,
            prior_r: vehicle.battery.resistance_ohm,
            cells: vehicle.battery.cells_in_series as f64,
            soc: 0.0,
            i_lo: f64::INFINITY,
            i_hi: f64::NEG_INFINITY,
        }
    }

    /// One measurement of terminal voltage and current, with the state of
    /// charge when known (0 otherwise: the slope then stays at its prior).
    pub fn update(&mut self, v: f64, i: f64, soc: Option<f64>) {
        if !(v.is_finite() && i.is_finite() && v > 0.0) {
            return;
        }
        let soc = soc.filter(|s| s.is_finite()).unwrap_or(0.0);
        self.soc = soc;
        let (prior_r, cells) = (self.prior_r, self.cells);
        let rls = self.rls.get_or_insert_with(|| {
            // A lithium-ion cell's open-circuit voltage rises some 0.8 V from
            // empty to full (common practice); the prior slope says so, loosely.
            let b = 0.8 * cells;
            Rls::new([v + prior_r * i - b * soc, b, prior_r], [0.1 * v, 0.5 * cells, 0.5 * prior_r], 0.5, Self::LAMBDA)
        });
        rls.update([1.0, soc, -i], v);
        self.i_lo = self.i_lo.min(i);
        self.i_hi = self.i_hi.max(i);
    }

    pub fn estimate(&self) -> Option<PackEstimate> {
        let r = self.rls.as_ref()?;
        let sd = r.sd();
        let phi = [1.0, self.soc, 0.0];
        let ocv = Estimated { value: r.theta[0] + r.theta[1] * self.soc, sd: r.prediction_var(phi).sqrt() };
        let res = Estimated { value: r.theta[2], sd: sd[2] };
        let converged = self.i_hi - self.i_lo >= 50.0 && res.value > 0.0 && res.sd < 0.1 * res.value;
        let ocv_slope_v = Estimated { value: r.theta[1], sd: sd[1] };
        Some(PackEstimate { ocv_v: ocv, resistance_ohm: res, ocv_slope_v, converged })
    }
}

/// A fitted derating curve: ratio(t) = floor + amplitude·e^(−t/τ) over time
/// in boost t.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct DeratingFit {
    pub tau_s: f64,
    pub floor: f64,
    pub amplitude: f64,
    /// Root-mean-square residual of the fit (ratio units).
    pub rms: f64,
    /// Coefficient of determination.
    pub r2: f64,
    pub points: usize,
    /// Time in boost the points span, s.
    pub span_s: f64,
    pub converged: bool,
}

impl DeratingFit {
    pub fn ratio_at(&self, t_s: f64) -> f64 {
        self.floor + self.amplitude * (-t_s / self.tau_s).exp()
    }
}

/// Least-squares fit of floor + A·e^(−t/τ) to (t, ratio) points: for each τ
/// the best floor and A solve a 2×2 linear system; τ is searched on a
/// logarithmic grid and refined by golden-section search.
pub fn fit_derating(points: &[(f64, f64)]) -> Option<DeratingFit> {
    if points.len() < 10 {
        return None;
    }
    let n = points.len() as f64;
    let mean = points.iter().map(|p| p.1).sum::<f64>() / n;
    let sst: f64 = points.iter().map(|p| (p.1 - mean).powi(2)).sum();
    let solve = |tau: f64| -> (f64, f64, f64) {
        let (mut se, mut see, mut sr, mut ser) = (0.0, 0.0, 0.0, 0.0);
        for &(t, r) in points {
            let e = (-t / tau).exp();
            se += e;
            see += e * e;
            sr += r;
            ser += e * r;
        }
        let det = n * see - se * se;
        let (floor, amp) = if det.abs() < 1e-12 {
            (mean, 0.0)
        } else {
            let a = (n * ser - se * sr) / det;
            let f = (sr - a * se) / n;
            if a < 0.0 { (mean, 0.0) } else { (f, a) }
        };
        let sse: f64 = points.iter().map(|&(t, r)| (r - floor - amp * (-t / tau).exp()).powi(2)).sum();
        (sse, floor, amp)
    };
    let (lo, hi) = (2.0f64, 400.0f64);
    let steps = 48;
    let mut best = (f64::INFINITY, lo);
    for k in 0..=steps {
        let tau = lo * (hi / lo).powf(k as f64 / steps as f64);
        let (sse, _, _) = solve(tau);
        if sse < best.0 {
            best = (sse, tau);
        }
    }
    // Golden-section on ln τ within one grid step either side.
    let step = (hi / lo).ln() / steps as f64;
    let (mut a, mut b) = ((best.1.ln() - step).max(lo.ln()), (best.1.ln() + step).min(hi.ln()));
    let g = 0.618_033_988_749_895;
    for _ in 0..30 {
        let c = b - g * (b - a);
        let d = a + g * (b - a);
        if solve(c.exp()).0 < solve(d.exp()).0 {
            b = d;
        } else {
            a = c;
        }
    }
    let tau = (0.5 * (a + b)).exp();
    let (sse, floor, amplitude) = solve(tau);
    let span_s =
        points.iter().map(|p| p.0).fold(0.0, f64::max) - points.iter().map(|p| p.0).fold(f64::INFINITY, f64::min);
    let rms = (sse / n).sqrt();
    let r2 = if sst > 0.0 { 1.0 - sse / sst } else { 0.0 };
    let converged = points.len() >= 20 && span_s >= 8.0 && span_s >= 0.8 * tau && rms < 0.03 && amplitude > 0.0;
    Some(DeratingFit { tau_s: tau, floor, amplitude, rms, r2, points: points.len(), span_s, converged })
}

/// Time in boost and the measured derating points.
#[derive(Clone, Debug, Default)]
pub struct DeratingTracker {
    pub time_in_boost_s: f64,
    off_for_s: f64,
    pub points: Vec<(f64, f64)>,
    last_point_at: f64,
    pub fit: Option<DeratingFit>,
    since_refit_s: f64,
}

impl DeratingTracker {
    /// A boost episode ends after this long with boost off.
    pub const EPISODE_GAP_S: f64 = 15.0;
    /// Points are kept every this many seconds of boost.
    pub const POINT_EVERY_S: f64 = 0.2;
    pub const MAX_POINTS: usize = 3000;

    /// Advances by `dt_s`. `ratio` is the deliverable power over rated now,
    /// when known; points are taken only while boosting.
    pub fn tick(&mut self, dt_s: f64, boosting: bool, ratio: Option<f64>) {
        if boosting {
            if self.off_for_s > Self::EPISODE_GAP_S && self.time_in_boost_s > 0.0 {
                // A new episode: the pack had time to recover; start afresh.
                self.time_in_boost_s = 0.0;
                self.points.clear();
                self.last_point_at = f64::NEG_INFINITY;
            }
            self.off_for_s = 0.0;
            self.time_in_boost_s += dt_s;
            if let Some(r) = ratio
                && r.is_finite()
                && (self.points.is_empty() || self.time_in_boost_s - self.last_point_at >= Self::POINT_EVERY_S - 1e-9)
                && self.points.len() < Self::MAX_POINTS
            {
                self.points.push((self.time_in_boost_s, r));
                self.last_point_at = self.time_in_boost_s;
            }
            self.since_refit_s += dt_s;
            if self.since_refit_s >= 1.0 {
                self.since_refit_s = 0.0;
                if let Some(f) = fit_derating(&self.points) {
                    self.fit = Some(f);
                }
            }
        } else {
            self.off_for_s += dt_s;
        }
    }
}

/// Heating rate of the pack: least-squares slope of its temperature over a
/// sliding window.
#[derive(Clone, Debug, Default)]
pub struct HeatingRate {
    window: VecDeque<(TimeNs, f64)>,
}

impl HeatingRate {
    pub const WINDOW_NS: TimeNs = 15_000_000_000;

    pub fn push(&mut self, t_ns: TimeNs, temp_c: f64) {
        if !temp_c.is_finite() {
            return;
        }
        self.window.push_back((t_ns, temp_c));
        while let Some(&(t0, _)) = self.window.front() {
            if t_ns - t0 > Self::WINDOW_NS {
                self.window.pop_front();
            } else {
                break;
            }
        }
    }

    /// °C/s, once the window holds at least 5 s.
    pub fn rate_c_per_s(&self) -> Option<f64> {
        let (&(t0, _), &(t1, _)) = (self.window.front()?, self.window.back()?);
        if t1 - t0 < 5_000_000_000 || self.window.len() < 5 {
            return None;
        }
        let n = self.window.len() as f64;
        let tm = self.window.iter().map(|p| (p.0 - t0) as f64 * 1e-9).sum::<f64>() / n;
        let ym = self.window.iter().map(|p| p.1).sum::<f64>() / n;
        let (mut sxy, mut sxx) = (0.0, 0.0);
        for &(t, y) in &self.window {
            let x = (t - t0) as f64 * 1e-9 - tm;
            sxy += x * (y - ym);
            sxx += x * x;
        }
        (sxx > 0.0).then(|| sxy / sxx)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::{ConfigSet, Vehicle};
    use crate::engine::physics::pack::derating_ratio;
    use crate::engine::physics::roadload::G_MPS2;
    use crate::sim::rng::Rng;

    /// Varied-speed driving from known coefficients (CdA 0.90 m², Crr
    /// 0.0128, ρ 1.17): per 10 s cycle, full power from `v0`, a lift
    /// (coasting) over `coast` seconds, full power again; sampled at 100 Hz
    /// with sensor noise (one standard deviation) on speed, acceleration and
    /// relative power. The truth is integrated here with small Euler steps,
    /// independently of the estimator. The vehicle file's prior is
    /// deliberately off (CdA 0.80, Crr 0.011).
    fn synthetic_cycles(
        seed: u64,
        v0: f64,
        power: f64,
        coast: (f64, f64),
        noise: (f64, f64, f64),
        cycles: usize,
    ) -> (Vec<BalanceSample>, Vehicle) {
        let mut veh = ConfigSet::embedded().vehicle;
        veh.cda_m2 = 0.80;
        veh.crr0 = 0.011;
        let (cda, crr0, rho) = (0.90, 0.0128, 1.17);
        let m_eff = veh.effective_mass_kg();
        let mut rng = Rng::new(seed);
        let mut v = v0;
        let mut out = Vec::new();
        let dt = 1e-4;
        for i in 0..100_000 * cycles {
            let t = (i % 100_000) as f64 * dt;
            let coasting = (coast.0..coast.1).contains(&t);
            let p_engine = if coasting { 0.0 } else { power };
            let f_drive = veh.driveline_efficiency * p_engine / v;
            let f_res = 0.5 * rho * cda * v * v + (crr0 + veh.crr2_s2_m2 * v * v) * veh.mass_kg * G_MPS2;
            let a = (f_drive - f_res) / m_eff;
            if i % 100 == 0 {
                out.push(BalanceSample {
                    v_mps: v + noise.0 * rng.normal(),
                    a_mps2: a + noise.1 * rng.normal(),
                    rho,
                    wind_mps: 0.0,
                    grade: 0.0,
                    engine_w: p_engine * (1.0 + noise.2 * rng.normal()),
                    motor_w: 0.0,
                    throttle: if coasting { 0.0 } else { 1.0 },
                    brake: 0.0,
                });
            }
            v += a * dt;
        }
        (out, veh)
    }

    /// Realistic noise: wheel speed 0.05 m/s, accelerometer 0.02 m/s²,
    /// power signals 0.3 %.
    const REALISTIC: (f64, f64, f64) = (0.05, 0.02, 0.003);

    #[test]
    fn road_load_estimate_recovers_known_coefficients() {
        // After 10 s of varied speed (25 to 57 m/s, a 3.5 s lift), in each
        // of 20 seeded runs: CdA within 2 %; the standard deviations shrink;
        // Crr within 3 of its own reported standard deviations (the
        // uncertainty is honest), and the median Crr error within 2 %.
        // 10 s of data cannot pin Crr within 2 % in every run: its standard
        // deviation after 10 s is some 1 to 4 % for any plausible noise
        // (measured by `road_load_error_spread`), so that guarantee is
        // checked after 30 s below.
        let mut crr_errors = Vec::new();
        for seed in 0..20 {
            let (samples, veh) = synthetic_cycles(seed, 25.0, 500e3, (4.0, 7.5), REALISTIC, 1);
            let (lo, hi) = samples.iter().fold((f64::MAX, 0.0f64), |(l, h), s| (l.min(s.v_mps), h.max(s.v_mps)));
            assert!(lo < 30.0 && hi > 55.0, "varied speed: {lo}..{hi}");
            let mut est = RoadLoadEstimator::new(&veh);
            let sd0 = est.estimate();
            let mut sd_mid = None;
            for (k, s) in samples.iter().enumerate() {
                assert!(est.update(&veh, s));
                if k == samples.len() / 2 {
                    sd_mid = Some(est.estimate());
                }
            }
            let e = est.estimate();
            let cda_err = e.cda_m2.value / 0.90 - 1.0;
            assert!(cda_err.abs() < 0.02, "seed {seed}: CdA {} (error {:.2} %)", e.cda_m2.value, cda_err * 100.0);
            let mid = sd_mid.unwrap();
            assert!(e.cda_m2.sd < mid.cda_m2.sd && mid.cda_m2.sd < sd0.cda_m2.sd, "seed {seed}: CdA sd shrinks");
            assert!(e.crr.sd < mid.crr.sd && mid.crr.sd < sd0.crr.sd, "seed {seed}: Crr sd shrinks");
            assert!((e.crr.value - 0.0128).abs() < 3.0 * e.crr.sd, "seed {seed}: {e:?}");
            // Issue 14, item 3: this once also asserted "converged" after
            // 10 s; with the systematic budget (0.3 % of a 20 kN drive force
            // is 60 N, as much as the rolling resistance's own uncertainty)
            // 10 s of full-power data cannot honestly pin CdA to 3 %.
            assert!((e.cda_m2.value - 0.90).abs() < 2.0 * e.cda_m2.sd, "seed {seed}: {e:?}");
            crr_errors.push((e.crr.value / 0.0128 - 1.0).abs());
        }
        crr_errors.sort_by(f64::total_cmp);
        let median = 0.5 * (crr_errors[9] + crr_errors[10]);
        assert!(median < 0.02, "median Crr error {:.2} %", median * 100.0);
    }

    #[test]
    fn road_load_estimate_pins_crr_after_thirty_seconds() {
        // Three such cycles with a well-instrumented car (wheel speed
        // 0.02 m/s, accelerometer 0.005 m/s², power 0.2 %): Crr within 2 %
        // and CdA within 0.5 % in every one of 20 runs.
        for seed in 100..120 {
            let (samples, veh) = synthetic_cycles(seed, 25.0, 500e3, (4.0, 7.5), (0.02, 0.005, 0.002), 3);
            let mut est = RoadLoadEstimator::new(&veh);
            for s in &samples {
                est.update(&veh, s);
            }
            let e = est.estimate();
            assert!((e.cda_m2.value / 0.90 - 1.0).abs() < 0.005, "seed {seed}: {e:?}");
            assert!(
                (e.crr.value / 0.0128 - 1.0).abs() < 0.02,
                "seed {seed}: Crr error {:.2} %",
                (e.crr.value / 0.0128 - 1.0) * 100.0
            );
        }
    }

    #[test]
    fn noise_free_data_gives_the_coefficients_exactly() {
        let (samples, veh) = synthetic_cycles(0, 25.0, 500e3, (4.0, 7.5), (0.0, 0.0, 0.0), 3);
        let mut est = RoadLoadEstimator::new(&veh);
        for s in &samples {
            est.update(&veh, s);
        }
        let e = est.estimate();
        assert!((e.cda_m2.value - 0.90).abs() < 1e-4, "{e:?}");
        assert!((e.crr.value - 0.0128).abs() < 1e-5, "{e:?}");
    }

    /// The error spread of the road-load estimate over 40 seeds for several
    /// noise levels and data lengths (a diagnostic; run with
    /// `cargo test --release road_load_error_spread -- --ignored --nocapture`).
    #[test]
    #[ignore]
    fn road_load_error_spread() {
        for noise in [(0.05, 0.05, 0.005), REALISTIC, (0.02, 0.005, 0.002), (0.02, 0.005, 0.001), (0.0, 0.0, 0.0)] {
            for cycles in [1, 3] {
                let (mut cda, mut crr, mut sd) = (Vec::new(), Vec::new(), Vec::new());
                for seed in 0..40 {
                    let (samples, veh) = synthetic_cycles(seed, 25.0, 500e3, (4.0, 7.5), noise, cycles);
                    let mut est = RoadLoadEstimator::new(&veh);
                    for s in &samples {
                        est.update(&veh, s);
                    }
                    let e = est.estimate();
                    cda.push((e.cda_m2.value / 0.90 - 1.0).abs() * 100.0);
                    crr.push((e.crr.value / 0.0128 - 1.0).abs() * 100.0);
                    sd.push(e.crr.sd / 0.0128 * 100.0);
                }
                let max = |v: &Vec<f64>| v.iter().cloned().fold(0.0, f64::max);
                let mean = |v: &Vec<f64>| v.iter().sum::<f64>() / v.len() as f64;
                println!(
                    "{:>2} s, noise {noise:?}: CdA error max {:.2} %; Crr error mean {:.2} % max {:.2} %; reported Crr sd {:.2} %",
                    cycles * 10,
                    max(&cda),
                    mean(&crr),
                    max(&crr),
                    mean(&sd)
                );
            }
        }
    }

    #[test]
    fn derating_fit_recovers_a_known_curve() {
        // Points on floor + (1 − floor)·e^(−t/τ) with τ = 17 s, floor 0.52,
        // with 0.5 % noise: the fit must find both (the model is exact here).
        let mut rng = Rng::new(3);
        let pts: Vec<(f64, f64)> = (0..300)
            .map(|i| i as f64 * 0.2)
            .map(|t| (t, derating_ratio(t, 17.0, 0.52) + 0.005 * rng.normal()))
            .collect();
        let f = fit_derating(&pts).unwrap();
        assert!((f.tau_s - 17.0).abs() < 0.8, "{f:?}");
        assert!((f.floor - 0.52).abs() < 0.01, "{f:?}");
        assert!(f.converged && f.r2 > 0.99, "{f:?}");
    }

    #[test]
    fn a_short_span_is_not_converged() {
        let pts: Vec<(f64, f64)> = (0..20).map(|i| i as f64 * 0.2).map(|t| (t, derating_ratio(t, 30.0, 0.6))).collect();
        let f = fit_derating(&pts).unwrap();
        assert!(!f.converged, "4 s of a 30 s curve cannot pin its floor: {f:?}");
    }

    #[test]
    fn heating_rate_is_the_slope() {
        let mut h = HeatingRate::default();
        for i in 0..200 {
            let t = i as TimeNs * 100_000_000;
            h.push(t, 30.0 + 0.25 * i as f64 * 0.1);
        }
        assert!((h.rate_c_per_s().unwrap() - 0.25).abs() < 1e-9);
    }

    #[test]
    fn pack_resistance_from_current_steps() {
        // V = OCV(soc) − 0.11·I with OCV = 630 + 160·soc, the pack
        // discharging at 250 A (its state of charge falling) with steps of
        // current, and 0.3 V noise. A model without the OCV slope would
        // read the sag as extra resistance.
        let v = ConfigSet::embedded().vehicle;
        let mut p = PackEstimator::new(&v);
        let mut rng = Rng::new(9);
        let mut soc = 0.8;
        for k in 0..3000 {
            let i = if (k / 100) % 2 == 0 { 150.0 } else { 300.0 };
            soc -= i * 0.02 / 30_000.0;
            p.update(630.0 + 160.0 * soc - 0.11 * i + 0.3 * rng.normal(), i, Some(soc));
        }
        let e = p.estimate().unwrap();
        assert!(e.converged);
        assert!((e.resistance_ohm.value - 0.11).abs() < 0.002, "{e:?}");
        assert!((e.ocv_v.value - (630.0 + 160.0 * soc)).abs() < 0.5, "{e:?}");
    }
}
