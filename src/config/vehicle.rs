//! The vehicle file: mass, road-load coefficients, powertrain and battery.
//!
//! Values are written in the units engineers quote (kW, kWh, km/h, mΩ) with
//! the unit in the key name, and converted to SI here.

use serde::Deserialize;
use toml::Spanned;

use super::{Ctx, check_table, interp};

type F = Spanned<f64>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Raw {
    #[allow(dead_code)]
    kind: String,
    name: String,
    chassis: RawChassis,
    engine: RawEngine,
    gearbox: RawGearbox,
    motor: RawMotor,
    battery: RawBattery,
    tyre: RawTyre,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawChassis {
    mass_kg: F,
    rotating_mass_factor: F,
    drag_area_m2: F,
    rolling_crr: F,
    rolling_crr_speed2_s2_per_m2: F,
    driveline_efficiency: F,
    grip_limit_g: Option<F>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEngine {
    /// [rpm, N·m] points of the full-load torque curve.
    torque_curve: Spanned<Vec<[f64; 2]>>,
    redline_rpm: F,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawGearbox {
    ratios: Spanned<Vec<f64>>,
    final_drive: F,
    upshift_rpm: F,
    shift_time_s: F,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMotor {
    rated_power_kw: F,
    efficiency: F,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawBattery {
    energy_kwh: F,
    rated_power_kw: F,
    soc_reserve: F,
    soc_max: F,
    cells_in_series: Spanned<u32>,
    cell_min_v: F,
    cell_max_v: F,
    resistance_mohm: F,
    max_current_a: F,
    temp_limit_c: F,
    heat_capacity_kj_per_k: F,
    derate_time_constant_s: F,
    derate_floor: F,
    auxiliary_current_a: Option<F>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTyre {
    speed_symbol: Option<Spanned<String>>,
    rated_speed_kmh: Option<F>,
    rolling_radius_m: F,
}

/// Full-load combustion engine and gearbox.
#[derive(Clone, Debug, PartialEq)]
pub struct Combustion {
    pub curve_rpm: Vec<f64>,
    pub curve_torque_nm: Vec<f64>,
    pub redline_rpm: f64,
    pub ratios: Vec<f64>,
    pub final_drive: f64,
    pub upshift_rpm: f64,
    pub shift_time_s: f64,
}

impl Combustion {
    /// Full-load torque at `rpm` (0 above the redline).
    pub fn torque_nm(&self, rpm: f64) -> f64 {
        if rpm > self.redline_rpm { 0.0 } else { interp(&self.curve_rpm, &self.curve_torque_nm, rpm) }
    }

    /// Full-load shaft power at `rpm`, W.
    pub fn power_w(&self, rpm: f64) -> f64 {
        self.torque_nm(rpm) * rpm * std::f64::consts::TAU / 60.0
    }

    /// Engine speed in `gear` (0-based) at road speed `v_mps`, rpm.
    pub fn rpm_at(&self, gear: usize, v_mps: f64, tyre_radius_m: f64) -> f64 {
        v_mps / tyre_radius_m * self.ratios[gear] * self.final_drive * 60.0 / std::f64::consts::TAU
    }

    /// Full-load shaft power at road speed `v_mps` in the gear a full-throttle
    /// run uses: the highest power among the gears the car may be in, a gear
    /// being usable up to the upshift speed (the top gear up to the
    /// redline). Shift interruptions are ignored.
    pub fn envelope_power_w(&self, v_mps: f64, tyre_radius_m: f64) -> f64 {
        let mut best = 0.0f64;
        let top = self.ratios.len() - 1;
        for g in 0..self.ratios.len() {
            let rpm = self.rpm_at(g, v_mps, tyre_radius_m).max(self.curve_rpm[0]);
            let limit = if g == top { self.redline_rpm } else { self.upshift_rpm };
            if rpm <= limit {
                best = best.max(self.power_w(rpm));
            }
        }
        best
    }
}

/// The range of drag area a vehicle file may give, m²: outside it a value
/// is not a car's (the engine uses an estimate only inside it too).
pub const CDA_RANGE_M2: (f64, f64) = (0.05, 5.0);
/// The range of rolling-resistance coefficient a vehicle file may give.
pub const CRR_RANGE: (f64, f64) = (0.0, 0.1);

/// Traction battery.
#[derive(Clone, Debug, PartialEq)]
pub struct Battery {
    pub energy_j: f64,
    /// Discharge power the pack is rated to deliver, fresh, W.
    pub rated_power_w: f64,
    pub soc_reserve: f64,
    pub soc_max: f64,
    pub cells_in_series: u32,
    pub cell_min_v: f64,
    pub cell_max_v: f64,
    pub resistance_ohm: f64,
    pub max_current_a: f64,
    pub temp_limit_c: f64,
    pub heat_capacity_j_per_k: f64,
    /// Prior of the derating curve's time constant, s.
    pub derate_tau_s: f64,
    /// Prior of the derating curve's floor, fraction of rated power.
    pub derate_floor: f64,
    /// Current the auxiliaries (pumps, fans, electronics) draw from the
    /// pack whatever the motor does, A.
    pub auxiliary_current_a: f64,
}

impl Battery {
    /// Auxiliary current when the vehicle file does not say, A (a few
    /// hundred watts of pumps, fans and electronics on a high-voltage pack).
    pub const DEFAULT_AUXILIARY_CURRENT_A: f64 = 3.0;

    pub fn pack_min_v(&self) -> f64 {
        self.cell_min_v * self.cells_in_series as f64
    }
    pub fn pack_max_v(&self) -> f64 {
        self.cell_max_v * self.cells_in_series as f64
    }
    /// Energy in the whole usable window, J.
    pub fn usable_energy_j(&self) -> f64 {
        self.energy_j * (self.soc_max - self.soc_reserve)
    }
}

/// Validated vehicle, SI units.
#[derive(Clone, Debug, PartialEq)]
pub struct Vehicle {
    pub name: String,
    pub mass_kg: f64,
    /// Effective mass factor for rotating parts: m_eff = factor · m.
    pub rotating_mass_factor: f64,
    /// Drag area Cd·A prior, m².
    pub cda_m2: f64,
    /// Rolling resistance Crr(v) = crr0 + crr2 · v², v in m/s.
    pub crr0: f64,
    pub crr2_s2_m2: f64,
    pub driveline_efficiency: f64,
    /// Largest drive force the tyres transmit, as a multiple of m·g (launch).
    pub grip_limit_g: f64,
    pub combustion: Combustion,
    pub motor_rated_power_w: f64,
    pub motor_efficiency: f64,
    pub battery: Battery,
    /// Rated speed of the tyres, m/s.
    pub tyre_rated_mps: f64,
    /// The speed symbol as written, for display.
    pub tyre_symbol: Option<String>,
    pub tyre_radius_m: f64,
    /// The full-load envelope tabulated every [`ENVELOPE_STEP_MPS`] (derived
    /// from the engine and gearbox; see [`Vehicle::rebuild_envelope`]).
    pub envelope_w: Vec<f64>,
}

/// Speed step of the tabulated full-load envelope, m/s.
pub const ENVELOPE_STEP_MPS: f64 = 0.25;
/// Highest speed tabulated, m/s (above it the envelope is held).
pub const ENVELOPE_MAX_MPS: f64 = 200.0;

impl Vehicle {
    pub fn effective_mass_kg(&self) -> f64 {
        self.mass_kg * self.rotating_mass_factor
    }

    /// Tabulates the combustion envelope; call after changing the engine,
    /// gearbox or tyre radius.
    pub fn rebuild_envelope(&mut self) {
        let n = (ENVELOPE_MAX_MPS / ENVELOPE_STEP_MPS) as usize + 1;
        self.envelope_w = (0..n)
            .map(|i| self.combustion.envelope_power_w(i as f64 * ENVELOPE_STEP_MPS, self.tyre_radius_m))
            .collect();
    }

    /// Full-load combustion shaft power at road speed `v_mps`, W: the
    /// envelope over the gears, interpolated in the table (the projection
    /// calls this four times a step; the table makes it a lookup).
    #[inline]
    pub fn full_load_power_w(&self, v_mps: f64) -> f64 {
        let x = (v_mps.max(0.0) / ENVELOPE_STEP_MPS).min((self.envelope_w.len() - 1) as f64);
        let i = (x as usize).min(self.envelope_w.len().saturating_sub(2));
        let f = x - i as f64;
        self.envelope_w[i] + (self.envelope_w[i + 1] - self.envelope_w[i]) * f
    }
}

/// Speed symbols (ISO 4000, UN ECE R30, ETRTO) and their speeds in km/h.
pub const SPEED_SYMBOLS: &[(&str, f64)] = &[
    ("J", 100.0),
    ("K", 110.0),
    ("L", 120.0),
    ("M", 130.0),
    ("N", 140.0),
    ("P", 150.0),
    ("Q", 160.0),
    ("R", 170.0),
    ("S", 180.0),
    ("T", 190.0),
    ("U", 200.0),
    ("H", 210.0),
    ("V", 240.0),
    ("W", 270.0),
    ("Y", 300.0),
];

/// The speed a symbol stands for, km/h. `(Y)` has no fixed speed (above
/// 300 km/h, the tyre maker's limit), so it returns `None` like an unknown
/// symbol; the caller asks for `rated_speed_kmh`.
pub fn symbol_speed_kmh(symbol: &str) -> Option<f64> {
    SPEED_SYMBOLS.iter().find(|(s, _)| *s == symbol).map(|(_, v)| *v)
}

pub(super) fn validate(ctx: &mut Ctx<'_>) -> Option<Vehicle> {
    let raw: Raw = ctx.parse()?;
    let c = &raw.chassis;
    let mass_kg = ctx.range(&c.mass_kg, "chassis.mass_kg", 100.0, 20_000.0, "a mass in kg");
    let rotating_mass_factor = ctx.range(&c.rotating_mass_factor, "chassis.rotating_mass_factor", 1.0, 1.5, "a factor");
    let (cda_lo, cda_hi) = CDA_RANGE_M2;
    let cda_m2 = ctx.range(&c.drag_area_m2, "chassis.drag_area_m2", cda_lo, cda_hi, "a drag area in m²");
    let (crr_lo, crr_hi) = CRR_RANGE;
    let crr0 = ctx.range(&c.rolling_crr, "chassis.rolling_crr", crr_lo, crr_hi, "a rolling-resistance coefficient");
    let crr2 = ctx.range(
        &c.rolling_crr_speed2_s2_per_m2,
        "chassis.rolling_crr_speed2_s2_per_m2",
        0.0,
        1e-4,
        "a coefficient in s²/m²",
    );
    let eta = ctx.range(&c.driveline_efficiency, "chassis.driveline_efficiency", 0.5, 1.0, "an efficiency");
    let grip =
        c.grip_limit_g.as_ref().map_or(1.0, |g| ctx.range(g, "chassis.grip_limit_g", 0.1, 3.0, "a multiple of g"));

    let (curve_rpm, curve_torque_nm) = check_table(ctx, &raw.engine.torque_curve, "engine.torque_curve", "rpm, N·m", 2);
    if curve_torque_nm.iter().any(|t| *t < 0.0) {
        ctx.err(raw.engine.torque_curve.span(), "engine.torque_curve", "expected torques ≥ 0 N·m");
    }
    let redline = ctx.positive(&raw.engine.redline_rpm, "engine.redline_rpm", "an engine speed in rpm");
    let g = &raw.gearbox;
    if g.ratios.get_ref().is_empty() || g.ratios.get_ref().iter().any(|r| !r.is_finite() || *r <= 0.0) {
        ctx.err(g.ratios.span(), "gearbox.ratios", "expected at least one ratio, each above 0");
    } else if g.ratios.get_ref().windows(2).any(|w| w[1] >= w[0]) {
        ctx.err(g.ratios.span(), "gearbox.ratios", "expected ratios from first gear down to top gear (decreasing)");
    }
    let final_drive = ctx.positive(&g.final_drive, "gearbox.final_drive", "a ratio");
    let upshift = ctx.positive(&g.upshift_rpm, "gearbox.upshift_rpm", "an engine speed in rpm");
    if upshift > redline {
        ctx.err(
            g.upshift_rpm.span(),
            "gearbox.upshift_rpm",
            format!("expected at most the redline ({redline} rpm), found {upshift}"),
        );
    }
    let shift_time_s = ctx.range(&g.shift_time_s, "gearbox.shift_time_s", 0.0, 2.0, "a time in s");

    let motor_kw = ctx.range(&raw.motor.rated_power_kw, "motor.rated_power_kw", 0.0, 5000.0, "a power in kW");
    let motor_eff = ctx.range(&raw.motor.efficiency, "motor.efficiency", 0.5, 1.0, "an efficiency");

    let b = &raw.battery;
    let energy_kwh = ctx.range(&b.energy_kwh, "battery.energy_kwh", 0.1, 500.0, "an energy in kWh");
    let rated_kw = ctx.range(&b.rated_power_kw, "battery.rated_power_kw", 1.0, 5000.0, "a power in kW");
    let soc_reserve = ctx.range(&b.soc_reserve, "battery.soc_reserve", 0.0, 0.9, "a state of charge (0..1)");
    let soc_max = ctx.range(&b.soc_max, "battery.soc_max", 0.1, 1.0, "a state of charge (0..1)");
    if soc_max <= soc_reserve {
        ctx.err(
            b.soc_max.span(),
            "battery.soc_max",
            format!("expected above soc_reserve ({soc_reserve}), found {soc_max}"),
        );
    }
    let cells = *b.cells_in_series.get_ref();
    if cells == 0 || cells > 2000 {
        ctx.err(
            b.cells_in_series.span(),
            "battery.cells_in_series",
            format!("expected 1 to 2000 cells, found {cells}"),
        );
    }
    let cell_min_v = ctx.range(&b.cell_min_v, "battery.cell_min_v", 0.5, 5.0, "a cell voltage in V");
    let cell_max_v = ctx.range(&b.cell_max_v, "battery.cell_max_v", 0.5, 5.0, "a cell voltage in V");
    if cell_max_v <= cell_min_v {
        ctx.err(
            b.cell_max_v.span(),
            "battery.cell_max_v",
            format!("expected above cell_min_v ({cell_min_v} V), found {cell_max_v}"),
        );
    }
    let r_mohm = ctx.range(&b.resistance_mohm, "battery.resistance_mohm", 0.01, 10_000.0, "a resistance in mΩ");
    let i_max = ctx.positive(&b.max_current_a, "battery.max_current_a", "a current in A");
    let t_lim = ctx.range(&b.temp_limit_c, "battery.temp_limit_c", 0.0, 120.0, "a temperature in °C");
    let heat_cap = ctx.positive(&b.heat_capacity_kj_per_k, "battery.heat_capacity_kj_per_k", "a heat capacity in kJ/K");
    let tau =
        ctx.range(&b.derate_time_constant_s, "battery.derate_time_constant_s", 1.0, 3600.0, "a time constant in s");
    let floor = ctx.range(&b.derate_floor, "battery.derate_floor", 0.0, 1.0, "a fraction of rated power");
    let aux_a = b.auxiliary_current_a.as_ref().map_or(Battery::DEFAULT_AUXILIARY_CURRENT_A, |a| {
        ctx.range(a, "battery.auxiliary_current_a", 0.0, 500.0, "a current in A")
    });

    let t = &raw.tyre;
    let symbol = t.speed_symbol.as_ref().map(|s| s.get_ref().trim().to_string());
    let rated_kmh = match (&t.speed_symbol, &t.rated_speed_kmh) {
        (Some(s), Some(v)) => {
            // Both given: the symbol must still be one (a rated speed does not
            // make "Q9" a symbol), and a fixed one should agree with the speed.
            let sym = s.get_ref().trim();
            let rated = ctx.range(v, "tyre.rated_speed_kmh", 50.0, 600.0, "a speed in km/h");
            match symbol_speed_kmh(sym) {
                Some(kmh) if (kmh - rated).abs() > 0.5 => ctx.warn(
                    v.span(),
                    "tyre.rated_speed_kmh",
                    format!("the speed symbol {sym} stands for {kmh:.0} km/h, but {rated} km/h is given; {rated} km/h is used"),
                ),
                Some(_) => {}
                None if sym == "(Y)" => {}
                None => {
                    let list: Vec<&str> = SPEED_SYMBOLS.iter().map(|(s, _)| *s).collect();
                    ctx.err(
                        s.span(),
                        "tyre.speed_symbol",
                        format!("expected a speed symbol ({}, or (Y) with rated_speed_kmh), found \"{sym}\"", list.join(", ")),
                    );
                }
            }
            rated
        }
        (None, Some(v)) => ctx.range(v, "tyre.rated_speed_kmh", 50.0, 600.0, "a speed in km/h"),
        (Some(s), None) => match symbol_speed_kmh(s.get_ref().trim()) {
            Some(v) => v,
            None if s.get_ref().trim() == "(Y)" => {
                ctx.err(
                    s.span(),
                    "tyre.speed_symbol",
                    "\"(Y)\" means above 300 km/h up to the tyre maker's limit; give it as tyre.rated_speed_kmh",
                );
                0.0
            }
            None => {
                let list: Vec<&str> = SPEED_SYMBOLS.iter().map(|(s, _)| *s).collect();
                ctx.err(
                    s.span(),
                    "tyre.speed_symbol",
                    format!("expected a speed symbol ({}), found \"{}\"", list.join(", "), s.get_ref()),
                );
                0.0
            }
        },
        (None, None) => {
            ctx.err(0..0, "tyre", "expected tyre.speed_symbol or tyre.rated_speed_kmh");
            0.0
        }
    };
    let radius = ctx.range(&t.rolling_radius_m, "tyre.rolling_radius_m", 0.15, 0.8, "a radius in m");

    let mut vehicle = Vehicle {
        name: raw.name,
        mass_kg,
        rotating_mass_factor,
        cda_m2,
        crr0,
        crr2_s2_m2: crr2,
        driveline_efficiency: eta,
        grip_limit_g: grip,
        combustion: Combustion {
            curve_rpm,
            curve_torque_nm,
            redline_rpm: redline,
            ratios: g.ratios.get_ref().clone(),
            final_drive,
            upshift_rpm: upshift,
            shift_time_s,
        },
        motor_rated_power_w: motor_kw * 1e3,
        motor_efficiency: motor_eff,
        battery: Battery {
            energy_j: energy_kwh * 3.6e6,
            rated_power_w: rated_kw * 1e3,
            soc_reserve,
            soc_max,
            cells_in_series: cells,
            cell_min_v,
            cell_max_v,
            resistance_ohm: r_mohm * 1e-3,
            max_current_a: i_max,
            temp_limit_c: t_lim,
            heat_capacity_j_per_k: heat_cap * 1e3,
            derate_tau_s: tau,
            derate_floor: floor,
            auxiliary_current_a: aux_a,
        },
        tyre_rated_mps: rated_kmh / 3.6,
        tyre_symbol: symbol,
        tyre_radius_m: radius,
        envelope_w: Vec::new(),
    };
    if ctx.errors.is_empty() {
        vehicle.rebuild_envelope();
    }
    Some(vehicle)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn speed_symbols_per_iso_4000() {
        // ISO 4000 / UN ECE R30 speed symbols (REFERENCES.md).
        assert_eq!(symbol_speed_kmh("H"), Some(210.0));
        assert_eq!(symbol_speed_kmh("V"), Some(240.0));
        assert_eq!(symbol_speed_kmh("W"), Some(270.0));
        assert_eq!(symbol_speed_kmh("Y"), Some(300.0));
        assert_eq!(symbol_speed_kmh("J"), Some(100.0));
        assert_eq!(symbol_speed_kmh("(Y)"), None);
        assert_eq!(symbol_speed_kmh("Z"), None);
    }

    #[test]
    fn envelope_takes_best_gear() {
        let c = Combustion {
            curve_rpm: vec![1000.0, 6000.0],
            curve_torque_nm: vec![500.0, 500.0],
            redline_rpm: 6000.0,
            ratios: vec![2.0, 1.0],
            final_drive: 3.0,
            upshift_rpm: 5800.0,
            shift_time_s: 0.1,
        };
        let r = 0.3;
        // At 40 m/s: gear 1 → 40/0.3·2·3·60/2π = 7639 rpm (over redline);
        // gear 2 → 3820 rpm: power = 500·3820·2π/60.
        let rpm2 = 40.0 / r * 3.0 * 60.0 / std::f64::consts::TAU;
        let p = c.envelope_power_w(40.0, r);
        assert!((p - 500.0 * rpm2 * std::f64::consts::TAU / 60.0).abs() < 1e-6);
    }
}
