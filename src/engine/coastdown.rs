//! Coast-down in the trade's form: the road load as F(v) = A + B·v + C·v²
//! (SAE J2263 and J1263 coast-down practice, ISO 10521), fitted by least
//! squares with the parameters' covariance, from the coast-down segments
//! the engine's road-load estimator detects (`estimators.rs`: no throttle,
//! no brake, above [`ESTIMATOR_MIN_SPEED_MPS`]).
//!
//! On a coast the drive force is (near) zero, so the road load is what
//! decelerates the car: F = F_wheel − m_eff·a − m·g·sin θ, the grade taken
//! out and everything else (tyres, drag, driveline drag, wind) left in.
//! Against ground speed v, drag ½ρ·CdA·(v + w)² in a steady headwind w
//! expands to ½ρ·CdA·v² + ρ·CdA·w·v + ½ρ·CdA·w²: the wind shows up as B
//! (and adds to A). With the vehicle file's tyre term c₂: C = ½ρ·CdA +
//! c₂·m·g, A = Crr·m·g + ½ρ·CdA·w², B = ρ·CdA·w.
//!
//! The report calls [`CoastDownFit::push_snapshot`] with each snapshot of a
//! run and [`CoastDownFit::fit`] at the end; the fit is a pure function of
//! the snapshots it was given.

use crate::channel::ch;
use crate::config::{Track, Vehicle};
use crate::engine::Snapshot;
use crate::engine::estimators::ESTIMATOR_MIN_SPEED_MPS;
use crate::engine::physics::roadload::{G_MPS2, wheel_power_w};

/// Fewest coast points a fit needs (at the report's 10 snapshots a second,
/// 3 s of coasting).
pub const MIN_POINTS: usize = 30;
/// Narrowest speed range a fit needs, m/s: over a narrower one A, B and C
/// cannot be told apart.
pub const MIN_SPAN_MPS: f64 = 5.0;
/// Throttle and brake below which a snapshot counts as coasting (the road-load
/// estimator's own thresholds).
pub const COAST_PEDAL_MAX: f64 = 0.02;
/// Speed scale the normal equations are solved in (u = v/scale), m/s: keeps
/// them well conditioned at high speed.
const SPEED_SCALE_MPS: f64 = 100.0;

/// The road-load curve F(v) = A + B·v + C·v² with its uncertainties.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct RoadLoadCurve {
    /// A, N.
    pub a_n: f64,
    pub a_sd_n: f64,
    /// B, N·s/m.
    pub b_n_s_per_m: f64,
    pub b_sd_n_s_per_m: f64,
    /// C, N·s²/m².
    pub c_n_s2_per_m2: f64,
    pub c_sd_n_s2_per_m2: f64,
    /// Covariance of (A, B, C), rows and columns in that order, each in
    /// the product of their units (B and C are strongly correlated: read
    /// them together).
    pub covariance: [[f64; 3]; 3],
    /// RMS of the residuals, N: the scatter the uncertainties come from.
    pub rms_n: f64,
    pub points: usize,
    pub speed_min_mps: f64,
    pub speed_max_mps: f64,
}

impl RoadLoadCurve {
    /// The road load at `v_mps`, N.
    pub fn force_n(&self, v_mps: f64) -> f64 {
        self.a_n + self.b_n_s_per_m * v_mps + self.c_n_s2_per_m2 * v_mps * v_mps
    }
}

/// Coast points (speed, road-load force) and the least-squares fit on them.
#[derive(Clone, Debug, Default)]
pub struct CoastDownFit {
    points: Vec<(f64, f64)>,
    /// The road-load estimator's coast-sample count at the previous snapshot.
    last_coast_samples: Option<u64>,
}

impl CoastDownFit {
    /// Adds one point: the road-load force `force_n` at ground speed `v_mps`.
    /// Non-finite points are ignored.
    pub fn push(&mut self, v_mps: f64, force_n: f64) {
        if v_mps.is_finite() && force_n.is_finite() {
            self.points.push((v_mps, force_n));
        }
    }

    pub fn points(&self) -> usize {
        self.points.len()
    }

    /// Adds the snapshot's point if the road-load estimator took coast-down
    /// samples since the previous snapshot and the snapshot itself is
    /// coasting (throttle and brake under [`COAST_PEDAL_MAX`], speed at least
    /// [`ESTIMATOR_MIN_SPEED_MPS`]), with a speed, an acceleration and a
    /// powertrain power (engine or motor) to take the drive force from.
    pub fn push_snapshot(&mut self, veh: &Vehicle, track: &Track, s: &Snapshot) {
        let d = &s.derived;
        let coast_samples = d.estimate.coast_samples;
        let detected = self.last_coast_samples.is_some_and(|n| coast_samples > n);
        self.last_coast_samples = Some(coast_samples);
        if !detected {
            return;
        }
        let fresh = |id| s.channel(id).filter(|c| !c.stale && !c.out_of_range).map(|c| c.value);
        let pedal_up = |id| fresh(id).is_none_or(|p| p < COAST_PEDAL_MAX);
        let (Some(v), Some(a)) = (d.speed_mps, d.accel_mps2) else { return };
        if v < ESTIMATOR_MIN_SPEED_MPS || !pedal_up(ch::DRIVER_THROTTLE) || !pedal_up(ch::DRIVER_BRAKE) {
            return;
        }
        let (engine_w, motor_w) = (fresh(ch::ENGINE_POWER), fresh(ch::MOTOR_POWER));
        if engine_w.is_none() && motor_w.is_none() {
            return;
        }
        let f_wheel = wheel_power_w(engine_w.unwrap_or(0.0), motor_w.unwrap_or(0.0), veh.driveline_efficiency) / v;
        let grade_n = veh.mass_kg * G_MPS2 * track.grade_at(d.distance_m).atan().sin();
        self.push(v, f_wheel - veh.effective_mass_kg() * a - grade_n);
    }

    /// The least-squares fit, once there are [`MIN_POINTS`] points over
    /// [`MIN_SPAN_MPS`]; `None` before.
    pub fn fit(&self) -> Option<RoadLoadCurve> {
        fit_road_load(&self.points)
    }
}

/// Ordinary least squares of F = A + B·v + C·v² on `points` (v m/s, F N):
/// the normal equations solved in u = v/100 m/s, the covariance
/// s²·(XᵀX)⁻¹ with s² = RSS/(n − 3), the unbiased residual variance (any
/// regression text, e.g. Draper & Smith, *Applied Regression Analysis*,
/// ch. 5, from memory). `None` with fewer than [`MIN_POINTS`] points, a
/// speed range under [`MIN_SPAN_MPS`], or a singular system.
pub fn fit_road_load(points: &[(f64, f64)]) -> Option<RoadLoadCurve> {
    let n = points.len();
    let (v_lo, v_hi) = points.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), p| (lo.min(p.0), hi.max(p.0)));
    if n < MIN_POINTS || v_hi - v_lo < MIN_SPAN_MPS {
        return None;
    }
    let mut xtx = [[0.0; 3]; 3];
    let mut xty = [0.0; 3];
    for &(v, f) in points {
        let u = v / SPEED_SCALE_MPS;
        let x = [1.0, u, u * u];
        for i in 0..3 {
            xty[i] += x[i] * f;
            for j in 0..3 {
                xtx[i][j] += x[i] * x[j];
            }
        }
    }
    let inv = invert3(&xtx)?;
    let theta: [f64; 3] = std::array::from_fn(|i| (0..3).map(|j| inv[i][j] * xty[j]).sum());
    let rss: f64 = points
        .iter()
        .map(|&(v, f)| {
            let u = v / SPEED_SCALE_MPS;
            let r = f - (theta[0] + theta[1] * u + theta[2] * u * u);
            r * r
        })
        .sum();
    let s2 = rss / (n - 3) as f64;
    // Back to SI: A = θ₀, B = θ₁/scale, C = θ₂/scale².
    let k = [1.0, 1.0 / SPEED_SCALE_MPS, 1.0 / (SPEED_SCALE_MPS * SPEED_SCALE_MPS)];
    let cov: [[f64; 3]; 3] = std::array::from_fn(|i| std::array::from_fn(|j| s2 * inv[i][j] * k[i] * k[j]));
    let sd = |i: usize| cov[i][i].max(0.0).sqrt();
    Some(RoadLoadCurve {
        a_n: theta[0],
        a_sd_n: sd(0),
        b_n_s_per_m: theta[1] * k[1],
        b_sd_n_s_per_m: sd(1),
        c_n_s2_per_m2: theta[2] * k[2],
        c_sd_n_s2_per_m2: sd(2),
        covariance: cov,
        rms_n: (rss / n as f64).sqrt(),
        points: n,
        speed_min_mps: v_lo,
        speed_max_mps: v_hi,
    })
}

/// Inverse of a 3×3 matrix by cofactors; `None` when (nearly) singular.
fn invert3(m: &[[f64; 3]; 3]) -> Option<[[f64; 3]; 3]> {
    let c = |r0: usize, r1: usize, c0: usize, c1: usize| m[r0][c0] * m[r1][c1] - m[r0][c1] * m[r1][c0];
    let cof = [
        [c(1, 2, 1, 2), -c(1, 2, 0, 2), c(1, 2, 0, 1)],
        [-c(0, 2, 1, 2), c(0, 2, 0, 2), -c(0, 2, 0, 1)],
        [c(0, 1, 1, 2), -c(0, 1, 0, 2), c(0, 1, 0, 1)],
    ];
    let det = m[0][0] * cof[0][0] + m[0][1] * cof[0][1] + m[0][2] * cof[0][2];
    let scale = m.iter().flatten().fold(0.0_f64, |a, x| a.max(x.abs()));
    if !det.is_finite() || det.abs() <= 1e-12 * scale.powi(3) {
        return None;
    }
    // The inverse is the transposed cofactor matrix over the determinant.
    Some(std::array::from_fn(|i| std::array::from_fn(|j| cof[j][i] / det)))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A small seeded generator for the tests (SplitMix64, Steele, Lea &
    /// Flood, OOPSLA 2014) with Box–Muller normals; the engine may not use
    /// the simulator's.
    struct Noise(u64);
    impl Noise {
        fn uniform(&mut self) -> f64 {
            self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = self.0;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
        }
        fn normal(&mut self) -> f64 {
            let (u1, u2) = (self.uniform().max(1e-300), self.uniform());
            (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
        }
    }

    /// Speeds of a coast from 80 to 20 m/s, one point every 0.1 s at a
    /// deceleration of about 0.4 m/s² (a steady sweep, as a coast gives).
    fn coast_speeds() -> Vec<f64> {
        (0..1500).map(|k| 80.0 - 60.0 * k as f64 / 1499.0).collect()
    }

    #[test]
    fn exact_closed_form_data_gives_a_b_c_back() {
        // F = A + B·v + C·v² (SAE J2263 road-load form, REFERENCES.md "Road
        // load and coast-down") at known A, B, C: the fit returns them.
        let (a, b, c) = (310.0, 4.2, 0.52);
        let pts: Vec<_> = coast_speeds().into_iter().map(|v| (v, a + b * v + c * v * v)).collect();
        let f = fit_road_load(&pts).unwrap();
        assert!(
            (f.a_n - a).abs() < 1e-6 && (f.b_n_s_per_m - b).abs() < 1e-8 && (f.c_n_s2_per_m2 - c).abs() < 1e-10,
            "{f:?}"
        );
        assert!(f.rms_n < 1e-6 && f.a_sd_n < 1e-6, "{f:?}");
        assert_eq!((f.points, f.speed_min_mps, f.speed_max_mps), (1500, 20.0, 80.0));
    }

    #[test]
    fn a_steady_headwind_shows_up_as_b() {
        // ½ρ·CdA·(v + w)² + Crr·m·g = (Crr·m·g + ½ρ·CdA·w²) + ρ·CdA·w·v +
        // ½ρ·CdA·v² (expanding the square; REFERENCES.md "Road load and
        // coast-down": C ≈ ½ρ·CdA, A ≈ Crr·m·g).
        let (rho, cda, crr, m, w) = (1.18, 0.86, 0.012, 1655.0, 3.0);
        let k = 0.5 * rho * cda;
        let pts: Vec<_> = coast_speeds().into_iter().map(|v| (v, k * (v + w) * (v + w) + crr * m * G_MPS2)).collect();
        let f = fit_road_load(&pts).unwrap();
        assert!((f.b_n_s_per_m - rho * cda * w).abs() < 1e-8, "B = ρ·CdA·w: {f:?}");
        assert!((f.c_n_s2_per_m2 - k).abs() < 1e-10, "C = ½ρ·CdA: {f:?}");
        assert!((f.a_n - (crr * m * G_MPS2 + k * w * w)).abs() < 1e-6, "A: {f:?}");
        // Still air: B is zero.
        let still: Vec<_> = coast_speeds().into_iter().map(|v| (v, k * v * v + crr * m * G_MPS2)).collect();
        assert!(fit_road_load(&still).unwrap().b_n_s_per_m.abs() < 1e-8);
    }

    #[test]
    fn the_stated_uncertainties_are_honest_on_noisy_data() {
        // Known A, B, C and Gaussian noise of 80 N (about what an
        // accelerometer good to 0.05 m/s² gives on 1 700 kg): over 400
        // seeded coasts the truth lies within ±2 sd in about 95 % of fits
        // (normal theory of least squares), and the scatter of the
        // estimates matches the stated sd.
        let (a, b, c, sigma) = (300.0, 5.0, 0.5, 80.0);
        let speeds: Vec<f64> = coast_speeds().into_iter().step_by(5).collect();
        let mut within = [0usize; 3];
        let (mut est, mut stated) = ([Vec::new(), Vec::new(), Vec::new()], [0.0; 3]);
        let trials = 400;
        for seed in 0..trials {
            let mut rng = Noise(seed);
            let pts: Vec<_> = speeds.iter().map(|&v| (v, a + b * v + c * v * v + sigma * rng.normal())).collect();
            let f = fit_road_load(&pts).unwrap();
            let got =
                [(f.a_n, f.a_sd_n, a), (f.b_n_s_per_m, f.b_sd_n_s_per_m, b), (f.c_n_s2_per_m2, f.c_sd_n_s2_per_m2, c)];
            for (i, (x, sd, truth)) in got.into_iter().enumerate() {
                within[i] += usize::from((x - truth).abs() <= 2.0 * sd);
                est[i].push(x);
                stated[i] += sd / trials as f64;
            }
        }
        for i in 0..3 {
            let share = within[i] as f64 / trials as f64;
            assert!(share >= 0.92, "parameter {i}: truth within ±2 sd in {share}");
            let mean = est[i].iter().sum::<f64>() / trials as f64;
            let scatter = (est[i].iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (trials - 1) as f64).sqrt();
            assert!((scatter / stated[i] - 1.0).abs() < 0.15, "parameter {i}: scatter {scatter}, stated {}", stated[i]);
        }
    }

    #[test]
    fn too_few_points_or_too_narrow_a_range_give_no_fit() {
        let pts: Vec<_> = (0..MIN_POINTS - 1).map(|k| (20.0 + k as f64, 500.0)).collect();
        assert!(fit_road_load(&pts).is_none());
        let narrow: Vec<_> = (0..100).map(|k| (40.0 + k as f64 * 0.01, 500.0)).collect();
        assert!(fit_road_load(&narrow).is_none());
        assert!(fit_road_load(&[]).is_none());
    }
}
