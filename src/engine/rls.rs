//! Recursive least squares in covariance (Kalman) form, with
//! exponential forgetting and an online estimate of the measurement noise.
//!
//! Model y = φᵀ·θ + e. Update (Ljung and Söderström, "Theory and Practice
//! of Recursive Identification", 1983; the standard RLS with forgetting
//! factor λ), with P normalised to unit measurement noise:
//!
//!   k = P·φ / (1 + φᵀ·P·φ),  θ ← θ + k·(y − φᵀ·θ),  P ← (P − k·φᵀ·P) / λ
//!
//! The noise variance r is estimated separately from the a-priori residuals
//! (whose variance is r·(1 + φᵀPφ)), and the covariance of θ is r·P, so the
//! standard deviations shrink as information accumulates while the gain
//! stays that of classical RLS, which follows a change at the rate λ sets.
//! P's diagonal is capped at the prior's so that a long stretch without
//! excitation cannot wind it up.

/// Estimator state for N parameters. (Matrix arithmetic reads best with
/// explicit indices, hence the allowance.)
#[allow(clippy::needless_range_loop)]
#[derive(Clone, Debug, PartialEq)]
pub struct Rls<const N: usize> {
    pub theta: [f64; N],
    pub p: [[f64; N]; N],
    prior_var: [f64; N],
    /// Measurement-noise variance estimate.
    pub r: f64,
    lambda: f64,
    /// Updates taken.
    pub n: u64,
}

/// The two-parameter estimator most uses need.
pub type Rls2 = Rls<2>;

#[allow(clippy::needless_range_loop)]
impl<const N: usize> Rls<N> {
    /// Starts from a prior mean and standard deviation, an initial guess of
    /// the measurement noise's standard deviation, and a forgetting factor.
    pub fn new(prior: [f64; N], prior_sd: [f64; N], noise_sd: f64, lambda: f64) -> Rls<N> {
        let r = noise_sd * noise_sd;
        let prior_var = prior_sd.map(|s| s * s / r);
        let mut p = [[0.0; N]; N];
        for i in 0..N {
            p[i][i] = prior_var[i];
        }
        Rls { theta: prior, p, prior_var, r, lambda, n: 0 }
    }

    /// One measurement. Non-finite inputs are ignored (returns false).
    pub fn update(&mut self, phi: [f64; N], y: f64) -> bool {
        self.update_robust(phi, y, f64::INFINITY).is_some()
    }

    /// One measurement with its a-priori residual clipped at `clip` of its
    /// expected standard deviation √(r·(1 + φᵀPφ)) (Huber's M-estimator in
    /// recursive form): a sample far off the model, such as one taken while
    /// the signals of two messages straddle a gear change, moves the
    /// estimate and the noise estimate no more than a `clip`-sigma one.
    /// Returns the normalised residual used, e/√(1 + φᵀPφ), or `None` for
    /// non-finite inputs (ignored).
    pub fn update_robust(&mut self, phi: [f64; N], y: f64, clip: f64) -> Option<f64> {
        if !(phi.iter().all(|v| v.is_finite()) && y.is_finite()) {
            return None;
        }
        let p = &self.p;
        let mut pphi = [0.0; N];
        for i in 0..N {
            pphi[i] = (0..N).map(|j| p[i][j] * phi[j]).sum();
        }
        let s: f64 = (0..N).map(|i| phi[i] * pphi[i]).sum();
        let e = y - (0..N).map(|i| phi[i] * self.theta[i]).sum::<f64>();
        let bound = clip * (self.r * (1.0 + s)).sqrt();
        let e = if bound.is_finite() && bound > 0.0 { e.clamp(-bound, bound) } else { e };
        // Noise variance from the a-priori residuals, averaged over the same
        // memory as the estimate (a running mean at first): a shorter memory
        // would report the noise of the last few samples as the
        // uncertainty of everything.
        let rate = (1.0 / (self.n as f64 + 2.0)).max(1.0 - self.lambda);
        self.r += rate * (e * e / (1.0 + s) - self.r);
        let denom = 1.0 + s;
        let k = pphi.map(|v| v / denom);
        for i in 0..N {
            self.theta[i] += k[i] * e;
        }
        // P ← (P − k·(φᵀP)) / λ, with φᵀP = pphiᵀ (P symmetric).
        let mut np = [[0.0; N]; N];
        for i in 0..N {
            for j in 0..N {
                np[i][j] = (self.p[i][j] - k[i] * pphi[j]) / self.lambda;
            }
        }
        // Symmetrise; cap each variance at its prior, scaling its row and
        // column so P stays a valid covariance.
        for i in 0..N {
            for j in (i + 1)..N {
                let m = 0.5 * (np[i][j] + np[j][i]);
                np[i][j] = m;
                np[j][i] = m;
            }
        }
        for i in 0..N {
            if np[i][i] < 0.0 {
                np[i][i] = 0.0;
            }
            if np[i][i] > self.prior_var[i] {
                let f = (self.prior_var[i] / np[i][i]).sqrt();
                for j in 0..N {
                    if j != i {
                        np[i][j] *= f;
                        np[j][i] *= f;
                    }
                }
                np[i][i] = self.prior_var[i];
            }
        }
        self.p = np;
        self.n += 1;
        Some(e / denom.sqrt())
    }

    /// The gain k = P·φ / (1 + φᵀ·P·φ) the next update at `phi` will use
    /// (unclipped): a caller propagating a bias through the same least
    /// squares updates its sensitivity s ← s + k·(δ − φᵀ·s).
    pub fn gain(&self, phi: [f64; N]) -> [f64; N] {
        let mut pphi = [0.0; N];
        for i in 0..N {
            pphi[i] = (0..N).map(|j| self.p[i][j] * phi[j]).sum();
        }
        let s: f64 = (0..N).map(|i| phi[i] * pphi[i]).sum();
        pphi.map(|v| v / (1.0 + s))
    }

    /// Standard deviations of the parameters.
    pub fn sd(&self) -> [f64; N] {
        let mut out = [0.0; N];
        for (i, o) in out.iter_mut().enumerate() {
            *o = (self.r * self.p[i][i]).max(0.0).sqrt();
        }
        out
    }

    /// Variance of φᵀθ (the model's prediction at φ).
    pub fn prediction_var(&self, phi: [f64; N]) -> f64 {
        let mut v = 0.0;
        for i in 0..N {
            for j in 0..N {
                v += phi[i] * self.p[i][j] * phi[j];
            }
        }
        (self.r * v).max(0.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::rng::Rng;

    #[test]
    fn recovers_a_line_and_its_uncertainty() {
        // y = 3 + 2x with noise σ = 0.5: ordinary least squares on n points
        // has sd(slope) = σ/√Sxx (closed form, any regression text).
        let mut rls = Rls2::new([0.0, 0.0], [100.0, 100.0], 1.0, 1.0);
        let mut rng = Rng::new(1);
        let n = 4000;
        let mut sxx = 0.0;
        let xs: Vec<f64> = (0..n).map(|i| (i % 100) as f64 / 10.0).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        for &x in &xs {
            sxx += (x - mean) * (x - mean);
            rls.update([1.0, x], 3.0 + 2.0 * x + 0.5 * rng.normal());
        }
        assert!((rls.theta[0] - 3.0).abs() < 0.05, "{:?}", rls.theta);
        assert!((rls.theta[1] - 2.0).abs() < 0.01, "{:?}", rls.theta);
        let expected_sd = 0.5 / sxx.sqrt();
        let sd = rls.sd()[1];
        assert!((sd / expected_sd - 1.0).abs() < 0.15, "sd {sd} vs closed form {expected_sd}");
        assert!((rls.r.sqrt() - 0.5).abs() < 0.05, "noise estimate {}", rls.r.sqrt());
    }

    #[test]
    fn forgetting_tracks_a_change() {
        let mut rls = Rls2::new([0.0, 0.0], [10.0, 10.0], 0.1, 0.99);
        for i in 0..2000 {
            let x = (i % 10) as f64;
            let slope = if i < 1000 { 1.0 } else { 2.0 };
            rls.update([1.0, x], slope * x);
        }
        assert!((rls.theta[1] - 2.0).abs() < 1e-3, "{:?}", rls.theta);
    }

    #[test]
    fn no_excitation_does_not_wind_up() {
        let mut rls = Rls2::new([1.0, 1.0], [0.5, 0.5], 1.0, 0.9);
        for _ in 0..1000 {
            rls.update([0.0, 0.0], 0.0);
        }
        let p = rls.p;
        assert!(p[0][0] <= 0.25 + 1e-12 && p[1][1] <= 0.25 + 1e-12, "{p:?}");
        assert!(!rls.update([f64::NAN, 1.0], 1.0));
    }
}
