//! Braking distance and time at a constant brake deceleration plus
//! aerodynamic drag, and the tyre speed margin.
//!
//! Model: dv/dt = −(a_b + κ·v²), with a_b the brake (and rolling)
//! deceleration and κ = ½·ρ·CdA/m. Both integrals have elementary closed
//! forms (standard results of vehicle braking analysis, e.g. Wong, *Theory
//! of Ground Vehicles*, ch. 3, "braking distance with aerodynamic
//! resistance"); they are derived on each function. Rolling resistance and
//! grade, being speed-independent, can be folded into a_b by the caller.

/// ln(1 + y)/y, equal to 1 at y = 0; accurate for small y because `ln_1p`
/// is. Domain: y > −1.
fn ln1p_ratio(y: f64) -> f64 {
    if y == 0.0 { 1.0 } else { y.ln_1p() / y }
}

/// atan(w)/w, equal to 1 at w = 0.
fn atan_ratio(w: f64) -> f64 {
    if w == 0.0 { 1.0 } else { w.atan() / w }
}

/// Distance to slow from `v0_mps` to `v_exit_mps`, m, at constant brake
/// deceleration `decel_mps2` (a_b > 0) plus aerodynamic drag
/// `k_over_m` = κ = ½·ρ·CdA/m (1/m, ≥ 0).
///
/// Derivation: with dx = v·dt, dv/dx = −(a_b + κ·v²)/v, so
///
/// x = ∫_{v1}^{v0} v·dv/(a_b + κ·v²) = ln((a_b + κ·v0²)/(a_b + κ·v1²))/(2κ).
///
/// Written as x = (v0² − v1²)/(2·(a_b + κ·v1²))·ln(1 + y)/y with
/// y = κ·(v0² − v1²)/(a_b + κ·v1²), which is exact at κ = 0, where it is
/// the constant-deceleration distance (v0² − v1²)/(2·a_b), and loses no
/// precision as κ → 0 (`ln_1p`).
///
/// 0 when v0 ≤ v1 (nothing to shed). Infinite when nothing would stop the
/// car (a_b = 0 with v1 = 0). Domain: `decel_mps2` ≥ 0, `k_over_m` ≥ 0,
/// speeds ≥ 0.
pub fn braking_distance_m(v0_mps: f64, v_exit_mps: f64, decel_mps2: f64, k_over_m: f64) -> f64 {
    debug_assert!(decel_mps2 >= 0.0 && k_over_m >= 0.0, "bad decel {decel_mps2} or κ {k_over_m}");
    let (v0, v1) = (v0_mps, v_exit_mps.max(0.0));
    if v0 <= v1 {
        return 0.0;
    }
    let resist_at_exit = decel_mps2 + k_over_m * v1 * v1;
    if resist_at_exit <= 0.0 {
        return f64::INFINITY;
    }
    let dv2 = v0 * v0 - v1 * v1;
    dv2 / (2.0 * resist_at_exit) * ln1p_ratio(k_over_m * dv2 / resist_at_exit)
}

/// Time to slow from `v0_mps` to `v_exit_mps`, s, under the same model as
/// [`braking_distance_m`].
///
/// Derivation: dt = −dv/(a_b + κ·v²), so with s = √(κ/a_b)
///
/// t = ∫_{v1}^{v0} dv/(a_b + κ·v²) = (atan(s·v0) − atan(s·v1))/√(a_b·κ).
///
/// With atan A − atan B = atan((A − B)/(1 + A·B)) (valid for A·B > −1) this
/// is t = (v0 − v1)/(a_b + κ·v0·v1)·atan(w)/w with
/// w = √(a_b·κ)·(v0 − v1)/(a_b + κ·v0·v1), exact at κ = 0, where it is the
/// constant-deceleration time (v0 − v1)/a_b, and smooth as κ → 0.
///
/// 0 when v0 ≤ v1; infinite when nothing would stop the car. Domain as
/// [`braking_distance_m`].
pub fn braking_time_s(v0_mps: f64, v_exit_mps: f64, decel_mps2: f64, k_over_m: f64) -> f64 {
    debug_assert!(decel_mps2 >= 0.0 && k_over_m >= 0.0, "bad decel {decel_mps2} or κ {k_over_m}");
    let (v0, v1) = (v0_mps, v_exit_mps.max(0.0));
    if v0 <= v1 {
        return 0.0;
    }
    let denom = decel_mps2 + k_over_m * v0 * v1;
    if denom <= 0.0 {
        return f64::INFINITY;
    }
    let w = (decel_mps2 * k_over_m).sqrt() * (v0 - v1) / denom;
    (v0 - v1) / denom * atan_ratio(w)
}

/// Tyre speed margin, m/s: rated − v. Negative when over the tyre's rated
/// speed (ISO 4000 / UN ECE R30 speed symbol).
pub fn tyre_speed_margin_mps(v_mps: f64, rated_mps: f64) -> f64 {
    rated_mps - v_mps
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel_err(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    #[test]
    fn no_aero_matches_constant_deceleration_exactly() {
        // Closed form (uniform deceleration): x = (v0² − v1²)/(2a), t = (v0 − v1)/a.
        // Hand-computed: 100 → 20 m/s at 10 m/s²: x = 9600/20 = 480 m, t = 8 s.
        assert_eq!(braking_distance_m(100.0, 20.0, 10.0, 0.0), 480.0);
        assert_eq!(braking_time_s(100.0, 20.0, 10.0, 0.0), 8.0);
        assert_eq!(braking_distance_m(100.0, 0.0, 9.5, 0.0), 100.0 * 100.0 / (2.0 * 9.5));
        assert_eq!(braking_time_s(100.0, 0.0, 9.5, 0.0), 100.0 / 9.5);
    }

    #[test]
    fn small_kappa_is_continuous_with_the_limit() {
        // Continuity: as κ → 0 the aero result tends to the κ = 0 value, with no cancellation.
        let (x0, t0) = (braking_distance_m(100.0, 20.0, 10.0, 0.0), braking_time_s(100.0, 20.0, 10.0, 0.0));
        let mut prev = (0.0_f64, 0.0_f64);
        for kappa in [1e-4, 1e-6, 1e-8, 1e-12, 1e-16, 1e-300] {
            let (x, t) = (braking_distance_m(100.0, 20.0, 10.0, kappa), braking_time_s(100.0, 20.0, 10.0, kappa));
            assert!((x < x0 && t < t0) || kappa < 1e-15, "κ {kappa}");
            assert!(rel_err(x, x0) <= 1.0e3 * kappa && rel_err(t, t0) <= 1.0e3 * kappa, "κ {kappa}: {x}, {t}");
            assert!(x >= prev.0 && t >= prev.1, "monotone in κ");
            prev = (x, t);
        }
    }

    #[test]
    fn aero_shortens_braking() {
        // Common practice: drag adds to the brakes. κ = ½·1.2·0.7/1500 ≈ 2.8e-4 1/m.
        let kappa = 0.5 * 1.2 * 0.7 / 1500.0;
        assert!(braking_distance_m(110.0, 30.0, 9.0, kappa) < braking_distance_m(110.0, 30.0, 9.0, 0.0));
        assert!(braking_time_s(110.0, 30.0, 9.0, kappa) < braking_time_s(110.0, 30.0, 9.0, 0.0));
    }

    /// Independent numerical integration: RK4 in time of dv/dt = −(a_b + κ v²), dx/dt = v,
    /// stepped until v crosses v1, the last step interpolated linearly.
    fn integrate_braking(v0: f64, v1: f64, a_b: f64, kappa: f64) -> (f64, f64) {
        let f = |v: f64| -(a_b + kappa * v * v);
        let h = 1e-3;
        let (mut t, mut x, mut v) = (0.0_f64, 0.0_f64, v0);
        loop {
            let k1 = f(v);
            let k2 = f(v + 0.5 * h * k1);
            let k3 = f(v + 0.5 * h * k2);
            let k4 = f(v + h * k3);
            let (v2, v3, v4) = (v + 0.5 * h * k1, v + 0.5 * h * k2, v + h * k3);
            let v_next = v + h / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4);
            let x_next = x + h / 6.0 * (v + 2.0 * v2 + 2.0 * v3 + v4);
            if v_next <= v1 {
                let frac = (v - v1) / (v - v_next);
                return (t + frac * h, x + frac * (x_next - x));
            }
            (t, x, v) = (t + h, x_next, v_next);
        }
    }

    #[test]
    fn closed_forms_match_numerical_integration() {
        // Numerical integration written here, within 0.1 %.
        let kappa = 0.5 * 1.2 * 0.7 / 1500.0;
        for (v0, v1, a_b) in [(110.0, 0.0, 9.0), (110.0, 40.0, 6.0), (140.0, 60.0, 2.0), (30.0, 0.0, 9.8)] {
            let (t_num, x_num) = integrate_braking(v0, v1, a_b, kappa);
            let (x, t) = (braking_distance_m(v0, v1, a_b, kappa), braking_time_s(v0, v1, a_b, kappa));
            assert!(rel_err(x, x_num) < 1e-3, "{v0}→{v1} at {a_b}: x {x} vs {x_num}");
            assert!(rel_err(t, t_num) < 1e-3, "{v0}→{v1} at {a_b}: t {t} vs {t_num}");
        }
    }

    #[test]
    fn matches_the_textbook_log_and_atan_forms() {
        // The forms as usually written, x = ln((a + κv0²)/(a + κv1²))/(2κ),
        // t = (atan(v0·√(κ/a)) − atan(v1·√(κ/a)))/√(aκ), at a κ where they are well conditioned.
        let (v0, v1, a, kappa): (f64, f64, f64, f64) = (110.0, 20.0, 8.0, 3e-4);
        let x = ((a + kappa * v0 * v0) / (a + kappa * v1 * v1)).ln() / (2.0 * kappa);
        let s = (kappa / a).sqrt();
        let t = ((v0 * s).atan() - (v1 * s).atan()) / (a * kappa).sqrt();
        assert!(rel_err(braking_distance_m(v0, v1, a, kappa), x) < 1e-12);
        assert!(rel_err(braking_time_s(v0, v1, a, kappa), t) < 1e-12);
    }

    #[test]
    fn degenerate_inputs_are_not_nan() {
        assert_eq!(braking_distance_m(20.0, 30.0, 9.0, 1e-4), 0.0);
        assert_eq!(braking_time_s(20.0, 20.0, 9.0, 1e-4), 0.0);
        assert_eq!(braking_distance_m(20.0, 0.0, 0.0, 1e-4), f64::INFINITY);
        assert_eq!(braking_time_s(20.0, 0.0, 0.0, 1e-4), f64::INFINITY);
        assert_eq!(braking_distance_m(20.0, 0.0, 0.0, 0.0), f64::INFINITY);
        // Aero only, to a non-zero exit speed: x = ln(v0/v1)/κ, t = (1/v1 − 1/v0)/κ.
        assert!(rel_err(braking_distance_m(40.0, 20.0, 0.0, 1e-3), 2.0_f64.ln() / 1e-3) < 1e-12);
        assert!(rel_err(braking_time_s(40.0, 20.0, 0.0, 1e-3), (1.0 / 20.0 - 1.0 / 40.0) / 1e-3) < 1e-12);
    }

    #[test]
    fn tyre_margin_by_hand() {
        // ISO 4000 speed symbol Y = 300 km/h = 83.33 m/s (REFERENCES.md, tyre speed symbols).
        let rated = 300.0 / 3.6;
        assert_eq!(tyre_speed_margin_mps(80.0, rated), rated - 80.0);
        assert!(tyre_speed_margin_mps(90.0, rated) < 0.0);
    }
}
