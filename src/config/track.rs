//! The track file: the run zone, braking, target speed and grade profile.

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
    zone_length_m: F,
    elevation_m: F,
    target_speed_kmh: F,
    braking_decel_mps2: F,
    exit_speed_kmh: F,
    safety_margin_m: F,
    /// [distance m, grade %] points; grade positive uphill.
    grade_profile: Option<Spanned<Vec<[f64; 2]>>>,
}

/// Validated track, SI units.
#[derive(Clone, Debug, PartialEq)]
pub struct Track {
    pub name: String,
    /// Length of the run zone from the start line to its end, m.
    pub zone_length_m: f64,
    /// Elevation of the zone above sea level, m (for the standard atmosphere).
    pub elevation_m: f64,
    pub target_speed_mps: f64,
    /// Deceleration the car is braked at, m/s² (positive).
    pub braking_decel_mps2: f64,
    /// Speed the car must be down to at the end of the braking distance, m/s.
    pub exit_speed_mps: f64,
    /// Distance kept clear before the end of the zone, m.
    pub safety_margin_m: f64,
    pub grade_at_m: Vec<f64>,
    /// Grade as rise over run (0.01 = 1 %).
    pub grade: Vec<f64>,
}

impl Track {
    /// Grade (rise/run) at distance `x_m` from the start line.
    pub fn grade_at(&self, x_m: f64) -> f64 {
        if self.grade.is_empty() { 0.0 } else { interp(&self.grade_at_m, &self.grade, x_m) }
    }

    /// Where braking must be complete: the end of the zone less the margin, m.
    pub fn stop_by_m(&self) -> f64 {
        self.zone_length_m - self.safety_margin_m
    }
}

pub(super) fn validate(ctx: &mut Ctx<'_>) -> Option<Track> {
    let raw: Raw = ctx.parse()?;
    let zone = ctx.range(&raw.zone_length_m, "zone_length_m", 100.0, 50_000.0, "a length in m");
    let elevation = ctx.range(&raw.elevation_m, "elevation_m", -500.0, 5000.0, "an elevation in m");
    let target = ctx.range(&raw.target_speed_kmh, "target_speed_kmh", 10.0, 700.0, "a speed in km/h");
    let decel = ctx.range(&raw.braking_decel_mps2, "braking_decel_mps2", 0.5, 30.0, "a deceleration in m/s²");
    let exit = ctx.range(&raw.exit_speed_kmh, "exit_speed_kmh", 0.0, 400.0, "a speed in km/h");
    if exit >= target {
        ctx.err(
            raw.exit_speed_kmh.span(),
            "exit_speed_kmh",
            format!("expected below the target speed ({target} km/h), found {exit}"),
        );
    }
    let margin = ctx.range(&raw.safety_margin_m, "safety_margin_m", 0.0, 10_000.0, "a length in m");
    if margin >= zone {
        ctx.err(
            raw.safety_margin_m.span(),
            "safety_margin_m",
            format!("expected less than zone_length_m ({zone} m), found {margin}"),
        );
    }
    let (at, grade_pct) = match &raw.grade_profile {
        Some(p) => {
            let (at, g) = check_table(ctx, p, "grade_profile", "distance m, grade %", 2);
            if g.iter().any(|x| x.abs() > 30.0) {
                ctx.err(p.span(), "grade_profile", "expected grades within ±30 %");
            }
            (at, g)
        }
        None => (vec![], vec![]),
    };
    Some(Track {
        name: raw.name,
        zone_length_m: zone,
        elevation_m: elevation,
        target_speed_mps: target / 3.6,
        braking_decel_mps2: decel,
        exit_speed_mps: exit / 3.6,
        safety_margin_m: margin,
        grade_at_m: at,
        grade: grade_pct.iter().map(|g| g / 100.0).collect(),
    })
}
