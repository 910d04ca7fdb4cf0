//! Battery power capability and the limits on remaining boost time.
//!
//! - State of power by HPPC (Hybrid Pulse Power Characterization, USABC /
//!   INL battery test manuals): voltage- and current-limited discharge power
//!   from open-circuit voltage and internal resistance.
//! - Pulse current limit from a first-order equivalent circuit (R0 in series
//!   with one R1‖C1 pair; Plett, *Battery Management Systems* vol. II, and
//!   "Extended Kalman filtering for battery management systems", IEEE Trans.
//!   Veh. Technol. 2004).
//! - Energy-, thermal- and derating-limited boost time, and the discharge
//!   rate in kW per kWh as engineers quote it.
//!
//! Currents are discharge-positive, as on the `battery.current` channel.
//! Works equally per cell or per pack, as long as OCV, R and limits match.

/// Voltage-limited discharge current, A: the current at which the terminal
/// voltage OCV − I·R falls to V_min, I_V = (OCV − V_min)/R (HPPC). Zero when
/// OCV ≤ V_min. Domain: `r_ohm` > 0.
pub fn voltage_limited_current_a(ocv_v: f64, r_ohm: f64, v_min: f64) -> f64 {
    debug_assert!(r_ohm > 0.0, "internal resistance must be positive: {r_ohm}");
    ((ocv_v - v_min) / r_ohm).max(0.0)
}

/// Terminal voltage under discharge current I, V: OCV − I·R (ohmic model).
pub fn terminal_voltage_v(ocv_v: f64, r_ohm: f64, current_a: f64) -> f64 {
    ocv_v - current_a * r_ohm
}

/// Voltage-limited discharge power, W (HPPC, USABC / INL manuals):
/// P = V_min·(OCV − V_min)/R, the power at the current that pulls the
/// terminal voltage down to V_min. Zero when OCV ≤ V_min. Domain: `r_ohm` > 0.
pub fn voltage_limited_power_w(ocv_v: f64, r_ohm: f64, v_min: f64) -> f64 {
    v_min * voltage_limited_current_a(ocv_v, r_ohm, v_min)
}

/// Current-limited discharge power, W (HPPC): P = I_max·(OCV − I_max·R), the
/// power at the current limit. Zero when the terminal voltage at I_max would
/// be negative. Domain: `r_ohm` ≥ 0, `i_max` ≥ 0.
pub fn current_limited_power_w(ocv_v: f64, r_ohm: f64, i_max: f64) -> f64 {
    (i_max * terminal_voltage_v(ocv_v, r_ohm, i_max)).max(0.0)
}

/// Maximum discharge power, W, under both the voltage and the current limit
/// (HPPC): the power at the allowed current I = min(I_V, I_max), where
/// I_V = (OCV − V_min)/R. When I_V exceeds I_max the current limit binds.
///
/// For cells V_min > OCV/2, where P(I) = I·(OCV − I·R) rises with I up to the
/// allowed current; this equals the HPPC rule "min of the voltage-limited and
/// current-limited power". If V_min were set below OCV/2, P(I) peaks at
/// the matched load I = OCV/(2R) before the voltage limit; the allowed
/// current is capped there so the result stays the true maximum.
/// Domain: `r_ohm` > 0, `i_max` ≥ 0.
pub fn max_discharge_power_w(ocv_v: f64, r_ohm: f64, v_min: f64, i_max: f64) -> f64 {
    let matched_load_a = (0.5 * ocv_v / r_ohm).max(0.0);
    let i = voltage_limited_current_a(ocv_v, r_ohm, v_min).min(i_max).min(matched_load_a);
    i * terminal_voltage_v(ocv_v, r_ohm, i)
}

/// Discharge current, A, at which the cells deliver terminal power `p_w`,
/// internal-resistance (ohmic) model: P = I·(OCV − I·R), so
/// R·I² − OCV·I + P = 0 and
///
/// I = (OCV − √(OCV² − 4·R·P))/(2R),
///
/// the smaller root (the larger one is the same power on the far side of the
/// matched load OCV/(2R), at a lower terminal voltage and more heat; a pack
/// never runs there). Same HPPC sources as [`max_discharge_power_w`].
///
/// When `p_w` exceeds the most the cells can deliver, OCV²/(4R) at the
/// matched load, the discriminant is negative; it is floored at 0, so the
/// result is the matched-load current OCV/(2R) (the most power there is),
/// not NaN. Domain: `r_ohm` > 0, `p_w` ≥ 0.
pub fn current_at_power_a(ocv_v: f64, r_ohm: f64, p_w: f64) -> f64 {
    debug_assert!(r_ohm > 0.0, "internal resistance must be positive: {r_ohm}");
    let disc = (ocv_v * ocv_v - 4.0 * r_ohm * p_w).max(0.0);
    (ocv_v - disc.sqrt()) / (2.0 * r_ohm)
}

/// As [`current_at_power_a`], but `None` when `p_w` is more than the cells
/// can deliver (above OCV²/(4R), the matched load): for answers that must
/// say "not possible" rather than give the most there is.
pub fn current_at_power_checked_a(ocv_v: f64, r_ohm: f64, p_w: f64) -> Option<f64> {
    (ocv_v * ocv_v - 4.0 * r_ohm * p_w >= 0.0).then(|| current_at_power_a(ocv_v, r_ohm, p_w))
}

/// Largest constant discharge current, A, that keeps the terminal voltage at
/// or above V_min for a pulse of `dt_s`, first-order equivalent circuit
/// (Plett, BMS vol. II; IEEE TVT 2004):
///
/// I_V = (OCV − v₁·e^(−Δt/τ) − V_min) / (R0 + R1·(1 − e^(−Δt/τ)))
///
/// Derivation: at constant I the RC voltage relaxes as
/// v₁(Δt) = v₁·e^(−Δt/τ) + I·R1·(1 − e^(−Δt/τ)); setting the terminal
/// voltage OCV − v₁(Δt) − I·R0 to V_min and solving for I gives the above.
/// With R1 = 0 it is the HPPC current (OCV − V_min)/R0; for Δt → ∞ it is
/// (OCV − V_min)/(R0 + R1).
///
/// Inputs: `v1` the RC-branch voltage now (polarisation, V, positive after
/// discharge), `tau_s` = R1·C1 (τ ≤ 0 means the branch follows instantly).
/// Floored at 0 (already at or below V_min). Domain: R0 + R1 > 0, `dt_s` ≥ 0.
pub fn pulse_current_voltage_limited_a(
    ocv_v: f64,
    v1: f64,
    r0_ohm: f64,
    r1_ohm: f64,
    tau_s: f64,
    dt_s: f64,
    v_min: f64,
) -> f64 {
    debug_assert!(r0_ohm + r1_ohm > 0.0, "total resistance must be positive");
    // 1 − e^(−Δt/τ) by exp_m1 keeps short pulses (Δt ≪ τ) accurate.
    let (decay, grown) = if tau_s > 0.0 {
        let e = -dt_s / tau_s;
        (e.exp(), -e.exp_m1())
    } else {
        (0.0, 1.0)
    };
    ((ocv_v - v1 * decay - v_min) / (r0_ohm + r1_ohm * grown)).max(0.0)
}

/// Time until the energy above the reserve is used at constant discharge
/// current, s: t = E/(OCV·I).
///
/// The energy stored in the cells is drawn at OCV·I, not at the terminal
/// power V·I: with V = OCV − I·R the cells supply V·I to the load plus I²·R
/// lost as heat in their own resistance, and V·I + I²·R = OCV·I. Counting
/// only V·I would overstate the time left by the factor OCV/V (about 10 %
/// at a hard boost). `r_ohm` therefore does not change the result; it is
/// part of the signature so the call site states the model it relies on.
///
/// Infinite when I ≤ 0 (resting or charging); 0 when E ≤ 0.
/// Domain: `ocv_v` > 0, `r_ohm` ≥ 0.
pub fn energy_limited_time_s(energy_above_reserve_j: f64, ocv_v: f64, r_ohm: f64, current_a: f64) -> f64 {
    debug_assert!(ocv_v > 0.0 && r_ohm >= 0.0, "bad OCV {ocv_v} V or resistance {r_ohm} Ω");
    if energy_above_reserve_j <= 0.0 {
        0.0
    } else if current_a <= 0.0 {
        f64::INFINITY
    } else {
        energy_above_reserve_j / (ocv_v * current_a)
    }
}

/// Time until the pack reaches its temperature limit at the present heating
/// rate, s: t = (T_limit − T)/rate. 0 when already at or past the limit (even
/// if cooling: the limit is already breached); infinite when the rate ≤ 0.
pub fn thermal_limited_time_s(temp_c: f64, limit_c: f64, heating_rate_c_per_s: f64) -> f64 {
    if temp_c >= limit_c {
        0.0
    } else if heating_rate_c_per_s <= 0.0 {
        f64::INFINITY
    } else {
        (limit_c - temp_c) / heating_rate_c_per_s
    }
}

/// Derating ratio (available power over rated power) after `t_in_boost_s`
/// of continuous boost: an exponential decay from 1 toward a floor,
///
/// r(t) = floor + (1 − floor)·e^(−t/τ).
///
/// A fitted curve model, not a published law; it matches the common
/// observation that high-rate packs settle at a fraction (often about two
/// thirds) of their rating after some tens of seconds. t < 0 counts as 0;
/// τ ≤ 0 means an immediate drop to the floor.
pub fn derating_ratio(t_in_boost_s: f64, tau_s: f64, floor: f64) -> f64 {
    let t = t_in_boost_s.max(0.0);
    if t == 0.0 {
        1.0
    } else if tau_s <= 0.0 {
        floor
    } else {
        floor + (1.0 - floor) * (-t / tau_s).exp()
    }
}

/// Inverse of [`derating_ratio`]: time in boost at which the ratio falls to
/// `ratio`, s: t = −τ·ln((ratio − floor)/(1 − floor)).
///
/// 0 when ratio ≥ 1 (already there at the start); infinite when
/// ratio ≤ floor (never reached). Domain: `tau_s` ≥ 0, floor < 1.
pub fn time_until_ratio_s(ratio: f64, tau_s: f64, floor: f64) -> f64 {
    if ratio >= 1.0 {
        0.0
    } else if ratio <= floor {
        f64::INFINITY
    } else {
        -tau_s.max(0.0) * ((ratio - floor) / (1.0 - floor)).ln()
    }
}

/// Discharge rate in kW delivered per kWh of capacity (numerically the
/// C-rate in energy terms, 1/h): (P/1000)/(E/3.6e6) = 3600·P/E.
/// Domain: `capacity_j` > 0.
pub fn discharge_rate_kw_per_kwh(power_w: f64, capacity_j: f64) -> f64 {
    debug_assert!(capacity_j > 0.0, "capacity must be positive: {capacity_j} J");
    3600.0 * power_w / capacity_j
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn hppc_example_voltage_limited() {
        // REFERENCES.md, HPPC example (from a public battery-design page):
        // OCV 3.7 V, R 25 mΩ, V_min 2.5 V → I = 48 A, P = 120 W.
        assert!(close(voltage_limited_current_a(3.7, 0.025, 2.5), 48.0, 1e-9));
        assert!(close(voltage_limited_power_w(3.7, 0.025, 2.5), 120.0, 1e-9));
    }

    #[test]
    fn hppc_example_current_limited() {
        // REFERENCES.md, same example with I_max = 40 A → 2.70 V, 108 W.
        assert!(close(terminal_voltage_v(3.7, 0.025, 40.0), 2.70, 1e-12));
        assert!(close(current_limited_power_w(3.7, 0.025, 40.0), 108.0, 1e-9));
        // I_V = 48 A > 40 A: the current limit binds.
        assert!(close(max_discharge_power_w(3.7, 0.025, 2.5, 40.0), 108.0, 1e-9));
        // I_max = 60 A > I_V: the voltage limit binds.
        assert!(close(max_discharge_power_w(3.7, 0.025, 2.5, 60.0), 120.0, 1e-9));
    }

    #[test]
    fn current_at_power_inverts_the_ohmic_model() {
        // REFERENCES.md, HPPC example: OCV 3.7 V, R 25 mΩ, at 40 A the
        // terminal voltage is 2.70 V and the power 108 W; so 108 W needs 40 A.
        assert!(close(current_at_power_a(3.7, 0.025, 108.0), 40.0, 1e-9));
        // By hand: OCV 400 V, R 0.1 Ω, 100 kW: disc = 160 000 − 40 000 =
        // 120 000, √ = 346.4102, I = (400 − 346.4102)/0.2 = 267.949 A; and
        // back, 267.949·(400 − 26.7949) = 100 000 W.
        let i = current_at_power_a(400.0, 0.1, 100e3);
        assert!(close(i, 267.949_192, 1e-5), "{i}");
        assert!(close(i * terminal_voltage_v(400.0, 0.1, i), 100e3, 1e-6));
        assert_eq!(current_at_power_a(400.0, 0.1, 0.0), 0.0);
        // Beyond the matched-load maximum OCV²/(4R) = 400 kW: the current
        // stops at the matched load OCV/(2R) = 2000 A instead of NaN.
        assert_eq!(current_at_power_a(400.0, 0.1, 500e3), 2000.0);
        // Above the matched-load maximum (400²/(4·0.1) = 400 kW) the checked
        // form says so instead of giving the most there is.
        assert_eq!(current_at_power_checked_a(400.0, 0.1, 500e3), None);
        assert!(close(current_at_power_checked_a(3.7, 0.025, 108.0).unwrap(), 40.0, 1e-9));
    }

    #[test]
    fn max_power_is_min_of_the_two_when_v_min_above_half_ocv() {
        // HPPC rule (USABC / INL): min of voltage- and current-limited power, for V_min > OCV/2.
        for i_max in [10.0, 30.0, 47.9, 48.0, 48.1, 100.0] {
            let rule = voltage_limited_power_w(3.7, 0.025, 2.5).min(current_limited_power_w(3.7, 0.025, i_max));
            assert!(close(max_discharge_power_w(3.7, 0.025, 2.5, i_max), rule, 1e-9), "I_max {i_max}");
        }
    }

    #[test]
    fn max_power_caps_at_matched_load() {
        // Closed form: P(I) = I·(OCV − I·R) peaks at I = OCV/(2R), P = OCV²/(4R).
        // OCV 4 V, R 0.1 Ω, V_min 1 V (< OCV/2): peak at 20 A, 40 W (above the 30 W voltage-limited value).
        assert!(close(max_discharge_power_w(4.0, 0.1, 1.0, 100.0), 40.0, 1e-9));
        assert!(close(voltage_limited_power_w(4.0, 0.1, 1.0), 30.0, 1e-9));
    }

    #[test]
    fn limits_are_zero_not_negative_past_the_limit() {
        assert_eq!(voltage_limited_power_w(2.4, 0.025, 2.5), 0.0);
        assert_eq!(current_limited_power_w(3.7, 0.025, 200.0), 0.0);
        assert_eq!(max_discharge_power_w(2.4, 0.025, 2.5, 40.0), 0.0);
    }

    #[test]
    fn pulse_current_reduces_to_hppc_and_steady_state() {
        // Plett first-order model, limits derived in the doc comment:
        // R1 = 0 → HPPC current (OCV − V_min)/R0 (REFERENCES.md example: 48 A).
        assert!(close(pulse_current_voltage_limited_a(3.7, 0.0, 0.025, 0.0, 20.0, 10.0, 2.5), 48.0, 1e-9));
        // Δt → ∞ → (OCV − V_min)/(R0 + R1) = 1.2/0.025 = 48 A with R0 = 15 mΩ, R1 = 10 mΩ.
        let inf = pulse_current_voltage_limited_a(3.7, 0.05, 0.015, 0.010, 20.0, f64::INFINITY, 2.5);
        assert!(close(inf, 48.0, 1e-9), "{inf}");
        // Δt = 0: only R0 acts, against the present polarisation: (3.7 − 0.05 − 2.5)/0.015.
        let zero = pulse_current_voltage_limited_a(3.7, 0.05, 0.015, 0.010, 20.0, 0.0, 2.5);
        assert!(close(zero, 1.15 / 0.015, 1e-9), "{zero}");
        // τ = 0 behaves like Δt → ∞ and is not NaN.
        assert!(close(pulse_current_voltage_limited_a(3.7, 0.05, 0.015, 0.010, 0.0, 0.0, 2.5), 48.0, 1e-9));
    }

    #[test]
    fn pulse_current_ends_exactly_at_v_min_in_a_simulated_circuit() {
        // Independent check: drive the RC circuit with the returned current, integrating
        // dv1/dt = (I·R1 − v1)/τ with small explicit Euler steps, and read the terminal voltage.
        let (ocv, v1_0, r0, r1, tau, dt, v_min) = (3.7, 0.05, 0.015, 0.010, 20.0, 10.0, 2.5);
        let i = pulse_current_voltage_limited_a(ocv, v1_0, r0, r1, tau, dt, v_min);
        let steps = 100_000;
        let h = dt / steps as f64;
        let mut v1 = v1_0;
        for _ in 0..steps {
            v1 += h * (i * r1 - v1) / tau;
        }
        let v_end = ocv - v1 - i * r0;
        assert!(close(v_end, v_min, 1e-5), "terminal voltage {v_end} at I = {i}");
    }

    #[test]
    fn energy_limited_time_counts_resistive_loss() {
        // Hand-computed: 1 kWh = 3.6 MJ above reserve, OCV 400 V, 250 A → OCV·I = 100 kW → 36 s.
        assert!(close(energy_limited_time_s(3.6e6, 400.0, 0.1, 250.0), 36.0, 1e-12));
        // Closed form: terminal power V·I plus loss I²·R equals OCV·I.
        let (ocv, r, i) = (400.0, 0.1, 250.0);
        let drawn = terminal_voltage_v(ocv, r, i) * i + i * i * r;
        assert!(close(drawn, ocv * i, 1e-9));
        assert_eq!(energy_limited_time_s(3.6e6, 400.0, 0.1, 0.0), f64::INFINITY);
        assert_eq!(energy_limited_time_s(3.6e6, 400.0, 0.1, -50.0), f64::INFINITY);
        assert_eq!(energy_limited_time_s(0.0, 400.0, 0.1, 250.0), 0.0);
    }

    #[test]
    fn thermal_limited_time_by_hand() {
        // Hand-computed: (60 − 45) °C at 0.5 °C/s → 30 s.
        assert_eq!(thermal_limited_time_s(45.0, 60.0, 0.5), 30.0);
        assert_eq!(thermal_limited_time_s(45.0, 60.0, 0.0), f64::INFINITY);
        assert_eq!(thermal_limited_time_s(45.0, 60.0, -0.1), f64::INFINITY);
        assert_eq!(thermal_limited_time_s(61.0, 60.0, 0.5), 0.0);
        assert_eq!(thermal_limited_time_s(61.0, 60.0, -0.5), 0.0);
    }

    #[test]
    fn derating_approaches_two_thirds() {
        // REFERENCES.md rule of thumb (common practice, no source): power falls to about two
        // thirds of rating after some 30 s of full discharge. With floor 2/3 and τ = 10 s:
        // r(30 s) = 2/3 + (1/3)·e^(−3) ≈ 0.683, r(50 s) ≈ 0.669.
        let floor = 2.0 / 3.0;
        assert_eq!(derating_ratio(0.0, 10.0, floor), 1.0);
        assert!(close(derating_ratio(30.0, 10.0, floor), 0.67, 0.015));
        assert!(close(derating_ratio(50.0, 10.0, floor), 0.67, 0.005));
        assert!(derating_ratio(1e6, 10.0, floor) >= floor);
        assert_eq!(derating_ratio(5.0, 0.0, floor), floor);
        assert_eq!(derating_ratio(-5.0, 10.0, floor), 1.0);
    }

    #[test]
    fn derating_inverse_round_trips() {
        // Closed form: the inverse of r(t) = f + (1 − f)·e^(−t/τ).
        let (tau, floor) = (12.0, 0.6);
        for t in [0.5, 5.0, 12.0, 40.0, 100.0] {
            let r = derating_ratio(t, tau, floor);
            assert!(close(time_until_ratio_s(r, tau, floor), t, 1e-9 * t.max(1.0)), "t {t}");
        }
        assert_eq!(time_until_ratio_s(1.0, tau, floor), 0.0);
        assert_eq!(time_until_ratio_s(1.2, tau, floor), 0.0);
        assert_eq!(time_until_ratio_s(0.6, tau, floor), f64::INFINITY);
        assert_eq!(time_until_ratio_s(0.5, tau, floor), f64::INFINITY);
    }

    #[test]
    fn discharge_rate_by_hand() {
        // Hand-computed: 300 kW from a 50 kWh (1.8e8 J) pack is 6 kW per kWh.
        assert!(close(discharge_rate_kw_per_kwh(300e3, 50.0 * 3.6e6), 6.0, 1e-12));
        assert_eq!(discharge_rate_kw_per_kwh(0.0, 1.8e8), 0.0);
    }
}
