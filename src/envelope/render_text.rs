//! The envelope as aligned text: every figure with its unit, a terminal
//! speed above the search bound written as "above", and the caution line.

use std::fmt::Write as _;

use super::{Case, Envelope, Terminal};
use crate::config::{Track, Vehicle};

fn kmh(v_mps: f64) -> f64 {
    v_mps * 3.6
}

fn kw(p_w: f64) -> f64 {
    p_w / 1000.0
}

fn terminal(t: Terminal) -> String {
    match t {
        Terminal::At(v) => format!("{:.1} km/h", kmh(v)),
        Terminal::Above(v) => format!("above {:.0} km/h (the search bound)", kmh(v)),
    }
}

fn span(d: Option<(f64, f64)>) -> String {
    match d {
        Some((t, x)) => format!("{t:8.2} s {x:9.1} m"),
        None => format!("{:>22}", "not reached"),
    }
}

/// Renders the envelope. `plan` names the plan the air and charge came
/// from, if any.
pub fn render(e: &Envelope, veh: &Vehicle, track: &Track, plan: Option<&str>) -> String {
    let mut s = String::new();
    let i = &e.inputs;
    let a = &i.air;
    let _ = writeln!(s, "car: {}   course: {}", veh.name, track.name);
    if let Some(p) = plan {
        let _ = writeln!(s, "plan: {p}");
    }
    let weather = match (a.temp_c, a.pressure_pa, a.humidity) {
        (Some(t), Some(p), Some(h)) => format!("{t:.1} °C, {:.1} hPa, {:.0} % RH → ", p / 100.0, h * 100.0),
        _ => String::new(),
    };
    let _ = writeln!(s, "air: {weather}{:.4} kg/m³, from {}", a.density_kg_m3, a.source.describe());
    let _ = writeln!(
        s,
        "headwind {:.1} m/s; grade {:+.3} % ({}); charge at the start {:.0} %",
        i.headwind_mps,
        i.grade * 100.0,
        if i.grade_is_track_mean { "the track's mean to the stop-by point" } else { "level, by choice" },
        i.soc_start * 100.0
    );
    let _ = writeln!(
        s,
        "model: drag area {:.3} m², Crr {:.4} + {:.2e}·v², mass {:.0} kg (effective {:.0} kg), grip {:.2} g, derating τ {:.0} s to {:.0} %",
        veh.cda_m2,
        veh.crr0,
        veh.crr2_s2_m2,
        veh.mass_kg,
        e.mass_eff_kg,
        veh.grip_limit_g,
        veh.battery.derate_tau_s,
        veh.battery.derate_floor * 100.0
    );
    let _ = writeln!(
        s,
        "pack: {:.1} kW at the terminals fresh{}",
        kw(e.pack.deliverable_w),
        if e.pack.deliverable_w < veh.battery.rated_power_w {
            format!(" (rated {:.0} kW; the current limit at this charge allows less)", kw(veh.battery.rated_power_w))
        } else {
            String::new()
        }
    );
    let _ = writeln!(s);

    let _ = writeln!(s, "power at the wheels, kW (available less road load = margin):");
    let _ = writeln!(
        s,
        "{:>6} {:>7} {:>7} {:>7} {:>7} │ {:>7} {:>7} {:>7} │ {:>7} {:>7} {:>7}",
        "km/h", "aero", "rolling", "grade", "load", "engine", "+rated", "+floor", "margin", "margin", "margin"
    );
    for r in &e.rows {
        let c = &r.cases;
        let _ = writeln!(
            s,
            "{:6.0} {:7.1} {:7.1} {:7.1} {:7.1} │ {:7.1} {:7.1} {:7.1} │ {:+7.1} {:+7.1} {:+7.1}",
            kmh(r.speed_mps),
            kw(r.load.aero_w),
            kw(r.load.rolling_w),
            kw(r.load.grade_w),
            kw(r.load.total_w),
            kw(c[0].available_w),
            kw(c[1].available_w),
            kw(c[2].available_w),
            kw(c[0].margin_w),
            kw(c[1].margin_w),
            kw(c[2].margin_w),
        );
    }
    let _ = writeln!(s);
    let _ =
        writeln!(s, "acceleration (grip-limited, rotating mass included), and time and distance from the row above:");
    let _ = writeln!(
        s,
        "{:>6} │ {:^33} │ {:^33} │ {:^33}",
        "km/h",
        Case::Engine.label(),
        Case::Rated.label(),
        Case::Floor.label()
    );
    for r in &e.rows {
        let cell = |k: usize| {
            let c = &r.cases[k];
            format!("{:5.2} m/s² {}", c.accel_mps2, span(c.from_previous))
        };
        let _ = writeln!(s, "{:6.0} │ {} │ {} │ {}", kmh(r.speed_mps), cell(0), cell(1), cell(2));
    }
    let _ = writeln!(s);

    let _ = writeln!(s, "terminal speed:");
    for (k, c) in Case::ALL.iter().enumerate() {
        let _ = writeln!(s, "  {:<24} {}", c.label(), terminal(e.terminal[k]));
    }
    let hold = |v: f64, l: &crate::engine::physics::roadload::RoadLoad| {
        format!(
            "  to hold {:5.1} km/h: {:6.1} kW at the wheels (aero {:.1}, rolling {:.1}, grade {:.1} kW)",
            kmh(v),
            kw(l.total_w),
            kw(l.aero_w),
            kw(l.rolling_w),
            kw(l.grade_w)
        )
    };
    let _ = writeln!(s, "{}", hold(i.target_mps, &e.hold_target));
    let _ = writeln!(s, "{}", hold(i.target_mps + i.margin_mps, &e.hold_margin));
    if let (Some((a, b)), Some(bt)) = (i.between, e.between) {
        let _ = writeln!(s);
        let _ = writeln!(s, "from {:.1} to {:.1} km/h:", kmh(a), kmh(b));
        for (k, c) in Case::ALL.iter().enumerate() {
            let _ = writeln!(s, "  {:<24} {}", c.label(), span(bt[k]).trim_start());
        }
    }
    let _ = writeln!(s);

    let p = &e.pack;
    let b = &veh.battery;
    let _ = writeln!(s, "battery:");
    let _ = writeln!(
        s,
        "  discharge rate at rated power: {:.1} kW per kWh ({:.0} kW from {:.2} kWh)",
        p.rate_kw_per_kwh,
        kw(b.rated_power_w),
        b.energy_j / 3.6e6
    );
    let _ = writeln!(
        s,
        "  one minute of full boost uses {:.1} % of the usable charge ({:.0} % to {:.0} %); above the reserve now: {:.2} kWh",
        p.usable_share_per_min * 100.0,
        b.soc_reserve * 100.0,
        b.soc_max * 100.0,
        p.available_j / 3.6e6
    );
    if p.needed_w <= 0.0 {
        let _ = writeln!(s, "  the engine alone holds {:.0} km/h: no pack power needed", kmh(i.target_mps));
    } else {
        let _ = writeln!(
            s,
            "  to hold {:.0} km/h the pack must give {:.1} kW at its terminals with the engine at full load: {}",
            kmh(i.target_mps),
            kw(p.needed_w),
            if p.time_to_short_s == 0.0 {
                "more than it gives even fresh".to_string()
            } else if p.time_to_short_s.is_infinite() {
                format!("derating never takes it below that (the floor gives {:.1} kW)", kw(p.floor_w))
            } else {
                format!("derating takes it below that after {:.1} s in boost", p.time_to_short_s)
            }
        );
    }
    let _ = writeln!(
        s,
        "  engine alone at the braking point ({:.0} m): {:.1} km/h; from there to {:.0} km/h:",
        e.run.brake_at_m,
        kmh(p.engine_only_at_brake_mps),
        kmh(i.target_mps)
    );
    for (name, d) in [("at rated", p.to_target_rated), ("at the floor", p.to_target_floor)] {
        match d {
            Some((ej, t)) => {
                let _ = writeln!(s, "    {name:<13} {:.3} kWh at the terminals in {t:.1} s", ej / 3.6e6);
            }
            None => {
                let _ = writeln!(s, "    {name:<13} not reached");
            }
        }
    }
    let _ = writeln!(s, "    the derated pack {} it", if p.floor_supplies { "supplies" } else { "does NOT supply" });
    let _ = writeln!(s, "  open-circuit voltage {:.1} V; current and voltage (P = I·(OCV − I·R)):", p.ocv_v);
    for (name, el) in [("at rated power", p.at_rated), ("at the power needed", p.at_needed)] {
        match el {
            Some(x) => {
                let _ = writeln!(
                    s,
                    "    {name:<20} {:6.1} kW: {:6.1} A (limit {:.0} A{}), {:6.1} V = {:.3} V a cell (minimum {:.2} V{})",
                    kw(x.power_w),
                    x.current_a,
                    b.max_current_a,
                    if x.over_current { ", ABOVE" } else { "" },
                    x.pack_v,
                    x.cell_v,
                    b.cell_min_v,
                    if x.under_voltage { ", BELOW" } else { "" }
                );
            }
            None if name == "at the power needed" && p.needed_w <= 0.0 => {}
            None => {
                let _ = writeln!(s, "    {name:<20} beyond what the pack can give (OCV²/4R)");
            }
        }
    }
    let _ = writeln!(s);

    let r = &e.run;
    let _ = writeln!(
        s,
        "speed at the braking point ({:.0} m{}), standing start, full power, boost from {}: {:.1} km/h after {:.1} s ({:.1} s in boost, {:.3} kWh from the cells)",
        r.brake_at_m,
        match i.brake_at {
            super::BrakeAt::Distance(_) => "",
            super::BrakeAt::Latest => ", the latest braking point",
        },
        r.boost_on_mps.map_or("never".into(), |v| format!("{:.0} km/h, where grip stops limiting", kmh(v))),
        kmh(r.speed_mps),
        r.t_s,
        r.boost_s,
        r.energy_j / 3.6e6
    );
    for x in &e.sensitivities {
        let _ = writeln!(s, "  {:<24} {:+6.2} km/h", x.label, kmh(x.delta_mps));
    }
    let _ = writeln!(s);
    let _ = writeln!(s, "{}", crate::CAUTION);
    // Centred headers leave trailing blanks; a copied table should not carry them.
    s.lines().map(|l| l.trim_end()).collect::<Vec<_>>().join("\n") + "\n"
}
