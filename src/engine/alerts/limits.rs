//! Physics-limit alerts, from the derived quantities of the tick: battery
//! derating onset, boost left low, target out of reach, the braking point
//! approaching or passed, tyre speed margin (now and at the projected
//! peak) and battery temperature.

use super::{AlertBook, AlertText};
use crate::config::{ConfigSet, Severity};
use crate::engine::TARGET_PERSIST_NS;
use crate::engine::derived::{BoostLeft, BoostLimit, Derived};
use crate::event::TimeNs;
use crate::units::Measure;

/// Below this speed the car is not running: no target, braking or
/// projected-tyre alerts, m/s.
pub const RUNNING_MPS: f64 = 5.0;

/// What the limit alerts remember from tick to tick.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct LimitState {
    /// Since when the projection has said the target is out of reach.
    pub target_lost_since: Option<TimeNs>,
}

/// Raises and clears the physics-limit alerts at stream time `t` from the
/// derived block `d`, with the limits, target speed and battery temperature
/// limit of `cfg`; `braking_now` (the driver is on the brake) holds the
/// braking alerts off.
pub fn evaluate(
    book: &mut AlertBook,
    t: TimeNs,
    cfg: &ConfigSet,
    d: &Derived,
    braking_now: bool,
    state: &mut LimitState,
) {
    let lim = &cfg.alerts.limits;
    let b = &d.battery;
    let running = d.speed_mps.is_some_and(|v| v > RUNNING_MPS);
    let ratio = b.derating_ratio.unwrap_or(1.0);
    book.set(t, "derating", Severity::Caution, b.boosting && ratio < lim.derating_onset_ratio, || {
        AlertText::new("battery derating: ").rounded(Measure::Percent, ratio).then(" of rated power")
    });
    let left = d.boost_left;
    let deliverable_w = b.deliverable_w;
    book.set(
        t,
        "boost-low",
        Severity::Caution,
        b.boosting && left.seconds.is_some_and(|s| s < lim.boost_left_low_s),
        || boost_low_text(&left, deliverable_w),
    );
    let peak_mps = d.projection.as_ref().map(|p| p.peak_mps);
    // A prediction hovering at the target should not flap the alert:
    // out of reach for TARGET_PERSIST_NS before it is raised.
    let lost = running && d.projection.as_ref().is_some_and(|p| !p.target_reachable);
    let lost_since = if lost { Some(*state.target_lost_since.get_or_insert(t)) } else { None };
    if !lost {
        state.target_lost_since = None;
    }
    book.set(t, "target", Severity::Caution, lost_since.is_some_and(|s| t - s >= TARGET_PERSIST_NS), || {
        AlertText::new("target ")
            .rounded(Measure::Speed, cfg.track.target_speed_mps)
            .then(" out of reach: projected peak ")
            .rounded(Measure::Speed, peak_mps.unwrap_or(0.0))
    });
    let br = d.braking;
    let approach = running && !braking_now && br.is_some_and(|x| !x.passed && x.in_s < lim.braking_approach_s);
    book.set(t, "brake-approach", Severity::Alarm, approach, || {
        AlertText::new("braking point in ")
            .value(Measure::Time, br.map_or(0.0, |x| x.in_s))
            .then(" (")
            .value(Measure::Distance, br.map_or(0.0, |x| x.distance_m))
            .then(")")
    });
    let passed = running && !braking_now && br.is_some_and(|x| x.passed);
    book.set(t, "brake-passed", Severity::Alarm, passed, || {
        AlertText::new("past the braking point by ")
            .value(Measure::Distance, br.map_or(0.0, |x| -x.distance_m))
            .then(": brake")
    });
    let ty = d.tyre;
    book.set(t, "tyre", Severity::Alarm, ty.is_some_and(|x| x.margin_mps < lim.tyre_margin_low_mps), || {
        AlertText::new("tyre speed margin ").rounded(Measure::Speed, ty.map_or(0.0, |x| x.margin_mps))
    });
    book.set(
        t,
        "tyre-projected",
        Severity::Caution,
        running && ty.is_some_and(|x| x.peak_margin_mps.is_some_and(|m| m < 0.0)),
        || {
            AlertText::new("projected peak above the tyres' rating by ")
                .rounded(Measure::Speed, ty.and_then(|x| x.peak_margin_mps).map_or(0.0, |m| -m))
        },
    );
    let temp_limit = cfg.vehicle.battery.temp_limit_c;
    let temp = b.temp_c;
    let hot = temp.is_some_and(|x| x >= temp_limit - lim.battery_temp_margin_c);
    let sev = if temp.is_some_and(|x| x >= temp_limit) { Severity::Alarm } else { Severity::Caution };
    book.set(t, "battery-temp", sev, hot, || {
        AlertText::new("pack at ")
            .value(Measure::Temperature, temp.unwrap_or(0.0))
            .then(" (limit ")
            .rounded(Measure::Temperature, temp_limit)
            .then(")")
    });
}

/// Below this many seconds the pack is taken to give less than the need
/// already (the power limit reports exactly 0 then).
const NOW_S: f64 = 0.05;

/// The boost-low text: how long the pack can still give the power the
/// target needs, and which limit ends that. It is not the time boost
/// lasts: a pack below the need still boosts, with less than the target
/// needs, so a zero is worded as "short of the need", never as "0 s left".
fn boost_low_text(left: &BoostLeft, deliverable_w: Option<f64>) -> AlertText {
    let need = |t: AlertText| match left.need_w {
        Some(w) => t.then("the ").value(Measure::ElectricPower, w).then(" the target needs"),
        None => t.then("what the target needs"),
    };
    let s = left.seconds.unwrap_or(0.0);
    match left.binding {
        Some(BoostLimit::Power) if s < NOW_S => {
            let gives = match deliverable_w {
                Some(w) => AlertText::new("pack gives ").value(Measure::ElectricPower, w).then(", short of "),
                None => AlertText::new("pack gives less than "),
            };
            need(gives).then(" (derating)")
        }
        Some(BoostLimit::Energy) if s < NOW_S => need(AlertText::new("pack at its reserve: cannot give ")),
        Some(BoostLimit::Thermal) if s < NOW_S => need(AlertText::new("pack at its temperature limit: cannot give ")),
        binding => {
            let limit = match binding {
                Some(BoostLimit::Energy) => "charge",
                Some(BoostLimit::Power) => "derating",
                Some(BoostLimit::Thermal) => "temperature",
                None => "unknown",
            };
            need(AlertText::new("pack can give "))
                .then(" for ")
                .value(Measure::Time, s)
                .then(format!(" more ({limit} limit)"))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::derived::{BoostLeft, BoostLimit, BrakingView, ProjectionView, TyreView};
    use crate::event::NS_PER_S;

    const S: TimeNs = NS_PER_S;

    fn keys(book: &AlertBook) -> Vec<String> {
        let mut k: Vec<String> = book.visible().into_iter().filter(|a| a.active).map(|a| a.key).collect();
        k.sort();
        k
    }

    fn running(v_mps: f64) -> Derived {
        Derived { speed_mps: Some(v_mps), ..Derived::default() }
    }

    #[test]
    fn nothing_is_raised_on_a_quiet_derived_block() {
        let cfg = ConfigSet::embedded();
        let mut book = AlertBook::default();
        evaluate(&mut book, S, &cfg, &running(50.0), false, &mut LimitState::default());
        assert!(keys(&book).is_empty(), "{:?}", keys(&book));
    }

    #[test]
    fn derating_and_boost_low_only_while_boosting() {
        let cfg = ConfigSet::embedded();
        let lim = &cfg.alerts.limits;
        let mut d = running(50.0);
        d.battery.derating_ratio = Some(lim.derating_onset_ratio - 0.01);
        d.boost_left = BoostLeft {
            seconds: Some(lim.boost_left_low_s - 0.5),
            binding: Some(BoostLimit::Thermal),
            ..BoostLeft::default()
        };
        let mut book = AlertBook::default();
        evaluate(&mut book, S, &cfg, &d, false, &mut LimitState::default());
        assert!(keys(&book).is_empty(), "not boosting: {:?}", keys(&book));
        d.battery.boosting = true;
        evaluate(&mut book, 2 * S, &cfg, &d, false, &mut LimitState::default());
        assert_eq!(keys(&book), vec!["boost-low", "derating"]);
        let low = book.visible().into_iter().find(|a| a.key == "boost-low").unwrap();
        assert_eq!(
            low.message,
            format!(
                "pack can give what the target needs for {:.1} s more (temperature limit)",
                lim.boost_left_low_s - 0.5
            )
        );
    }

    // Issue 15, item 13: `boost left 0.0 s (power limit)` read as "boost
    // over" while the pack was boosting at 101 kW: the figure is the time the
    // pack can still give what the target needs, and a zero on the derating
    // limit means the pack already gives less than that.
    #[test]
    fn boost_low_says_what_the_pack_gives_against_the_need() {
        let left = |binding, seconds| BoostLeft {
            seconds: Some(seconds),
            binding: Some(binding),
            need_w: Some(139e3),
            ..BoostLeft::default()
        };
        let text = |l: BoostLeft| boost_low_text(&l, Some(110e3)).metric();
        assert_eq!(
            text(left(BoostLimit::Power, 0.0)),
            "pack gives 110 kW, short of the 139 kW the target needs (derating)"
        );
        assert_eq!(
            text(left(BoostLimit::Energy, 4.26)),
            "pack can give the 139 kW the target needs for 4.3 s more (charge limit)"
        );
        assert_eq!(
            text(left(BoostLimit::Power, 2.0)),
            "pack can give the 139 kW the target needs for 2.0 s more (derating limit)"
        );
        assert_eq!(
            text(left(BoostLimit::Thermal, 0.0)),
            "pack at its temperature limit: cannot give the 139 kW the target needs"
        );
        for (k, s) in [(BoostLimit::Power, 0.0), (BoostLimit::Energy, 3.0), (BoostLimit::Thermal, 1.0)] {
            let t = text(left(k, s));
            assert!(!t.contains("boost left") && t.contains("139 kW"), "{t}");
        }
        // The pack's power is electrical: kW in the imperial set too.
        assert_eq!(
            boost_low_text(&left(BoostLimit::Power, 0.0), Some(110e3)).render(crate::units::UnitSet::Imperial),
            "pack gives 110 kW, short of the 139 kW the target needs (derating)"
        );
    }

    // Issue 15, item 12: alert texts stayed in km/h after `u`. The texts
    // keep their numbers as values: metric (recorded) as before, imperial
    // on the screens.
    #[test]
    fn limit_texts_read_in_both_sets() {
        let cfg = ConfigSet::embedded();
        let mut d = running(80.0);
        d.tyre = Some(TyreView { rated_mps: 83.0, margin_mps: 3.0, peak_margin_mps: None });
        d.battery.temp_c = Some(cfg.vehicle.battery.temp_limit_c);
        d.braking = Some(BrakingView { passed: true, distance_m: -42.0, ..BrakingView::default() });
        let mut book = AlertBook::default();
        evaluate(&mut book, S, &cfg, &d, false, &mut LimitState::default());
        let find = |k: &str| book.visible().into_iter().find(|a| a.key == k).unwrap();
        let tyre = find("tyre");
        // 3 m/s = 10.8 km/h = 6.7 mph.
        assert_eq!(tyre.message, "tyre speed margin 11 km/h");
        assert_eq!(tyre.text.render(crate::units::UnitSet::Imperial), "tyre speed margin 7 mph");
        let passed = find("brake-passed");
        assert_eq!(passed.message, "past the braking point by 42 m: brake");
        // 42 m = 137.8 ft.
        assert_eq!(passed.text.render(crate::units::UnitSet::Imperial), "past the braking point by 138 ft: brake");
        let hot = find("battery-temp");
        let limit_c = cfg.vehicle.battery.temp_limit_c;
        assert_eq!(hot.message, format!("pack at {limit_c:.1} °C (limit {limit_c:.0} °C)"));
        let limit_f = limit_c * 9.0 / 5.0 + 32.0;
        assert_eq!(
            hot.text.render(crate::units::UnitSet::Imperial),
            format!("pack at {limit_f:.1} °F (limit {limit_f:.0} °F)")
        );
    }

    #[test]
    fn target_out_of_reach_must_persist_two_seconds() {
        let cfg = ConfigSet::embedded();
        let mut d = running(50.0);
        d.projection = Some(ProjectionView { peak_mps: 90.0, target_reachable: false, ..ProjectionView::default() });
        let mut book = AlertBook::default();
        let mut st = LimitState::default();
        evaluate(&mut book, 10 * S, &cfg, &d, false, &mut st);
        evaluate(&mut book, 12 * S - 1, &cfg, &d, false, &mut st);
        assert!(!book.is_active("target"));
        evaluate(&mut book, 12 * S, &cfg, &d, false, &mut st);
        assert!(book.is_active("target"));
        let msg = book.visible()[0].message.clone();
        assert_eq!(
            msg,
            format!("target {:.0} km/h out of reach: projected peak 324 km/h", cfg.track.target_speed_mps * 3.6)
        );
        // Reachable again: cleared and the clock reset.
        d.projection.as_mut().unwrap().target_reachable = true;
        evaluate(&mut book, 13 * S, &cfg, &d, false, &mut st);
        assert!(!book.is_active("target"));
        assert_eq!(st.target_lost_since, None);
    }

    #[test]
    fn braking_alerts_are_held_off_by_the_brake_and_below_running_speed() {
        let cfg = ConfigSet::embedded();
        let mut d = running(80.0);
        d.braking = Some(BrakingView { passed: true, distance_m: -42.0, ..BrakingView::default() });
        let mut book = AlertBook::default();
        evaluate(&mut book, S, &cfg, &d, true, &mut LimitState::default());
        assert!(!book.is_active("brake-passed"), "already braking");
        evaluate(&mut book, 2 * S, &cfg, &running(4.0), false, &mut LimitState::default());
        assert!(!book.is_active("brake-passed"));
        evaluate(&mut book, 3 * S, &cfg, &d, false, &mut LimitState::default());
        assert!(book.is_active("brake-passed"));
        assert_eq!(book.visible()[0].message, "past the braking point by 42 m: brake");
        d.braking = Some(BrakingView { in_s: cfg.alerts.limits.braking_approach_s - 0.1, ..BrakingView::default() });
        evaluate(&mut book, 4 * S, &cfg, &d, false, &mut LimitState::default());
        assert_eq!(keys(&book), vec!["brake-approach"]);
    }

    #[test]
    fn tyre_margin_and_battery_temperature_severities() {
        let cfg = ConfigSet::embedded();
        let limit_c = cfg.vehicle.battery.temp_limit_c;
        let margin_c = cfg.alerts.limits.battery_temp_margin_c;
        let mut d = running(80.0);
        d.tyre = Some(TyreView { rated_mps: 83.0, margin_mps: 3.0, peak_margin_mps: Some(-2.0) });
        d.battery.temp_c = Some(limit_c - margin_c);
        let mut book = AlertBook::default();
        evaluate(&mut book, S, &cfg, &d, false, &mut LimitState::default());
        assert_eq!(keys(&book), vec!["battery-temp", "tyre", "tyre-projected"]);
        let sev = |b: &AlertBook, k: &str| b.visible().into_iter().find(|a| a.key == k).unwrap().severity;
        assert_eq!(sev(&book, "battery-temp"), Severity::Caution, "within the margin: caution");
        assert_eq!(sev(&book, "tyre"), Severity::Alarm);
        // At the limit the temperature alert is an alarm (on its next raise).
        d.battery.temp_c = Some(limit_c);
        let mut book = AlertBook::default();
        evaluate(&mut book, S, &cfg, &d, false, &mut LimitState::default());
        assert_eq!(sev(&book, "battery-temp"), Severity::Alarm);
    }
}
