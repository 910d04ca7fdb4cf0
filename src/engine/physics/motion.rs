//! Power-limited longitudinal motion, for the peak-speed projection.
//!
//! The model (REFERENCES.md "Power-limited acceleration"; the standard
//! power balance of vehicle dynamics, e.g. Wong, *Theory of Ground
//! Vehicles*, ch. 3):
//!
//! m·v·dv/dt = P − k·v³ − c·v,  k = ½·ρ·CdA,  c = Crr·m·g.
//!
//! This module gives the terminal speed (Cardano), closed-form time and
//! distance for c = 0 (partial fractions), and a fixed-step RK4 integrator
//! with a caller-supplied power function for everything else (wind,
//! speed-dependent rolling resistance, grade, power that changes with time,
//! distance and speed).

use super::roadload::{G_MPS2, rolling_coefficient};

/// Speed below which the traction force P/v is evaluated at this speed
/// instead, m/s. See [`acceleration_mps2`].
pub const TRACTION_SPEED_FLOOR_MPS: f64 = 0.5;

/// Terminal speed, m/s: the speed at which power P balances the road load,
/// the largest real root of k·v³ + c·v − P = 0 (floored at 0).
///
/// With c = 0 the root is v = (P/k)^(1/3). Otherwise Cardano's formula for
/// the depressed cubic v³ + 3s·v − q = 0 with q = P/k and s = c/(3k):
///
/// - Δ = q²/4 + s³ ≥ 0 (always when c ≥ 0): one real root v = u + w with
///   u³ = q/2 + √Δ and w = −s/u. Written as u + w directly this cancels
///   badly when P is small (v ≈ P/c); since u³ + w³ = q and
///   u³ + w³ = (u + w)(u² − u·w + w²), the root is computed as
///   v = q/(u² + s + s²/u²), whose denominator terms are all positive for
///   c ≥ 0.
/// - Δ < 0 (only for c < 0, a downhill grade steeper than the rolling
///   resistance): three real roots; the largest is
///   v = 2·√(−s)·cos(⅓·acos((q/2)/(−s)^(3/2))) (Viète's trigonometric form).
///
/// One Newton step then polishes the root to the last bit or two.
///
/// Inputs: `p_w` power at the wheels, W; `k` = ½·ρ·CdA (plus any v²-force
/// term), kg/m; `c` speed-independent resisting force, N (Crr·m·g·cos θ plus
/// m·g·sin θ, so it may be negative downhill). Domain: `k` ≥ 0. With k = 0
/// the result is P/c for c > 0, and infinite when nothing limits the speed.
pub fn terminal_speed_mps(p_w: f64, k: f64, c: f64) -> f64 {
    debug_assert!(k >= 0.0, "aerodynamic coefficient must not be negative: {k}");
    if k <= 0.0 {
        return if c > 0.0 {
            (p_w / c).max(0.0)
        } else if p_w > 0.0 {
            f64::INFINITY
        } else {
            0.0
        };
    }
    let q = p_w / k;
    if c == 0.0 {
        return q.cbrt().max(0.0);
    }
    let s = c / (3.0 * k);
    let delta = 0.25 * q * q + s * s * s;
    let v = if delta >= 0.0 {
        let u = (0.5 * q + delta.sqrt()).cbrt();
        if u == 0.0 { 0.0 } else { q / (u * u + s + s * s / (u * u)) }
    } else {
        let r = (-s).sqrt();
        let cos_phi = (0.5 * q / (r * r * r)).clamp(-1.0, 1.0);
        2.0 * r * (cos_phi.acos() / 3.0).cos()
    };
    let v = v.max(0.0);
    // Newton step on f(v) = v³ + 3s·v − q; f' > 0 at a simple largest root.
    let slope = 3.0 * (v * v + s);
    if v > 0.0 && slope > 0.0 { v - (v * v * v + 3.0 * s * v - q) / slope } else { v }
}

/// Dimensionless time antiderivative G(x), x = v/v_t, for c = 0:
/// G(x) = (1/6)·ln((x² + x + 1)/(1 − x)²) − (1/√3)·atan((2x + 1)/√3).
/// See [`time_to_speed_closed_form_s`].
fn time_antiderivative(x: f64) -> f64 {
    let sqrt3 = 3.0_f64.sqrt();
    ((x * x + x + 1.0) / ((1.0 - x) * (1.0 - x))).ln() / 6.0 - ((2.0 * x + 1.0) / sqrt3).atan() / sqrt3
}

/// Time to go from `v0` to `v1`, s, under constant power `p_w` against
/// aerodynamic drag only (c = 0), mass `m` (effective mass, kg), `k` = ½·ρ·CdA.
///
/// Derivation. With v_t = (P/k)^(1/3) the terminal speed,
/// dt = m·v·dv/(P − k·v³) = (m/k)·v·dv/(v_t³ − v³). Partial fractions over
/// v_t³ − v³ = (v_t − v)(v² + v_t·v + v_t²):
///
/// v/(v_t³ − v³) = (1/(3v_t))·[1/(v_t − v) + (v − v_t)/(v² + v_t·v + v_t²)]
///
/// (check: A = 1/(3v_t) from v = v_t; the v² coefficient gives B = A; the
/// constant gives C = −v_t·A = −1/3). Writing v − v_t = ½(2v + v_t) − (3/2)v_t
/// and completing the square, (v + v_t/2)² + (3/4)v_t², the antiderivative is
///
/// F(v) = (1/(6v_t))·ln((v² + v_t·v + v_t²)/(v_t − v)²)
///        − (1/(√3·v_t))·atan((2v + v_t)/(√3·v_t))
///
/// so t = (m/k)·[F(v1) − F(v0)] = (m/(k·v_t))·[G(v1/v_t) − G(v0/v_t)].
///
/// Domain: `m`, `p_w`, `k` > 0, 0 ≤ `v0`, `v1`. Both speeds below v_t
/// (accelerating) or both above (slowing towards v_t) give a finite time;
/// a speed that is never reached (across or at v_t, or slowing under
/// power) gives infinity.
pub fn time_to_speed_closed_form_s(m: f64, p_w: f64, k: f64, v0: f64, v1: f64) -> f64 {
    if v0 == v1 {
        return 0.0;
    }
    let v_t = terminal_speed_mps(p_w, k, 0.0);
    let (x0, x1) = (v0 / v_t, v1 / v_t);
    if !reachable(x0, x1) {
        return f64::INFINITY;
    }
    m / (k * v_t) * (time_antiderivative(x1) - time_antiderivative(x0))
}

/// Distance covered from `v0` to `v1`, m, under constant power `p_w` against
/// aerodynamic drag only (c = 0); arguments as [`time_to_speed_closed_form_s`].
///
/// Derivation: dx = v·dt = (m/k)·v²·dv/(v_t³ − v³), and v² is ⅓ of the
/// derivative of v³, so
///
/// x = (m/(3k))·ln((v_t³ − v0³)/(v_t³ − v1³)) = (m/(3k))·ln((1 − ξ0³)/(1 − ξ1³)),
/// ξ = v/v_t.
pub fn distance_to_speed_closed_form_m(m: f64, p_w: f64, k: f64, v0: f64, v1: f64) -> f64 {
    if v0 == v1 {
        return 0.0;
    }
    let v_t = terminal_speed_mps(p_w, k, 0.0);
    let (x0, x1) = (v0 / v_t, v1 / v_t);
    if !reachable(x0, x1) {
        return f64::INFINITY;
    }
    m / (3.0 * k) * ((1.0 - x0 * x0 * x0) / (1.0 - x1 * x1 * x1)).ln()
}

/// Whether speed ratio x1 = v1/v_t is reached from x0 under power: speed
/// moves monotonically towards v_t and never crosses it.
fn reachable(x0: f64, x1: f64) -> bool {
    (x0 < x1 && x1 < 1.0) || (x0 > x1 && x1 > 1.0)
}

/// Vehicle and environment for [`integrate`]. All SI.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MotionParams {
    /// Effective mass including rotating inertia, kg (about 1.03·m, SAE J2263).
    pub mass_eff_kg: f64,
    /// Static mass that loads the tyres and climbs the grade, kg.
    pub mass_kg: f64,
    /// Aerodynamic coefficient k = ½·ρ·CdA, kg/m.
    pub k: f64,
    /// Rolling-resistance coefficient at zero speed.
    pub crr0: f64,
    /// Speed-squared rolling-resistance term, s²/m².
    pub crr2_s2_m2: f64,
    /// Wind along the direction of travel, m/s, headwind positive.
    pub wind_mps: f64,
    /// Constant road grade, rise over run, uphill positive.
    pub grade: f64,
}

impl MotionParams {
    /// Resisting force at speed v, N: k·v_air·|v_air| + Crr(v)·m·g·cos θ +
    /// m·g·sin θ, with v_air = v + wind and θ = atan(grade) (the same terms
    /// as [`super::roadload::road_load`], as forces).
    pub fn resisting_force_n(&self, v_mps: f64) -> f64 {
        let v_air = v_mps + self.wind_mps;
        let hyp = (1.0 + self.grade * self.grade).sqrt();
        let weight_n = self.mass_kg * G_MPS2;
        self.k * v_air * v_air.abs()
            + rolling_coefficient(self.crr0, self.crr2_s2_m2, v_mps) * weight_n / hyp
            + weight_n * self.grade / hyp
    }
}

/// Longitudinal acceleration, m/s²: a = (P/max(v, v_floor) − F_resist(v))/m_eff.
///
/// The power-limited form divides by v; at standstill it would demand an
/// infinite force. Below [`TRACTION_SPEED_FLOOR_MPS`] (0.5 m/s) the traction
/// force is held at P/0.5, which keeps launches finite. It is a numerical
/// guard, not a traction (tyre-grip) limit: projections start at speed.
pub fn acceleration_mps2(p: &MotionParams, power_w: f64, v_mps: f64) -> f64 {
    let traction_n = power_w / v_mps.max(TRACTION_SPEED_FLOOR_MPS);
    (traction_n - p.resisting_force_n(v_mps)) / p.mass_eff_kg
}

/// Most points [`integrate`] reserves up front (24 MB); longer horizons
/// still run, growing the vector as needed.
pub const MAX_PREALLOCATED_POINTS: usize = 1 << 20;

/// Why [`integrate`] stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StopReason {
    /// The caller's `stop` predicate returned true at the last point.
    Predicate,
    /// `max_t_s` was reached.
    MaxTime,
    /// Speed fell to zero or below (stalled on a grade, or power went
    /// negative); the last point is clamped to v = 0.
    Stalled,
    /// The power function or the state became NaN or infinite.
    NonFinite,
}

/// A projected trajectory: (t s, x m, v m/s) at every step, starting with
/// (0, x0, v0), and why it stopped.
#[derive(Debug, Clone, PartialEq)]
pub struct Trajectory {
    /// One point per step, time-ordered; time is relative to the start.
    pub points: Vec<(f64, f64, f64)>,
    /// Why the integration stopped.
    pub stop: StopReason,
}

impl Trajectory {
    /// First time and distance at which the speed reaches `v_target_mps`
    /// going up (or down, if it starts above), linearly interpolated within
    /// the step that crosses it; `None` if it never does.
    pub fn crossing(&self, v_target_mps: f64) -> Option<(f64, f64)> {
        let first = self.points.first()?;
        let rising = first.2 <= v_target_mps;
        if first.2 == v_target_mps {
            return Some((first.0, first.1));
        }
        self.points.windows(2).find_map(|w| {
            let ((t0, x0, v0), (t1, x1, v1)) = (w[0], w[1]);
            let crossed = if rising { v1 >= v_target_mps } else { v1 <= v_target_mps };
            crossed.then(|| {
                let f = (v_target_mps - v0) / (v1 - v0);
                (t0 + f * (t1 - t0), x0 + f * (x1 - x0))
            })
        })
    }
}

/// One step of the classical fourth-order Runge–Kutta method (Butcher
/// tableau 0, ½, ½, 1; weights 1/6, 1/3, 1/3, 1/6) from `t` to `t_next` on
/// the state (x m, v m/s, e) with dx/dt = v, dv/dt = a and de/dt = r, where
/// `deriv(t, x, v, e)` returns (a, r). `e` is any quantity the motion
/// drives (the planner's energy drawn from the battery, J); [`integrate`]
/// carries 0 with r = 0. This is the one stepping of termvel's models: the
/// projection and the planner both step with it.
///
/// `deriv` is called four times, at t, t + h/2 (twice) and `t_next`, where
/// h = `t_next` − `t`; it must be a pure function of its arguments.
pub fn rk4_step(
    t: f64,
    t_next: f64,
    (x, v, e): (f64, f64, f64),
    mut deriv: impl FnMut(f64, f64, f64, f64) -> (f64, f64),
) -> (f64, f64, f64) {
    let h = t_next - t;
    let (a1, r1) = deriv(t, x, v, e);
    let (x2, v2, e2) = (x + 0.5 * h * v, v + 0.5 * h * a1, e + 0.5 * h * r1);
    let (a2, r2) = deriv(t + 0.5 * h, x2, v2, e2);
    let (x3, v3, e3) = (x + 0.5 * h * v2, v + 0.5 * h * a2, e + 0.5 * h * r2);
    let (a3, r3) = deriv(t + 0.5 * h, x3, v3, e3);
    let (x4, v4, e4) = (x + h * v3, v + h * a3, e + h * r3);
    let (a4, r4) = deriv(t_next, x4, v4, e4);
    (
        x + h / 6.0 * (v + 2.0 * v2 + 2.0 * v3 + v4),
        v + h / 6.0 * (a1 + 2.0 * a2 + 2.0 * a3 + a4),
        e + h / 6.0 * (r1 + 2.0 * r2 + 2.0 * r3 + r4),
    )
}

/// Integrate m_eff·dv/dt = P(t, x, v)/v − F_resist(v), dx/dt = v with the
/// classical fourth-order Runge–Kutta method at a fixed step `dt_s`
/// (the last step is shortened to land on `max_t_s`), from (0, `x0`, `v0`).
///
/// `power_w(t, x, v)` is the power at the wheels, W. It is called four times
/// per step, at the RK4 stage points, so it must be a pure, cheap function of
/// its arguments (interpolating a curve, say), not a stateful counter.
/// `stop(t, x, v)` is checked at the start point and after every step; when
/// it returns true the integration ends with [`StopReason::Predicate`].
///
/// Acceleration is [`acceleration_mps2`] (traction force floored below
/// 0.5 m/s). Points are preallocated for the whole horizon (up to
/// [`MAX_PREALLOCATED_POINTS`]), so the loop does not allocate.
/// `max_t_s` = ∞ runs until `stop` returns true or the car stalls.
/// Domain: `dt_s` > 0 (debug builds assert; release builds take no step),
/// `max_t_s` ≥ 0, `v0` ≥ 0,
/// `mass_eff_kg` > 0.
pub fn integrate<Fp: FnMut(f64, f64, f64) -> f64>(
    p: &MotionParams,
    x0: f64,
    v0: f64,
    dt_s: f64,
    max_t_s: f64,
    mut power_w: Fp,
    mut stop: impl FnMut(f64, f64, f64) -> bool,
) -> Trajectory {
    debug_assert!(dt_s > 0.0 && max_t_s >= 0.0, "bad step {dt_s} s or horizon {max_t_s} s");
    debug_assert!(p.mass_eff_kg > 0.0, "effective mass must be positive");
    // `as` saturates: an infinite horizon runs until `stop` says so. A step
    // that is not positive (or NaN) takes no steps at all.
    let steps = if dt_s > 0.0 { (max_t_s.max(0.0) / dt_s).ceil() as usize } else { 0 };
    let mut points = Vec::with_capacity(steps.saturating_add(1).min(MAX_PREALLOCATED_POINTS));
    let (mut t, mut x, mut v) = (0.0_f64, x0, v0);
    points.push((t, x, v));
    if stop(t, x, v) {
        return Trajectory { points, stop: StopReason::Predicate };
    }
    let mut deriv = |t: f64, x: f64, v: f64, _e: f64| (acceleration_mps2(p, power_w(t, x, v), v), 0.0);
    for n in 1..=steps {
        // Time from the step count, so rounding does not accumulate.
        let t_next = (n as f64 * dt_s).min(max_t_s);
        (x, v, _) = rk4_step(t, t_next, (x, v, 0.0), &mut deriv);
        t = t_next;
        if !(x.is_finite() && v.is_finite()) {
            return Trajectory { points, stop: StopReason::NonFinite };
        }
        if v <= 0.0 {
            points.push((t, x, 0.0));
            return Trajectory { points, stop: StopReason::Stalled };
        }
        points.push((t, x, v));
        if stop(t, x, v) {
            return Trajectory { points, stop: StopReason::Predicate };
        }
    }
    Trajectory { points, stop: StopReason::MaxTime }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel_err(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    /// Bisection on k·v³ + c·v − P over [0, hi], written independently of Cardano.
    fn bisect_root(p_w: f64, k: f64, c: f64) -> f64 {
        let f = |v: f64| k * v * v * v + c * v - p_w;
        let (mut lo, mut hi) = (0.0_f64, 1.0_f64);
        while f(hi) < 0.0 {
            hi *= 2.0;
        }
        // For c < 0 the cubic dips below zero before rising: lo stays where f < 0.
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if f(mid) < 0.0 { lo = mid } else { hi = mid }
        }
        0.5 * (lo + hi)
    }

    #[test]
    fn terminal_speed_satisfies_cubic_and_matches_bisection() {
        // Closed form check: the root must satisfy k·v³ + c·v = P (relative residual 1e-9),
        // and agree with an independent bisection.
        let cases = [
            (300e3, 0.36, 176.0),
            (500e3, 0.25, 150.0),
            (1e3, 0.4, 200.0),     // small power: v ≈ P/c, where naive Cardano cancels
            (1.0, 0.4, 2000.0),    // tiny power
            (2e6, 0.3, 1.0),       // aero dominated
            (300e3, 0.36, -800.0), // steep downhill: c < 0, trigonometric branch
            (10.0, 0.36, -800.0),  // steep downhill, little power
        ];
        for (p_w, k, c) in cases {
            let v = terminal_speed_mps(p_w, k, c);
            let residual = (k * v * v * v + c * v - p_w) / p_w;
            assert!(residual.abs() < 1e-9, "P={p_w} k={k} c={c}: v={v}, residual {residual}");
            let vb = bisect_root(p_w, k, c);
            assert!(rel_err(v, vb) < 1e-12, "P={p_w} k={k} c={c}: Cardano {v} vs bisection {vb}");
        }
    }

    #[test]
    fn terminal_speed_without_rolling_is_cube_root() {
        // Closed form: c = 0 → v = (P/k)^(1/3). 0.36·100³ = 360 000 W gives exactly 100 m/s.
        assert_eq!(terminal_speed_mps(360e3, 0.36, 0.0), (360e3_f64 / 0.36).cbrt());
        assert!(rel_err(terminal_speed_mps(360e3, 0.36, 0.0), 100.0) < 1e-15);
    }

    #[test]
    fn terminal_speed_edge_cases_are_not_nan() {
        assert_eq!(terminal_speed_mps(0.0, 0.36, 200.0), 0.0);
        assert_eq!(terminal_speed_mps(0.0, 0.36, 0.0), 0.0);
        assert_eq!(terminal_speed_mps(-5e3, 0.36, 200.0), 0.0);
        assert_eq!(terminal_speed_mps(1e3, 0.0, 200.0), 5.0);
        assert_eq!(terminal_speed_mps(1e3, 0.0, 0.0), f64::INFINITY);
    }

    // Closed forms for c = 0, derived in the doc comments; re-derived here:
    // dt = (m/k)·v·dv/(v_t³ − v³) with partial fractions
    //   v/(v_t³ − v³) = (1/(3v_t))·[1/(v_t − v) + (v − v_t)/(v² + v_t·v + v_t²)],
    // so F(v) = (1/(6v_t))·ln((v² + v_t v + v_t²)/(v_t − v)²) − (1/(√3 v_t))·atan((2v + v_t)/(√3 v_t)),
    // and dx = (m/k)·v²·dv/(v_t³ − v³) → (m/(3k))·ln((v_t³ − v0³)/(v_t³ − v1³)).

    #[test]
    fn partial_fractions_identity_holds() {
        // The decomposition above, evaluated pointwise.
        let vt: f64 = 90.0;
        for v in [0.0_f64, 10.0, 45.0, 80.0, 89.9, 120.0] {
            let lhs = v / (vt.powi(3) - v.powi(3));
            let rhs = (1.0 / (vt - v) + (v - vt) / (v * v + vt * v + vt * vt)) / (3.0 * vt);
            assert!((lhs - rhs).abs() <= 1e-12 * lhs.abs().max(1e-12), "v={v}: {lhs} vs {rhs}");
        }
    }

    #[test]
    fn time_antiderivative_differentiates_back_to_integrand() {
        // Central finite differences of the dimensionless antiderivative G(x) must give
        // x/(1 − x³) (the integrand with v_t = 1).
        let h = 1e-6;
        for x in [0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 0.99, 1.2, 2.0] {
            let numeric = (time_antiderivative(x + h) - time_antiderivative(x - h)) / (2.0 * h);
            let integrand = x / (1.0 - x * x * x);
            assert!((numeric - integrand).abs() < 1e-6 * integrand.abs().max(1.0), "x={x}: {numeric} vs {integrand}");
        }
    }

    #[test]
    fn distance_closed_form_differentiates_back_to_integrand() {
        // d/dv1 of the distance must be (m/k)·v1²/(v_t³ − v1³).
        let (m, p_w, k) = (1545.0, 300e3, 0.36);
        let vt = terminal_speed_mps(p_w, k, 0.0);
        let h = 1e-4;
        for v in [5.0, 30.0, 60.0, 0.9 * vt] {
            let numeric = (distance_to_speed_closed_form_m(m, p_w, k, 1.0, v + h)
                - distance_to_speed_closed_form_m(m, p_w, k, 1.0, v - h))
                / (2.0 * h);
            let integrand = m / k * v * v / (vt.powi(3) - v.powi(3));
            assert!(rel_err(numeric, integrand) < 1e-7, "v={v}: {numeric} vs {integrand}");
        }
    }

    #[test]
    fn closed_forms_unreachable_speeds_are_infinite() {
        let (m, p_w, k) = (1545.0, 300e3, 0.36);
        let vt = terminal_speed_mps(p_w, k, 0.0);
        assert_eq!(time_to_speed_closed_form_s(m, p_w, k, 30.0, vt), f64::INFINITY);
        assert_eq!(distance_to_speed_closed_form_m(m, p_w, k, 30.0, 1.1 * vt), f64::INFINITY);
        assert_eq!(time_to_speed_closed_form_s(m, p_w, k, 50.0, 30.0), f64::INFINITY);
        assert_eq!(time_to_speed_closed_form_s(m, p_w, k, 30.0, 30.0), 0.0);
        // From standstill the integrand vanishes at v = 0: finite.
        assert!(time_to_speed_closed_form_s(m, p_w, k, 0.0, 30.0).is_finite());
        // From above v_t, slowing towards it: finite and positive.
        assert!(time_to_speed_closed_form_s(m, p_w, k, 1.5 * vt, 1.1 * vt) > 0.0);
        assert!(distance_to_speed_closed_form_m(m, p_w, k, 1.5 * vt, 1.1 * vt) > 0.0);
    }

    fn aero_only(m: f64, k: f64) -> MotionParams {
        MotionParams { mass_eff_kg: m, mass_kg: m, k, crr0: 0.0, crr2_s2_m2: 0.0, wind_mps: 0.0, grade: 0.0 }
    }

    #[test]
    fn rk4_matches_c0_closed_forms() {
        // Integrator vs the closed forms derived above: 30 m/s to 0.9·v_t within 0.1 %.
        let (m, p_w, k) = (1545.0, 300e3, 0.36);
        let vt = terminal_speed_mps(p_w, k, 0.0);
        let target = 0.9 * vt;
        let traj = integrate(&aero_only(m, k), 0.0, 30.0, 0.25, 120.0, |_, _, _| p_w, |_, _, v| v >= target);
        assert_eq!(traj.stop, StopReason::Predicate);
        let (t, x) = traj.crossing(target).expect("reaches 0.9·v_t");
        let t_exact = time_to_speed_closed_form_s(m, p_w, k, 30.0, target);
        let x_exact = distance_to_speed_closed_form_m(m, p_w, k, 30.0, target);
        assert!(rel_err(t, t_exact) < 1e-3, "time {t} vs {t_exact}");
        assert!(rel_err(x, x_exact) < 1e-3, "distance {x} vs {x_exact}");
    }

    #[test]
    fn rk4_approaches_cardano_terminal_speed_with_rolling_resistance() {
        // Long integration vs the Cardano root, within 0.1 %. The v² rolling term adds to k
        // and the grade to c: k_eff = k + crr2·m·g·cos θ, c = m·g·(crr0·cos θ + sin θ).
        let m = 1500.0;
        let p = MotionParams {
            mass_eff_kg: 1.03 * m,
            mass_kg: m,
            k: 0.36,
            crr0: 0.012,
            crr2_s2_m2: 5.184e-7,
            wind_mps: 0.0,
            grade: 0.01,
        };
        let p_w = 300e3;
        let hyp = (1.0 + p.grade * p.grade).sqrt();
        let k_eff = p.k + p.crr2_s2_m2 * m * G_MPS2 / hyp;
        let c = m * G_MPS2 * (p.crr0 + p.grade) / hyp;
        let vt = terminal_speed_mps(p_w, k_eff, c);
        let traj = integrate(&p, 0.0, 20.0, 0.25, 600.0, |_, _, _| p_w, |_, _, _| false);
        assert_eq!(traj.stop, StopReason::MaxTime);
        let &(t_end, _, v_end) = traj.points.last().unwrap();
        assert_eq!(t_end, 600.0);
        assert_eq!(traj.points.len(), 2401);
        assert!(rel_err(v_end, vt) < 1e-3, "integrated {v_end} vs Cardano {vt}");
    }

    #[test]
    fn integrator_reports_stall_and_start_predicate() {
        // No power on a 10 % climb: the car rolls to a stop.
        let p = MotionParams { grade: 0.1, ..aero_only(1500.0, 0.36) };
        let traj = integrate(&p, 0.0, 10.0, 0.25, 60.0, |_, _, _| 0.0, |_, _, _| false);
        assert_eq!(traj.stop, StopReason::Stalled);
        assert_eq!(traj.points.last().unwrap().2, 0.0);
        let traj = integrate(&p, 5.0, 10.0, 0.25, 60.0, |_, _, _| 0.0, |_, x, _| x >= 5.0);
        assert_eq!((traj.stop, traj.points.len()), (StopReason::Predicate, 1));
        let traj = integrate(&p, 0.0, 10.0, 0.25, 60.0, |_, _, _| f64::NAN, |_, _, _| false);
        assert_eq!(traj.stop, StopReason::NonFinite);
    }

    #[test]
    fn rk4_step_integrates_the_carried_quantity_exactly_for_a_cubic() {
        // Closed form: constant acceleration 2 m/s² from v = 1 m/s over 1 s,
        // and e' = v², ∫(1 + 2t)² dt over [0, 1] = 13/3. With a constant
        // acceleration the stage speeds are exact, and the carried quantity's
        // weights reduce to Simpson's rule, exact for this quadratic.
        let (x, v, e) = rk4_step(0.0, 1.0, (0.0, 1.0, 0.0), |_, _, v, _| (2.0, v * v));
        assert!((x - 2.0).abs() < 1e-12, "x = v0·t + ½at² = 2: {x}");
        assert!((v - 3.0).abs() < 1e-12);
        assert!((e - 13.0 / 3.0).abs() < 1e-12, "{e}");
    }

    #[test]
    fn launch_from_standstill_is_finite() {
        // The 0.5 m/s traction floor keeps a = P/(0.5·m) finite at v = 0.
        let traj = integrate(&aero_only(1500.0, 0.36), 0.0, 0.0, 0.25, 10.0, |_, _, _| 100e3, |_, _, _| false);
        assert_eq!(traj.stop, StopReason::MaxTime);
        assert!(traj.points.iter().all(|&(t, x, v)| t.is_finite() && x.is_finite() && v.is_finite()));
        assert!(traj.points.last().unwrap().2 > 10.0);
    }

    #[test]
    fn unbounded_horizon_and_bad_step_terminate() {
        let p = aero_only(1500.0, 0.36);
        let traj = integrate(&p, 0.0, 30.0, 0.25, f64::INFINITY, |_, _, _| 100e3, |t, _, _| t >= 10.0);
        assert_eq!((traj.stop, traj.points.len()), (StopReason::Predicate, 41));
        let traj = integrate(&p, 0.0, 30.0, 1e-300, 1.0, |_, _, _| 100e3, |_, _, _| true);
        assert_eq!(traj.stop, StopReason::Predicate);
    }

    #[test]
    fn last_step_lands_on_horizon() {
        let traj = integrate(&aero_only(1500.0, 0.36), 0.0, 30.0, 0.25, 1.1, |_, _, _| 100e3, |_, _, _| false);
        let times: Vec<f64> = traj.points.iter().map(|p| p.0).collect();
        assert_eq!(times, vec![0.0, 0.25, 0.5, 0.75, 1.0, 1.1]);
    }

    #[test]
    #[ignore = "timing; run with --release -- --ignored --nocapture"]
    fn projection_timing() {
        let p = MotionParams {
            mass_eff_kg: 1545.0,
            mass_kg: 1500.0,
            k: 0.36,
            crr0: 0.012,
            crr2_s2_m2: 5.184e-7,
            wind_mps: 2.0,
            grade: 0.0,
        };
        let runs = 20_000;
        let start = std::time::Instant::now();
        let mut sink = 0.0;
        for i in 0..runs {
            let v0 = 30.0 + (i % 7) as f64;
            let traj =
                integrate(&p, 0.0, v0, 0.25, 60.0, |t, _, _| 250e3 + 100e3 * (-t / 30.0).exp(), |_, x, _| x > 9000.0);
            assert_eq!(traj.stop, StopReason::MaxTime);
            sink += std::hint::black_box(traj).points.last().unwrap().2;
        }
        let per_run = start.elapsed() / runs;
        println!("one 60 s projection at dt = 0.25 s: {per_run:?} (checksum {sink})");
    }
}
