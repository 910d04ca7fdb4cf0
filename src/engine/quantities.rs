//! The one table of derived quantities: each defined once, with its name,
//! unit, meaning and how to read it from a [`Derived`] block.
//!
//! Everything that lists derived quantities follows from [`QUANTITIES`]:
//! the headless JSON's `derived` block (built from it, see
//! `crate::headless::derived_json`), the names alert rules may watch, the
//! export's columns, the channels screen and the README's table.
//!
//! Naming scheme: `derived.` followed by the quantity's path in the headless
//! JSON's `derived` block, dots between levels, with the unit in the last
//! part as everywhere in termvel: `derived.road_load.total_w` is
//! `"derived": {"road_load": {"total_w": …}}`. Groups that may be absent as
//! a whole (`road_load`, `projection`, …) are listed in [`GROUPS`]: when
//! absent the group is `null` in the JSON and each of its quantities reads
//! as unknown.
//!
//! To add a quantity: compute it in the engine (`derived.rs`), add a row
//! here, and show it on one screen if it deserves one; the JSON, alert
//! names, export and README check follow.

use super::derived::{AirOrigin, Derived};
use crate::units::Measure;

/// One reading of a quantity: what kind of value it is, and the value.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Reading {
    /// A number; `None` when unknown (`null` in JSON), and non-finite
    /// numbers are `null` too.
    Num(Option<f64>),
    /// A count.
    Count(u64),
    /// A yes/no (JSON `true`/`false`; 0/1 in the export and in alert rules).
    Flag(bool),
    /// A word from a fixed set (`measured`, `energy`, …); `None` when unknown.
    Text(Option<&'static str>),
}

impl Reading {
    /// The reading as a number an alert rule can compare: flags as 0/1,
    /// words as nothing.
    pub fn as_f64(self) -> Option<f64> {
        match self {
            Reading::Num(v) => v.filter(|x| x.is_finite()),
            Reading::Count(n) => Some(n as f64),
            Reading::Flag(b) => Some(if b { 1.0 } else { 0.0 }),
            Reading::Text(_) => None,
        }
    }

    /// Whether this kind of reading is a number (alert rules may watch it).
    pub fn is_numeric(self) -> bool {
        !matches!(self, Reading::Text(_))
    }
}

/// A derived quantity.
#[derive(Clone, Copy)]
pub struct Quantity {
    /// `derived.<group>.<field>`: the headless JSON path (see the module doc).
    pub name: &'static str,
    /// SI unit as shown (`m/s`, `W`, `1` for ratios); empty for flags and words.
    pub unit: &'static str,
    /// What it is, in a few words, for the README and the channels screen.
    pub meaning: &'static str,
    /// How to read it from the derived block.
    pub read: fn(&Derived) -> Reading,
    /// How the screens show it (its display unit in each set): inferred
    /// from `unit`, or stated by [`Quantity::shown_as`] where the unit
    /// alone does not say (a fraction shown as a percentage, the pack's
    /// electrical power).
    pub measure: Measure,
}

impl Quantity {
    /// The path below `derived.`: the keys in the headless JSON's `derived` object.
    pub fn path(&self) -> impl Iterator<Item = &'static str> {
        self.name.strip_prefix("derived.").unwrap_or(self.name).split('.')
    }

    /// The same quantity shown as `measure`.
    pub const fn shown_as(self, measure: Measure) -> Quantity {
        Quantity { measure, ..self }
    }

    /// The kind of the quantity (the variant of [`Reading`] it reads as).
    pub fn kind(&self) -> Reading {
        (self.read)(&Derived::default())
    }
}

impl std::fmt::Debug for Quantity {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Quantity").field("name", &self.name).field("unit", &self.unit).finish()
    }
}

/// A group that may be absent as a whole: its path below `derived.` and
/// whether it is present.
pub type Group = (&'static str, fn(&Derived) -> bool);

/// Groups that are `null` in the JSON when absent (no speed, no projection, …).
pub const GROUPS: &[Group] = &[
    ("road_load", |d| d.road_load.is_some()),
    ("estimate.coast", |d| d.estimate.coast.is_some()),
    ("battery.derating_fit", |d| d.battery.fit.is_some()),
    ("projection", |d| d.projection.is_some()),
    ("braking", |d| d.braking.is_some()),
    ("tyre", |d| d.tyre.is_some()),
];

const fn q(name: &'static str, unit: &'static str, meaning: &'static str, read: fn(&Derived) -> Reading) -> Quantity {
    Quantity { name, unit, meaning, read, measure: measure_of(unit) }
}

/// [`Measure::of_si_unit`] for the table's constant rows (a `const fn`
/// cannot match on strings): the SI units the table uses.
const fn measure_of(unit: &str) -> Measure {
    const UNITS: &[(&str, Measure)] = &[
        ("m/s", Measure::Speed),
        ("m/s²", Measure::Accel),
        ("m", Measure::Distance),
        ("s", Measure::Time),
        ("W", Measure::Power),
        ("J", Measure::Energy),
        ("V", Measure::Voltage),
        ("Ω", Measure::Resistance),
        ("°C", Measure::Temperature),
        ("°C/s", Measure::TemperatureRate),
        ("kg/m³", Measure::Density),
        ("m²", Measure::Area),
        ("kW/kWh", Measure::DischargeRate),
        ("1", Measure::Coefficient),
    ];
    let mut i = 0;
    while i < UNITS.len() {
        if same(UNITS[i].0.as_bytes(), unit.as_bytes()) {
            return UNITS[i].1;
        }
        i += 1;
    }
    Measure::Plain
}

const fn same(a: &[u8], b: &[u8]) -> bool {
    if a.len() != b.len() {
        return false;
    }
    let mut i = 0;
    while i < a.len() {
        if a[i] != b[i] {
            return false;
        }
        i += 1;
    }
    true
}

use Reading::{Count, Flag, Num, Text};

/// Every derived quantity, in the order of the README, the export and the
/// channels screen.
pub static QUANTITIES: &[Quantity] = &[
    q("derived.speed_mps", "m/s", "speed: vehicle.speed, else gnss.speed", |d| Num(d.speed_mps)),
    q("derived.speed_source", "", "the channel the speed comes from", |d| Text(d.speed_mps.map(|_| d.speed_source))),
    q("derived.distance_m", "m", "distance from the start of the stream (integrated speed)", |d| {
        Num(Some(d.distance_m))
    }),
    q("derived.accel_mps2", "m/s²", "acceleration", |d| Num(d.accel_mps2)),
    q("derived.accel_source", "", "`channel`, else `from speed` (filtered derivative)", |d| {
        Text(d.accel_mps2.map(|_| d.accel_source))
    }),
    q("derived.air.density_kg_m3", "kg/m³", "air density", |d| Num(Some(d.air_density))),
    q(
        "derived.air.origin",
        "",
        "`measured` (CIPM-2007 from the weather channels) or `standard atmosphere` (ISO 2533 at the track's elevation)",
        |d| {
            Text(Some(match d.air_origin {
                Some(AirOrigin::Measured { .. }) => "measured",
                Some(AirOrigin::Standard) | None => "standard atmosphere",
            }))
        },
    ),
    q("derived.air.age_s", "s", "age of the oldest weather input", |d| match d.air_origin {
        Some(AirOrigin::Measured { age_s, .. }) => Num(Some(age_s)),
        _ => Num(None),
    }),
    q("derived.air.humidity_assumed", "", "humidity assumed 50 % (no humidity channel)", |d| {
        Flag(matches!(d.air_origin, Some(AirOrigin::Measured { humidity_assumed: true, .. })))
    }),
    q(
        "derived.road_load.aero_w",
        "W",
        "aerodynamic drag power at the present speed (air speed includes headwind)",
        |d| Num(d.road_load.map(|r| r.aero_w)),
    ),
    q("derived.road_load.rolling_w", "W", "rolling-resistance power", |d| Num(d.road_load.map(|r| r.rolling_w))),
    q("derived.road_load.grade_w", "W", "grade power", |d| Num(d.road_load.map(|r| r.grade_w))),
    q("derived.road_load.total_w", "W", "road load: aero + rolling + grade", |d| Num(d.road_load.map(|r| r.total_w))),
    q("derived.road_load.inertial_w", "W", "m_eff·a·v", |d| Num(d.road_load.map(|r| r.inertial_w))),
    q("derived.road_load.demand_w", "W", "road load plus inertia", |d| Num(d.road_load.map(|r| r.demand_w))),
    q("derived.road_load.wheel_w", "W", "measured: η·(engine + motor power)", |d| {
        Num(d.road_load.and_then(|r| r.wheel_w))
    }),
    q(
        "derived.road_load.available_w",
        "W",
        "at full demand: engine envelope, plus the motor while boost is available",
        |d| Num(d.road_load.map(|r| r.available_w)),
    ),
    q("derived.road_load.margin_w", "W", "available minus road load", |d| Num(d.road_load.map(|r| r.margin_w))),
    q(
        "derived.road_load.cda_m2",
        "m²",
        "drag area in use (the estimate once informative, else the vehicle file's)",
        |d| Num(d.road_load.map(|r| r.cda_m2)),
    ),
    q("derived.road_load.crr", "1", "rolling coefficient in use", |d| Num(d.road_load.map(|r| r.crr))),
    q("derived.road_load.estimate_converged", "", "whether the estimate in use has converged", |d| {
        Flag(d.road_load.is_some_and(|r| r.estimate_converged))
    }),
    q(
        "derived.road_load.cda_source",
        "",
        "where the drag area in use came from: `estimate`, `prior_uncertain`, `prior_unphysical` or `prior_with_other` (the two are used together)",
        |d| Text(d.road_load.map(|r| r.cda_source.as_str())),
    ),
    q(
        "derived.road_load.crr_source",
        "",
        "where the rolling coefficient in use came from: `estimate`, `prior_uncertain`, `prior_unphysical` or `prior_with_other`",
        |d| Text(d.road_load.map(|r| r.crr_source.as_str())),
    ),
    q("derived.estimate.cda_m2", "m²", "online drag-area estimate", |d| Num(Some(d.estimate.cda_m2.value))),
    q("derived.estimate.cda_sd_m2", "m²", "its standard deviation", |d| Num(Some(d.estimate.cda_m2.sd))),
    q("derived.estimate.crr", "1", "online rolling-coefficient estimate", |d| Num(Some(d.estimate.crr.value))),
    q("derived.estimate.crr_sd", "1", "its standard deviation", |d| Num(Some(d.estimate.crr.sd))),
    q("derived.estimate.converged", "", "whether the estimate has converged", |d| Flag(d.estimate.converged)),
    q("derived.estimate.samples", "", "samples used", |d| Count(d.estimate.samples)),
    q("derived.estimate.coast_samples", "", "coast-down samples among them", |d| Count(d.estimate.coast_samples)),
    q("derived.estimate.coast.cda_m2", "m²", "drag area from coast-down samples alone", |d| {
        Num(d.estimate.coast.map(|c| c.0.value))
    }),
    q("derived.estimate.coast.cda_sd_m2", "m²", "its standard deviation", |d| Num(d.estimate.coast.map(|c| c.0.sd))),
    q("derived.estimate.coast.crr", "1", "rolling coefficient from coast-down samples alone", |d| {
        Num(d.estimate.coast.map(|c| c.1.value))
    }),
    q("derived.estimate.coast.crr_sd", "1", "its standard deviation", |d| Num(d.estimate.coast.map(|c| c.1.sd))),
    q("derived.battery.power_w", "W", "electrical power out of the pack", |d| Num(d.battery.power_w))
        .shown_as(Measure::ElectricPower),
    q("derived.battery.discharge_rate_kw_per_kwh", "kW/kWh", "kW delivered per kWh of capacity", |d| {
        Num(d.battery.discharge_rate_kw_per_kwh)
    }),
    q("derived.battery.soc", "1", "state of charge", |d| Num(d.battery.soc)).shown_as(Measure::Percent),
    q("derived.battery.energy_above_reserve_j", "J", "energy above the reserve", |d| {
        Num(d.battery.energy_above_reserve_j)
    }),
    q("derived.battery.temp_c", "°C", "pack temperature", |d| Num(d.battery.temp_c)),
    q(
        "derived.battery.ocv_v",
        "V",
        "open-circuit voltage of the pack model fitted online (V = OCV(soc) − R·I)",
        |d| Num(d.battery.ocv_v.map(|e| e.value)),
    ),
    q("derived.battery.ocv_sd_v", "V", "its standard deviation", |d| Num(d.battery.ocv_v.map(|e| e.sd))),
    q("derived.battery.resistance_ohm", "Ω", "internal resistance of the pack model", |d| {
        Num(d.battery.resistance_ohm.map(|e| e.value))
    }),
    q("derived.battery.resistance_sd_ohm", "Ω", "its standard deviation", |d| {
        Num(d.battery.resistance_ohm.map(|e| e.sd))
    }),
    q("derived.battery.model_converged", "", "whether the pack model has converged", |d| {
        Flag(d.battery.model_converged)
    }),
    q("derived.battery.hppc_max_w", "W", "HPPC maximum discharge power from the model", |d| Num(d.battery.hppc_max_w))
        .shown_as(Measure::ElectricPower),
    q("derived.battery.reported_limit_w", "W", "the battery system's own limit", |d| Num(d.battery.reported_limit_w))
        .shown_as(Measure::ElectricPower),
    q("derived.battery.deliverable_w", "W", "what the pack can deliver now", |d| Num(d.battery.deliverable_w))
        .shown_as(Measure::ElectricPower),
    q("derived.battery.rated_w", "W", "rated discharge power", |d| Num(Some(d.battery.rated_w)))
        .shown_as(Measure::ElectricPower),
    q("derived.battery.derating_ratio", "1", "deliverable over rated", |d| Num(d.battery.derating_ratio))
        .shown_as(Measure::Percent),
    q("derived.battery.boosting", "", "whether the car is boosting", |d| Flag(d.battery.boosting)),
    q("derived.battery.time_in_boost_s", "s", "time in boost", |d| Num(Some(d.battery.time_in_boost_s))),
    q("derived.battery.heating_c_per_s", "°C/s", "measured pack heating rate", |d| Num(d.battery.heating_c_per_s)),
    q("derived.battery.derating_fit.tau_s", "s", "derating fit ratio(t) = floor + amplitude·e^(−t/τ): τ", |d| {
        Num(d.battery.fit.map(|f| f.tau_s))
    }),
    q("derived.battery.derating_fit.floor", "1", "its floor", |d| Num(d.battery.fit.map(|f| f.floor)))
        .shown_as(Measure::Percent),
    q("derived.battery.derating_fit.amplitude", "1", "its amplitude", |d| Num(d.battery.fit.map(|f| f.amplitude)))
        .shown_as(Measure::Percent),
    q("derived.battery.derating_fit.rms", "1", "its RMS residual", |d| Num(d.battery.fit.map(|f| f.rms)))
        .shown_as(Measure::Percent),
    q("derived.battery.derating_fit.r2", "1", "its R²", |d| Num(d.battery.fit.map(|f| f.r2))),
    q("derived.battery.derating_fit.points", "", "points fitted", |d| {
        Count(d.battery.fit.map_or(0, |f| f.points as u64))
    }),
    q("derived.battery.derating_fit.span_s", "s", "time in boost the points span", |d| {
        Num(d.battery.fit.map(|f| f.span_s))
    }),
    q("derived.battery.derating_fit.converged", "", "whether the fit has converged", |d| {
        Flag(d.battery.fit.is_some_and(|f| f.converged))
    }),
    q("derived.boost_left.energy_s", "s", "boost left before the energy above the reserve runs out", |d| {
        Num(d.boost_left.energy_s)
    }),
    q("derived.boost_left.power_s", "s", "boost left before derating drops below the need", |d| {
        Num(d.boost_left.power_s)
    }),
    q("derived.boost_left.thermal_s", "s", "boost left before the pack reaches its temperature limit", |d| {
        Num(d.boost_left.thermal_s)
    }),
    q("derived.boost_left.binding", "", "the limit that ends boost first: `energy`, `power` or `thermal`", |d| {
        Text(d.boost_left.binding.map(|b| b.as_str()))
    }),
    q("derived.boost_left.seconds", "s", "boost left: the first of the three limits (null: not limited)", |d| {
        Num(d.boost_left.seconds)
    }),
    q("derived.boost_left.need_w", "W", "battery power needed to reach and hold the target", |d| {
        Num(d.boost_left.need_w)
    })
    .shown_as(Measure::ElectricPower),
    q("derived.boost_left.curve_fitted", "", "whether the fitted derating curve is used", |d| {
        Flag(d.boost_left.curve_fitted)
    }),
    q("derived.projection.peak_mps", "m/s", "projected peak before the braking point", |d| {
        Num(d.projection.as_ref().map(|p| p.peak_mps))
    }),
    q("derived.projection.peak_low_mps", "m/s", "peak with CdA + 1 sd", |d| {
        Num(d.projection.as_ref().map(|p| p.peak_low_mps))
    }),
    q("derived.projection.peak_high_mps", "m/s", "peak with CdA − 1 sd", |d| {
        Num(d.projection.as_ref().map(|p| p.peak_high_mps))
    }),
    q("derived.projection.peak_at_m", "m", "where the peak comes", |d| Num(d.projection.as_ref().map(|p| p.peak_at_m))),
    q("derived.projection.peak_in_s", "s", "when the peak comes", |d| Num(d.projection.as_ref().map(|p| p.peak_in_s))),
    q(
        "derived.projection.terminal_mps",
        "m/s",
        "terminal speed on an endless straight, boost at the derating floor",
        |d| Num(d.projection.as_ref().and_then(|p| p.terminal_mps)),
    ),
    q("derived.projection.terminal_no_boost_mps", "m/s", "terminal speed without boost", |d| {
        Num(d.projection.as_ref().and_then(|p| p.terminal_no_boost_mps))
    }),
    q(
        "derived.projection.terminal_above_mps",
        "m/s",
        "when a terminal speed is null: the search bound it lies above",
        |d| {
            Num(d
                .projection
                .as_ref()
                .filter(|p| p.terminal_mps.is_none() || p.terminal_no_boost_mps.is_none())
                .map(|p| p.terminal_bound_mps))
        },
    ),
    q("derived.projection.target_mps", "m/s", "the track's target speed", |d| {
        Num(d.projection.as_ref().map(|p| p.target_mps))
    }),
    q("derived.projection.target_reachable", "", "whether the projection reaches the target", |d| {
        Flag(d.projection.as_ref().is_some_and(|p| p.target_reachable))
    }),
    q("derived.projection.target_in_s", "s", "when the target is reached", |d| {
        Num(d.projection.as_ref().and_then(|p| p.target_in_s))
    }),
    q("derived.projection.target_at_m", "m", "where the target is reached", |d| {
        Num(d.projection.as_ref().and_then(|p| p.target_at_m))
    }),
    q("derived.projection.converged", "", "whether the projection's inputs are converged estimates", |d| {
        Flag(d.projection.as_ref().is_some_and(|p| p.converged))
    }),
    q(
        "derived.projection_note",
        "",
        "why there is no projection (`braking`, `past the braking point`, `no speed`)",
        |d| Text(d.projection_note),
    ),
    q("derived.braking.point_m", "m", "where the car must start braking at full demand until then", |d| {
        Num(d.braking.map(|b| b.point_m))
    }),
    q("derived.braking.distance_m", "m", "distance to the braking point", |d| Num(d.braking.map(|b| b.distance_m))),
    q("derived.braking.in_s", "s", "time to the braking point", |d| Num(d.braking.map(|b| b.in_s))),
    q("derived.braking.stopping_m", "m", "distance needed to slow to the exit speed from the present speed", |d| {
        Num(d.braking.map(|b| b.stopping_m))
    }),
    q("derived.braking.passed", "", "whether the braking point is passed", |d| {
        Flag(d.braking.is_some_and(|b| b.passed))
    }),
    q("derived.wind_mps", "m/s", "mean wind along the run (30 s), headwind positive", |d| Num(d.wind_mps)),
    q("derived.progress.phase", "", "`waiting`, `running`, `braking` or `stopped`", |d| {
        Text(Some(d.progress.phase.as_str()))
    }),
    q("derived.progress.peak_mps", "m/s", "highest speed so far", |d| Num(d.progress.peak_mps)),
    q("derived.progress.peak_at_m", "m", "where the highest speed so far was reached", |d| Num(d.progress.peak_at_m)),
    q("derived.progress.peak_minus_target_mps", "m/s", "peak so far minus the target: negative is short of it", |d| {
        Num(d.progress.peak_minus_target_mps)
    }),
    q("derived.progress.target_at_m", "m", "where the speed first reached the target (null: not yet)", |d| {
        Num(d.progress.target_at_m)
    }),
    q(
        "derived.progress.exit_speed_at_m",
        "m",
        "where the car is (or was) down to the track's exit speed: distance plus stopping distance",
        |d| Num(d.progress.exit_speed_at_m),
    ),
    q("derived.progress.stop_margin_m", "m", "the stop-by line minus that: negative is over the line", |d| {
        Num(d.progress.stop_margin_m)
    }),
    q(
        "derived.progress.gnss_minus_wheel_mps",
        "m/s",
        "GNSS speed minus wheel speed (slip, tyre growth, a sensor fault)",
        |d| Num(d.progress.gnss_minus_wheel_mps),
    ),
    q("derived.tyre.rated_mps", "m/s", "the tyres' rated speed", |d| Num(d.tyre.map(|t| t.rated_mps))),
    q("derived.tyre.margin_mps", "m/s", "tyre speed margin now", |d| Num(d.tyre.map(|t| t.margin_mps))),
    q("derived.tyre.peak_margin_mps", "m/s", "tyre speed margin at the projected peak", |d| {
        Num(d.tyre.and_then(|t| t.peak_margin_mps))
    }),
];

/// Alert-rule names of earlier versions and the quantity each now names.
/// Still accepted, with a deprecation warning naming the new one.
pub const ALIASES: &[(&str, &str)] = &[
    ("derived.air_density", "derived.air.density_kg_m3"),
    ("derived.power_margin_w", "derived.road_load.margin_w"),
    ("derived.road_load_w", "derived.road_load.total_w"),
    ("derived.boost_left_s", "derived.boost_left.seconds"),
    ("derived.derating_ratio", "derived.battery.derating_ratio"),
    ("derived.peak_speed_mps", "derived.projection.peak_mps"),
    ("derived.braking_in_s", "derived.braking.in_s"),
    ("derived.braking_in_m", "derived.braking.distance_m"),
    ("derived.tyre_margin_mps", "derived.tyre.margin_mps"),
    ("derived.discharge_rate_kw_per_kwh", "derived.battery.discharge_rate_kw_per_kwh"),
];

/// The quantity of that name.
pub fn find(name: &str) -> Option<&'static Quantity> {
    QUANTITIES.iter().find(|q| q.name == name)
}

/// The present name of an old alert-rule name, if it is one.
pub fn alias(old: &str) -> Option<&'static str> {
    ALIASES.iter().find(|(o, _)| *o == old).map(|(_, n)| *n)
}

/// Whether the quantity sits in a group that is absent in `d`.
pub fn in_absent_group(quantity: &Quantity, d: &Derived) -> bool {
    let path = quantity.name.strip_prefix("derived.").unwrap_or(quantity.name);
    GROUPS.iter().any(|(g, present)| path.strip_prefix(g).is_some_and(|rest| rest.starts_with('.')) && !present(d))
}

/// A quantity's value as an alert rule sees it: unknown when its group is
/// absent, flags as 0/1, words never.
pub fn value(quantity: &Quantity, d: &Derived) -> Option<f64> {
    if in_absent_group(quantity, d) { None } else { (quantity.read)(d).as_f64() }
}

/// The README's list of derived quantities and old rule names, as Markdown
/// (the README holds this text between markers; a test keeps them equal).
pub fn readme_table() -> String {
    let mut out = String::from("| name | unit | meaning |\n|---|---|---|\n");
    for q in QUANTITIES {
        let unit = match q.kind() {
            Reading::Flag(_) => "true/false".to_string(),
            Reading::Text(_) => "word".to_string(),
            Reading::Count(_) => "count".to_string(),
            Reading::Num(_) => q.unit.to_string(),
        };
        out.push_str(&format!("| `{}` | {} | {} |\n", q.name, unit, q.meaning));
    }
    out.push_str("\nOld alert-rule names, still accepted with a deprecation warning:\n\n| old name | present name |\n|---|---|\n");
    for (old, new) in ALIASES {
        out.push_str(&format!("| `{old}` | `{new}` |\n"));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Rewrites the README's list from the table:
    /// `cargo test --lib write_the_readme_table -- --ignored`.
    #[test]
    #[ignore]
    fn write_the_readme_table() {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/README.md");
        let readme = std::fs::read_to_string(path).expect("README.md");
        let (start, end) = ("<!-- derived-quantities: start -->\n", "<!-- derived-quantities: end -->");
        let a = readme.find(start).expect("start marker") + start.len();
        let b = readme.find(end).expect("end marker");
        let text = format!("{}{}{}", &readme[..a], readme_table(), &readme[b..]);
        std::fs::write(path, text).expect("write README.md");
    }

    #[test]
    fn the_readme_lists_the_table() {
        let readme = include_str!("../../README.md");
        let (start, end) = ("<!-- derived-quantities: start -->\n", "<!-- derived-quantities: end -->");
        let from = readme.find(start).expect("the README marks the list's start") + start.len();
        let to = readme[from..].find(end).expect("the README marks the list's end") + from;
        let expected = readme_table();
        assert!(
            readme[from..to] == expected,
            "README.md's list of derived quantities differs from the table; put this between the markers:\n{expected}"
        );
    }

    #[test]
    fn names_are_unique_and_follow_the_scheme() {
        let mut seen = std::collections::HashSet::new();
        for q in QUANTITIES {
            assert!(seen.insert(q.name), "{} twice", q.name);
            assert!(q.name.starts_with("derived."), "{}", q.name);
            assert!(crate::channel::valid_channel_name(q.name), "{} is not a valid rule channel name", q.name);
            assert!(std::ptr::eq(find(q.name).unwrap(), q), "{} resolves to itself", q.name);
            assert!(!q.meaning.is_empty(), "{} has a meaning", q.name);
        }
        // No name is also a group: a group is an object in the JSON, not a value.
        for (g, _) in GROUPS {
            assert!(find(&format!("derived.{g}")).is_none(), "{g}");
            assert!(QUANTITIES.iter().any(|q| q.name.starts_with(&format!("derived.{g}."))), "group {g} is empty");
        }
    }

    #[test]
    fn every_old_name_maps_to_a_numeric_quantity() {
        for (old, new) in ALIASES {
            let q = find(new).unwrap_or_else(|| panic!("{old} → {new}, which is not in the table"));
            assert!(q.kind().is_numeric(), "{new}");
            assert!(find(old).is_none(), "{old} is both old and new");
            assert_eq!(alias(old), Some(*new));
        }
        assert_eq!(alias("derived.road_load.total_w"), None);
    }

    #[test]
    fn values_read_through_groups_and_kinds() {
        let mut d = Derived { air_density: 1.2, ..Derived::default() };
        let total = find("derived.road_load.total_w").unwrap();
        let rho = find("derived.air.density_kg_m3").unwrap();
        let boosting = find("derived.battery.boosting").unwrap();
        let binding = find("derived.boost_left.binding").unwrap();
        assert_eq!(value(total, &d), None, "no road load without speed");
        assert_eq!(value(rho, &d), Some(1.2));
        assert_eq!(value(boosting, &d), Some(0.0));
        d.battery.boosting = true;
        assert_eq!(value(boosting, &d), Some(1.0));
        d.boost_left.binding = Some(super::super::derived::BoostLimit::Thermal);
        assert_eq!((binding.read)(&d), Text(Some("thermal")));
        assert_eq!(value(binding, &d), None, "a word is not a number");
        d.road_load = Some(super::super::derived::RoadLoadView { total_w: 5e5, ..Default::default() });
        assert_eq!(value(total, &d), Some(5e5));
        // A flag in an absent group is unknown to a rule, not "false".
        let passed = find("derived.braking.passed").unwrap();
        assert_eq!(value(passed, &d), None);
        assert_eq!(Num(Some(f64::NAN)).as_f64(), None);
    }
}
