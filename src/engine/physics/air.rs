//! Air density: the CIPM-2007 moist-air equation from ambient temperature,
//! pressure and relative humidity, and the ISA troposphere as the fallback
//! when no weather data is available.
//!
//! CIPM-2007: A. Picard, R. S. Davis, M. Gläser, K. Fujii, "Revised formula
//! for the density of moist air (CIPM-2007)", *Metrologia* 45 (2008) 149–155.
//! The paper states its range as 600 hPa ≤ p ≤ 1100 hPa and
//! 15 °C ≤ t ≤ 27 °C; outside that range the same formulas are used as an
//! extrapolation (the terms are smooth and the non-ideal corrections stay
//! below 0.1 % for track conditions, −20 °C to 50 °C).
//!
//! ISA: ISO 2533:1975 and the US Standard Atmosphere 1976, troposphere only.

/// Molar gas constant R, J/(mol·K), the value CIPM-2007 uses.
pub const R_MOLAR_J_PER_MOL_K: f64 = 8.314472;
/// Molar mass of dry air with x_CO2 = 0.0004, kg/mol (CIPM-2007 eq. 3).
pub const M_DRY_AIR_KG_PER_MOL: f64 = 28.96546e-3;
/// Molar mass of water, kg/mol (CIPM-2007).
pub const M_WATER_KG_PER_MOL: f64 = 18.01528e-3;
/// 0 °C in kelvin.
pub const ZERO_C_K: f64 = 273.15;

/// Saturation vapour pressure of pure water over a plane liquid surface, Pa,
/// CIPM-2007 eq. A1.1 (Davis 1992 form):
///
/// p_sv = exp(A·T² + B·T + C + D/T),
/// A = 1.2378847e-5 K⁻², B = −1.9121316e-2 K⁻¹, C = 33.93711047,
/// D = −6.3431645e3 K.
///
/// Domain: `t_k` > 0 (stated range of the fit 273.15 K to 303.15 K).
pub fn saturation_vapour_pressure_pa(t_k: f64) -> f64 {
    const A: f64 = 1.237_884_7e-5;
    const B: f64 = -1.912_131_6e-2;
    const C: f64 = 33.937_110_47;
    const D: f64 = -6.343_164_5e3;
    debug_assert!(t_k > 0.0, "temperature must be above absolute zero: {t_k} K");
    (A * t_k * t_k + B * t_k + C + D / t_k).exp()
}

/// Enhancement factor f of water vapour in air (dimensionless), CIPM-2007
/// eq. A1.2: f = α + β·p + γ·t², α = 1.00062, β = 3.14e-8 Pa⁻¹,
/// γ = 5.6e-7 K⁻² (t in °C).
pub fn enhancement_factor(p_pa: f64, t_c: f64) -> f64 {
    1.00062 + 3.14e-8 * p_pa + 5.6e-7 * t_c * t_c
}

/// Compressibility factor Z of moist air (dimensionless), CIPM-2007 eq. A1.4:
///
/// Z = 1 − (p/T)·[a0 + a1·t + a2·t² + (b0 + b1·t)·x_v + (c0 + c1·t)·x_v²]
///       + (p/T)²·(d + e·x_v²)
///
/// with T in K, t = T − 273.15 in °C, x_v the mole fraction of water vapour,
/// a0 = 1.58123e-6 K/Pa, a1 = −2.9331e-8 Pa⁻¹, a2 = 1.1043e-10 K⁻¹·Pa⁻¹,
/// b0 = 5.707e-6 K/Pa, b1 = −2.051e-8 Pa⁻¹, c0 = 1.9898e-4 K/Pa,
/// c1 = −2.376e-6 Pa⁻¹, d = 1.83e-11 K²/Pa², e = −0.765e-8 K²/Pa².
///
/// Domain: `t_k` > 0, `p_pa` ≥ 0, 0 ≤ `x_v` ≤ 1.
pub fn compressibility(p_pa: f64, t_k: f64, x_v: f64) -> f64 {
    const A0: f64 = 1.581_23e-6;
    const A1: f64 = -2.933_1e-8;
    const A2: f64 = 1.104_3e-10;
    const B0: f64 = 5.707e-6;
    const B1: f64 = -2.051e-8;
    const C0: f64 = 1.989_8e-4;
    const C1: f64 = -2.376e-6;
    const D: f64 = 1.83e-11;
    const E: f64 = -0.765e-8;
    debug_assert!(t_k > 0.0, "temperature must be above absolute zero: {t_k} K");
    let t_c = t_k - ZERO_C_K;
    let p_over_t = p_pa / t_k;
    let first = A0 + A1 * t_c + A2 * t_c * t_c + (B0 + B1 * t_c) * x_v + (C0 + C1 * t_c) * x_v * x_v;
    1.0 - p_over_t * first + p_over_t * p_over_t * (D + E * x_v * x_v)
}

/// Mole fraction of water vapour x_v from relative humidity, CIPM-2007
/// eq. A1.3: x_v = h·f(p, t)·p_sv(T)/p. `rh` is clamped to 0..1 (humidity
/// sensors overshoot 100 % slightly in fog).
///
/// Domain: `p_pa` > 0, `t_c` > −273.15.
pub fn water_vapour_mole_fraction(t_c: f64, p_pa: f64, rh: f64) -> f64 {
    debug_assert!(p_pa > 0.0, "pressure must be positive: {p_pa} Pa");
    let h = rh.clamp(0.0, 1.0);
    h * enhancement_factor(p_pa, t_c) * saturation_vapour_pressure_pa(t_c + ZERO_C_K) / p_pa
}

/// Density of moist air, kg/m³, CIPM-2007 eq. 1:
///
/// ρ = p·M_a/(Z·R·T)·[1 − x_v·(1 − M_v/M_a)]
///
/// with x_v from [`water_vapour_mole_fraction`], Z from [`compressibility`],
/// M_a = 28.96546e-3 kg/mol (x_CO2 = 0.0004), M_v = 18.01528e-3 kg/mol,
/// R = 8.314472 J/(mol·K).
///
/// Inputs: `t_c` in °C, `p_pa` absolute pressure in Pa, `rh` relative
/// humidity as 0..1 (clamped). Domain: `p_pa` > 0, `t_c` > −273.15.
pub fn moist_air_density_cipm2007(t_c: f64, p_pa: f64, rh: f64) -> f64 {
    let t_k = t_c + ZERO_C_K;
    let x_v = water_vapour_mole_fraction(t_c, p_pa, rh);
    let z = compressibility(p_pa, t_k, x_v);
    p_pa * M_DRY_AIR_KG_PER_MOL / (z * R_MOLAR_J_PER_MOL_K * t_k)
        * (1.0 - x_v * (1.0 - M_WATER_KG_PER_MOL / M_DRY_AIR_KG_PER_MOL))
}

/// Earth radius used by the US Standard Atmosphere 1976 for geopotential
/// altitude, m.
pub const EARTH_RADIUS_US1976_M: f64 = 6_356_766.0;

/// Geopotential altitude H, m, from geometric altitude z, m
/// (US Standard Atmosphere 1976 eq. 18): H = r0·z/(r0 + z), r0 = 6 356 766 m.
///
/// Domain: `z_m` > −r0.
pub fn geopotential_m(z_m: f64) -> f64 {
    EARTH_RADIUS_US1976_M * z_m / (EARTH_RADIUS_US1976_M + z_m)
}

/// ISA troposphere at geopotential altitude `h_m` (ISO 2533, US Standard
/// Atmosphere 1976): returns (temperature K, pressure Pa, density kg/m³).
///
/// T = 288.15 − 0.0065·H, p = 101325·(T/288.15)^5.255876 (the exponent is
/// g0·M/(R·L)), ρ = p/(287.053·T).
///
/// Only the troposphere layer is modelled: `h_m` is clamped to
/// [−1000 m, 11 000 m] (the tropopause), which covers every race track and
/// salt flat. Convert a GNSS (geometric) altitude with [`geopotential_m`]
/// first.
pub fn isa_troposphere(h_m: f64) -> (f64, f64, f64) {
    const T0_K: f64 = 288.15;
    const P0_PA: f64 = 101_325.0;
    const LAPSE_K_PER_M: f64 = 0.0065;
    const EXPONENT: f64 = 5.255_876;
    const R_SPECIFIC_J_PER_KG_K: f64 = 287.053;
    let h = h_m.clamp(-1000.0, 11_000.0);
    let t_k = T0_K - LAPSE_K_PER_M * h;
    let p_pa = P0_PA * (t_k / T0_K).powf(EXPONENT);
    let rho = p_pa / (R_SPECIFIC_J_PER_KG_K * t_k);
    (t_k, p_pa, rho)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn assert_close(actual: f64, expected: f64, tol: f64, what: &str) {
        assert!((actual - expected).abs() <= tol, "{what}: got {actual}, expected {expected} ± {tol}");
    }

    #[test]
    fn saturation_vapour_pressure_at_20c() {
        // REFERENCES.md, CIPM-2007 table row 20 °C: p_sv = 2339.16 Pa (computed).
        assert_close(saturation_vapour_pressure_pa(293.15), 2339.16, 0.01, "p_sv(20 °C)");
    }

    #[test]
    fn compressibility_at_20c_101325pa_50pct() {
        // REFERENCES.md, CIPM-2007 table row 20 °C, 101325 Pa, 50 %: Z = 0.999615 (computed).
        let x_v = water_vapour_mole_fraction(20.0, 101_325.0, 0.5);
        assert_close(compressibility(101_325.0, 293.15, x_v), 0.999615, 1e-6, "Z");
    }

    #[test]
    fn compressibility_dry_air_at_0c_and_1atm() {
        // From memory (tables of real-gas air at STP): dry air at 0 °C and 1 atm
        // has Z ≈ 0.99941. A loose, independent sanity check of the a0 and d terms.
        assert_close(compressibility(101_325.0, 273.15, 0.0), 0.99941, 2e-5, "Z dry, 0 °C");
    }

    #[test]
    fn cipm2007_density_table() {
        // REFERENCES.md, CIPM-2007 table (computed values, ±2e-5 kg/m³).
        let rows = [
            (20.0, 101_325.0, 0.50, 1.19931),
            (15.0, 101_325.0, 0.00, 1.22552),
            (25.0, 100_000.0, 0.60, 1.16043),
            (35.0, 95_000.0, 0.40, 1.06463),
        ];
        for (t_c, p_pa, rh, rho) in rows {
            let got = moist_air_density_cipm2007(t_c, p_pa, rh);
            assert_close(got, rho, 2e-5, &format!("ρ({t_c} °C, {p_pa} Pa, {rh})"));
        }
    }

    /// Independent second form: ideal gas (Z = 1, no enhancement factor) with
    /// Buck (1981) saturation vapour pressure over water,
    /// p_sv = 611.21·exp((18.678 − t/234.5)·(t/(257.14 + t))) Pa.
    fn ideal_gas_buck_density(t_c: f64, p_pa: f64, rh: f64) -> f64 {
        let p_sv = 611.21 * ((18.678 - t_c / 234.5) * (t_c / (257.14 + t_c))).exp();
        let p_v = rh * p_sv;
        let p_d = p_pa - p_v;
        (p_d * 28.96546e-3 + p_v * 18.01528e-3) / (8.314472 * (t_c + 273.15))
    }

    #[test]
    fn cipm2007_agrees_with_ideal_gas_buck_form() {
        // REFERENCES.md: ideal gas + Buck gives 1.19883 at 20 °C, 50 % (computed). That
        // figure reproduces with the common dry-air constant R_d = 287.058 J/(kg·K); with
        // CIPM's M_a and R (R_d = 287.051) this form gives 1.198875, hence 5e-5 here.
        assert_close(ideal_gas_buck_density(20.0, 101_325.0, 0.5), 1.19883, 5e-5, "Buck form");
        // REFERENCES.md: the two forms differ by about 0.04 % (1/Z); compare within 0.1 %.
        for (t_c, p_pa, rh) in
            [(20.0, 101_325.0, 0.5), (15.0, 101_325.0, 0.0), (25.0, 100_000.0, 0.6), (35.0, 95_000.0, 0.4)]
        {
            let cipm = moist_air_density_cipm2007(t_c, p_pa, rh);
            let buck = ideal_gas_buck_density(t_c, p_pa, rh);
            assert!((cipm / buck - 1.0).abs() < 1e-3, "{t_c} °C: CIPM {cipm} vs Buck {buck}");
        }
    }

    #[test]
    fn humidity_lowers_density_and_is_clamped() {
        // Common practice: water vapour (18 g/mol) is lighter than dry air (29 g/mol).
        let dry = moist_air_density_cipm2007(30.0, 101_325.0, 0.0);
        let wet = moist_air_density_cipm2007(30.0, 101_325.0, 1.0);
        assert!(wet < dry);
        assert_eq!(moist_air_density_cipm2007(30.0, 101_325.0, 1.05), wet);
        assert_eq!(moist_air_density_cipm2007(30.0, 101_325.0, -0.1), dry);
    }

    #[test]
    fn density_finite_over_track_conditions() {
        for t_c in [-30.0, 0.0, 20.0, 50.0] {
            for p_pa in [60_000.0, 101_325.0, 110_000.0] {
                for rh in [0.0, 0.5, 1.0] {
                    let rho = moist_air_density_cipm2007(t_c, p_pa, rh);
                    assert!(rho.is_finite() && rho > 0.5 && rho < 1.6, "{t_c} {p_pa} {rh}: {rho}");
                }
            }
        }
    }

    #[test]
    fn isa_sea_level_and_1000m() {
        // REFERENCES.md, ISA (ISO 2533 / US-1976): sea level 1.2250 kg/m³, 1000 m 1.1117 kg/m³.
        let (t0, p0, rho0) = isa_troposphere(0.0);
        assert_eq!((t0, p0), (288.15, 101_325.0));
        assert_close(rho0, 1.2250, 5e-5, "ρ sea level");
        let (_, _, rho1000) = isa_troposphere(geopotential_m(1000.0));
        assert_close(rho1000, 1.1117, 1e-4, "ρ 1000 m");
    }

    #[test]
    fn isa_geometric_2000m() {
        // REFERENCES.md: PDAS US-1976 tables as used by the Python `fluids` test
        // suite, geometric 2000 m → 275.15 K, 79 501 Pa, 1.0066 kg/m³.
        let (t_k, p_pa, rho) = isa_troposphere(geopotential_m(2000.0));
        assert_close(t_k, 275.15, 0.02, "T 2000 m");
        assert_close(p_pa, 79_501.0, 5.0, "p 2000 m");
        assert_close(rho, 1.0066, 1e-4, "ρ 2000 m");
    }

    #[test]
    fn isa_clamps_to_troposphere() {
        // Documented clamp: H in [−1000, 11 000] m. At the tropopause T = 216.65 K (ISO 2533).
        assert_eq!(isa_troposphere(20_000.0), isa_troposphere(11_000.0));
        assert_eq!(isa_troposphere(-5000.0), isa_troposphere(-1000.0));
        assert_close(isa_troposphere(11_000.0).0, 216.65, 1e-9, "T tropopause");
    }

    #[test]
    fn geopotential_is_slightly_below_geometric() {
        // Closed form: H = r0·z/(r0 + z) → z − H = z²/(r0 + z) ≈ 0.6291 m at 2000 m.
        assert_close(2000.0 - geopotential_m(2000.0), 2000.0 * 2000.0 / (6_356_766.0 + 2000.0), 1e-9, "z − H");
        assert_eq!(geopotential_m(0.0), 0.0);
    }
}
