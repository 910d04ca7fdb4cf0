//! Road-load power at the current speed, split into aerodynamic, rolling and
//! grade terms; inertial power; wheel power from measured powertrain power.
//!
//! The model is the one behind coast-down testing (SAE J2263, SAE J1263,
//! ISO 10521): the resisting force is F(v) = A + B·v + C·v², where
//! C ≈ ½·ρ·CdA (plus the tyre's speed-squared term) and A ≈ Crr·m·g plus
//! driveline friction. J2263 reference conditions are 20 °C and 98.21 kPa,
//! effective mass about 1.03·m, and runs in opposite directions are averaged
//! to cancel wind. Here the terms are kept physical (CdA, Crr0, Crr2, mass,
//! grade) so the online estimator can fit them and the UI can show them.

/// Standard acceleration of gravity, m/s² (3rd CGPM, 1901; ISO 80000-3).
pub const G_MPS2: f64 = 9.80665;

/// Inputs to [`road_load`]. All SI.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RoadLoadInputs {
    /// Vehicle speed over ground, m/s (≥ 0).
    pub v_mps: f64,
    /// Wind speed along the direction of travel, m/s, headwind positive.
    pub wind_mps: f64,
    /// Air density, kg/m³.
    pub rho: f64,
    /// Drag area Cd·A, m².
    pub cda_m2: f64,
    /// Rolling-resistance coefficient at zero speed (dimensionless).
    pub crr0: f64,
    /// Speed-squared rolling-resistance term, s²/m²: Crr(v) = crr0 + crr2·v².
    pub crr2_s2_m2: f64,
    /// Vehicle mass, kg (the static mass that loads the tyres, not the
    /// effective mass with rotating inertia).
    pub mass_kg: f64,
    /// Road grade as rise over run (0.05 = 5 %), uphill positive.
    pub grade: f64,
}

/// Road-load power at one speed, W, split by cause. Positive means power the
/// powertrain must supply.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RoadLoad {
    /// Aerodynamic drag power, W.
    pub aero_w: f64,
    /// Tyre rolling-resistance power, W.
    pub rolling_w: f64,
    /// Power to climb the grade, W (negative downhill).
    pub grade_w: f64,
    /// Sum of the three, W.
    pub total_w: f64,
}

/// Rolling-resistance coefficient at speed v: Crr(v) = crr0 + crr2·v².
///
/// The speed-squared form follows Wong, *Theory of Ground Vehicles*, for
/// radial passenger-car tyres (f_r = 0.0136 + 0.40e-7·V², V in km/h, which
/// is crr2 = 0.40e-7·3.6² = 5.184e-7 s²/m²).
pub fn rolling_coefficient(crr0: f64, crr2_s2_m2: f64, v_mps: f64) -> f64 {
    crr0 + crr2_s2_m2 * v_mps * v_mps
}

/// Road-load power at the current speed, W.
///
/// - aero: P_a = ½·ρ·CdA·v_air·|v_air|·v, with v_air = v + wind (headwind
///   positive). The signed square keeps a tailwind faster than the car
///   pushing it forward.
/// - rolling: P_r = Crr(v)·m·g·cos θ·v, Crr(v) = crr0 + crr2·v².
/// - grade: P_g = m·g·sin θ·v, θ = atan(grade).
///
/// Summed over the terms this is the coast-down road-load force
/// F = A + B·v + C·v² (SAE J2263 / J1263) times v, with B = 0 apart from
/// the wind cross-term.
///
/// Domain: `v_mps` ≥ 0, `rho` ≥ 0, `cda_m2` ≥ 0, `mass_kg` ≥ 0, any finite
/// grade.
pub fn road_load(i: &RoadLoadInputs) -> RoadLoad {
    let v_air = i.v_mps + i.wind_mps;
    let aero_w = 0.5 * i.rho * i.cda_m2 * v_air * v_air.abs() * i.v_mps;
    // cos(atan g) = 1/√(1+g²), sin(atan g) = g/√(1+g²): no trig needed.
    let hyp = (1.0 + i.grade * i.grade).sqrt();
    let (cos_theta, sin_theta) = (1.0 / hyp, i.grade / hyp);
    let weight_n = i.mass_kg * G_MPS2;
    let rolling_w = rolling_coefficient(i.crr0, i.crr2_s2_m2, i.v_mps) * weight_n * cos_theta * i.v_mps;
    let grade_w = weight_n * sin_theta * i.v_mps;
    RoadLoad { aero_w, rolling_w, grade_w, total_w: aero_w + rolling_w + grade_w }
}

/// Inertial power, W: P_i = m_eff·a·v, the power going into (or, when
/// slowing, coming out of) kinetic energy including rotating parts.
/// `m_eff_kg` is the effective mass, about 1.03·m for a car (SAE J2263),
/// higher in low gears.
pub fn inertial_power_w(m_eff_kg: f64, a_mps2: f64, v_mps: f64) -> f64 {
    m_eff_kg * a_mps2 * v_mps
}

/// Power at the wheels, W, from measured combustion-engine and electric-motor
/// power and the driveline efficiency η (0 < η ≤ 1).
///
/// When the powertrain drives (P = engine + motor ≥ 0) the driveline loses
/// power on the way to the wheels: P_wheel = η·P. When it absorbs power
/// (P < 0: regeneration, engine braking) the power flows from the wheels and
/// the loss is on the wheel side: P_wheel = P/η.
pub fn wheel_power_w(engine_w: f64, motor_w: f64, driveline_eff: f64) -> f64 {
    debug_assert!(driveline_eff > 0.0 && driveline_eff <= 1.0, "driveline efficiency out of (0, 1]: {driveline_eff}");
    let powertrain_w = engine_w + motor_w;
    if powertrain_w >= 0.0 { powertrain_w * driveline_eff } else { powertrain_w / driveline_eff }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn inputs(v_mps: f64) -> RoadLoadInputs {
        RoadLoadInputs {
            v_mps,
            wind_mps: 0.0,
            rho: 1.2,
            cda_m2: 0.7,
            crr0: 0.012,
            crr2_s2_m2: 0.0,
            mass_kg: 2000.0,
            grade: 0.0,
        }
    }

    fn rel_close(a: f64, b: f64, rel: f64) -> bool {
        (a - b).abs() <= rel * b.abs().max(f64::MIN_POSITIVE)
    }

    #[test]
    fn doubling_speed_multiplies_aero_power_by_eight() {
        // REFERENCES.md ("Road load and coast-down"): aero power scales with v³,
        // doubling speed multiplies it by 8 exactly.
        let p1 = road_load(&inputs(40.0)).aero_w;
        let p2 = road_load(&inputs(80.0)).aero_w;
        assert!(rel_close(p2 / p1, 8.0, 1e-14), "ratio {}", p2 / p1);
    }

    #[test]
    fn total_power_scales_by_less_than_eight_with_rolling_resistance() {
        // REFERENCES.md: total road-load power scales by less than 8 because of
        // rolling resistance (linear in v with constant Crr).
        let p1 = road_load(&inputs(40.0)).total_w;
        let p2 = road_load(&inputs(80.0)).total_w;
        assert!(p2 / p1 < 8.0 && p2 / p1 > 2.0, "ratio {}", p2 / p1);
    }

    #[test]
    fn wong_speed_dependent_crr_at_100_kmh() {
        // REFERENCES.md: Wong, Theory of Ground Vehicles (from memory):
        // f_r = 0.0136 + 0.40e-7·V², V in km/h. 0.40e-7·3.6² = 5.184e-7 s²/m².
        let v_kmh: f64 = 100.0;
        let wong = 0.0136 + 0.40e-7 * v_kmh * v_kmh;
        let ours = rolling_coefficient(0.0136, 5.184e-7, v_kmh / 3.6);
        assert!(rel_close(ours, wong, 1e-12), "{ours} vs {wong}");
        assert!(rel_close(ours, 0.0140, 1e-12));
    }

    #[test]
    fn headwind_increases_aero_power_and_tailwind_reduces_it() {
        // Common practice (definition of the sign convention: headwind positive).
        let calm = road_load(&inputs(40.0)).aero_w;
        let head = road_load(&RoadLoadInputs { wind_mps: 5.0, ..inputs(40.0) }).aero_w;
        let tail = road_load(&RoadLoadInputs { wind_mps: -5.0, ..inputs(40.0) }).aero_w;
        assert!(head > calm && tail < calm);
        // Tailwind faster than the car pushes it: aero power becomes negative.
        let pushed = road_load(&RoadLoadInputs { wind_mps: -50.0, ..inputs(40.0) }).aero_w;
        assert!(pushed < 0.0);
    }

    #[test]
    fn hand_computed_example() {
        // Hand-computed: v = 40 m/s, headwind 5 m/s, ρ = 1.2, CdA = 0.7, m = 2000 kg, Crr = 0.012.
        // aero = 0.5·1.2·0.7·45²·40 = 0.42·2025·40 = 34 020 W
        // rolling = 0.012·2000·9.80665·40 = 9 414.384 W
        let r = road_load(&RoadLoadInputs { wind_mps: 5.0, ..inputs(40.0) });
        assert!(rel_close(r.aero_w, 34_020.0, 1e-12), "{r:?}");
        assert!(rel_close(r.rolling_w, 9_414.384, 1e-12), "{r:?}");
        assert_eq!(r.grade_w, 0.0);
        assert!(rel_close(r.total_w, 43_434.384, 1e-12), "{r:?}");
    }

    #[test]
    fn grade_terms_follow_atan_geometry() {
        // Closed form derived here: θ = atan(g) → sin θ = g/√(1+g²), cos θ = 1/√(1+g²).
        // Hand-computed at g = 0.75 (a 3-4-5 triangle): sin θ = 0.6, cos θ = 0.8.
        let r = road_load(&RoadLoadInputs { grade: 0.75, ..inputs(10.0) });
        let weight_power = 2000.0 * 9.80665 * 10.0;
        assert!(rel_close(r.grade_w, 0.6 * weight_power, 1e-14), "{r:?}");
        assert!(rel_close(r.rolling_w, 0.012 * 0.8 * weight_power, 1e-14), "{r:?}");
        let down = road_load(&RoadLoadInputs { grade: -0.75, ..inputs(10.0) });
        assert_eq!(down.grade_w, -r.grade_w);
    }

    #[test]
    fn zero_speed_gives_zero_power() {
        let r = road_load(&RoadLoadInputs { wind_mps: 10.0, grade: 0.1, ..inputs(0.0) });
        assert_eq!(r.total_w, 0.0);
        assert!(!r.total_w.is_nan());
    }

    #[test]
    fn inertial_and_wheel_power_by_hand() {
        // Hand-computed: 1545 kg·2 m/s²·30 m/s = 92 700 W.
        assert_eq!(inertial_power_w(1545.0, 2.0, 30.0), 92_700.0);
        // Hand-computed: (200 kW + 100 kW)·0.9 = 270 kW driving; −100 kW / 0.8 = −125 kW regenerating.
        assert!(rel_close(wheel_power_w(200e3, 100e3, 0.9), 270e3, 1e-15));
        assert!(rel_close(wheel_power_w(0.0, -100e3, 0.8), -125e3, 1e-15));
    }
}
