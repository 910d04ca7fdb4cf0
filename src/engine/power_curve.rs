//! Power at the wheels against speed: what the powertrain can deliver at
//! full demand and what the road takes, on a level road without wind.
//!
//! One definition for the engine and the power screen: the engine's
//! `road_load.available_w` at the present speed and the chart's
//! "available" curve both come from [`available_w`], and the engine
//! computes the curve itself ([`curve`]) into the derived block, so the
//! chart and the meter cannot disagree (below the battery's reserve, for
//! one, neither counts the motor).

use super::physics::roadload::{RoadLoadInputs, road_load};
use crate::config::vehicle::Vehicle;

/// Points of the curve, over 0 ..= [`vmax_mps`]: one every 1/80 of the range.
pub const CURVE_STEPS: usize = 80;

/// One speed of the curve.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct PowerPoint {
    pub v_mps: f64,
    /// Road load at the present drag and rolling estimates, W.
    pub road_w: f64,
    /// At full demand: the engine's envelope plus the motor when boost is
    /// available, through the driveline, W.
    pub available_w: f64,
    /// The engine's envelope alone through the driveline, W.
    pub engine_only_w: f64,
}

/// Power at the wheels the powertrain can deliver at `v_mps` at full
/// demand, W: η_driveline·(P_engine(v) + min(η_motor·P_battery, P_motor,rated)).
/// `boost_w` is the battery power deliverable to the motor when boost is
/// available (energy above the reserve and a deliverable power), else `None`.
pub fn available_w(veh: &Vehicle, v_mps: f64, boost_w: Option<f64>) -> f64 {
    let motor_w = boost_w.map_or(0.0, |p| (p * veh.motor_efficiency).min(veh.motor_rated_power_w));
    veh.driveline_efficiency * (veh.full_load_power_w(v_mps) + motor_w)
}

/// The top of the curve's speed range, m/s: a little past the tyres' rating
/// or the target, whichever is higher.
pub fn vmax_mps(veh: &Vehicle, target_mps: f64) -> f64 {
    veh.tyre_rated_mps.max(target_mps) * 1.05
}

/// The curve from standstill to `vmax_mps` in [`CURVE_STEPS`] steps, level
/// road, no wind, with the drag area and rolling coefficient in use.
pub fn curve(veh: &Vehicle, vmax_mps: f64, rho: f64, cda_m2: f64, crr: f64, boost_w: Option<f64>) -> Vec<PowerPoint> {
    (0..=CURVE_STEPS)
        .map(|i| {
            let v = vmax_mps * i as f64 / CURVE_STEPS as f64;
            let road_w = road_load(&RoadLoadInputs {
                v_mps: v,
                wind_mps: 0.0,
                rho,
                cda_m2,
                crr0: crr,
                crr2_s2_m2: veh.crr2_s2_m2,
                mass_kg: veh.mass_kg,
                grade: 0.0,
            })
            .total_w;
            PowerPoint {
                v_mps: v,
                road_w,
                available_w: available_w(veh, v, boost_w),
                engine_only_w: veh.driveline_efficiency * veh.full_load_power_w(v),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::ConfigSet;

    #[test]
    fn available_adds_the_motor_only_with_boost_and_caps_it_at_its_rating() {
        let veh = ConfigSet::embedded().vehicle;
        let v = 60.0;
        let engine = veh.driveline_efficiency * veh.full_load_power_w(v);
        assert_eq!(available_w(&veh, v, None), engine);
        let small = 10_000.0;
        let with = available_w(&veh, v, Some(small));
        assert!((with - engine - veh.driveline_efficiency * small * veh.motor_efficiency).abs() < 1e-6);
        // A battery far beyond the motor gives the motor's rating, no more.
        let capped = available_w(&veh, v, Some(1e9));
        assert!((capped - engine - veh.driveline_efficiency * veh.motor_rated_power_w).abs() < 1e-6);
    }

    #[test]
    fn the_curve_spans_standstill_to_vmax_and_its_road_load_rises() {
        let veh = ConfigSet::embedded().vehicle;
        let c = curve(&veh, 100.0, 1.2, 0.9, 0.012, None);
        assert_eq!(c.len(), CURVE_STEPS + 1);
        assert_eq!(c[0].v_mps, 0.0);
        assert_eq!(c[CURVE_STEPS].v_mps, 100.0);
        assert!(c.windows(2).all(|w| w[1].road_w > w[0].road_w));
        // Without boost, available is the engine alone.
        assert!(c.iter().all(|p| p.available_w == p.engine_only_w));
        // At 100 m/s, 1.2 kg/m³ and 0.9 m² the aero part alone is
        // ½·ρ·CdA·v³ = 540 kW: the total must be above it.
        assert!(c[CURVE_STEPS].road_w > 540_000.0);
    }

    /// The chart and the meter: the engine's available power at the present
    /// speed is the curve's at that speed, above the reserve (motor counted)
    /// and below it (engine alone; the chart used to add the motor anyway).
    #[test]
    fn the_curve_and_the_meter_agree_above_and_below_the_reserve() {
        use crate::engine::derived::{TickInputs, compute};
        use crate::engine::estimators::RoadLoadEstimator;
        let cfg = ConfigSet::embedded();
        let veh = &cfg.vehicle;
        let i = CURVE_STEPS / 2;
        let v = vmax_mps(veh, cfg.track.target_speed_mps) * i as f64 / CURVE_STEPS as f64;
        let estimate = RoadLoadEstimator::new(veh).estimate();
        let reserve = veh.battery.soc_reserve;
        for (soc, motor_counted) in [(reserve + 0.2, true), (reserve - 0.01, false)] {
            let inp = TickInputs {
                speed: Some((v, "vehicle.speed", 0.0)),
                soc: Some(soc),
                power_limit_w: Some(150_000.0),
                ..TickInputs::default()
            };
            let d = compute(&cfg, &inp, &estimate, None, 0.0, None, None);
            let meter = d.road_load.expect("a road load at a known speed").available_w;
            let chart = d.power_curve[i];
            assert_eq!(chart.v_mps, v);
            assert_eq!(chart.available_w, meter, "soc {soc}");
            assert_eq!(meter > chart.engine_only_w, motor_counted, "soc {soc}: {meter} vs {}", chart.engine_only_w);
        }
    }
}
