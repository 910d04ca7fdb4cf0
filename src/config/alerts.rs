//! The alerts file: limits of the built-in alerts and the engineer's own
//! rules on any channel or derived quantity.

use serde::Deserialize;
use toml::Spanned;

use super::Ctx;
use crate::channel::valid_channel_name;
// The names of derived quantities are defined once, beside how the engine
// reads them; the config layer only checks rule names against that table.
use crate::engine::quantities;

type F = Spanned<f64>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Raw {
    #[allow(dead_code)]
    kind: String,
    limits: Option<RawLimits>,
    #[serde(default)]
    rule: Vec<RawRule>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLimits {
    stale_after_periods: Option<F>,
    boost_left_low_s: Option<F>,
    tyre_margin_low_kmh: Option<F>,
    battery_temp_margin_c: Option<F>,
    braking_approach_s: Option<F>,
    derating_onset_ratio: Option<F>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRule {
    name: Spanned<String>,
    channel: Spanned<String>,
    above: Option<F>,
    below: Option<F>,
    #[serde(default)]
    for_s: Option<F>,
    #[serde(default)]
    hysteresis: Option<F>,
    severity: Spanned<String>,
    message: Spanned<String>,
}

/// How much an alert matters. Shown with a word and a symbol as well as a
/// colour, so it reads without colour.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    Info,
    Caution,
    Alarm,
}

impl Severity {
    pub fn as_str(self) -> &'static str {
        match self {
            Severity::Info => "info",
            Severity::Caution => "caution",
            Severity::Alarm => "alarm",
        }
    }
    pub fn parse(s: &str) -> Option<Severity> {
        Some(match s {
            "info" => Severity::Info,
            "caution" => Severity::Caution,
            "alarm" => Severity::Alarm,
            _ => return None,
        })
    }
}

/// Which side of the threshold raises the alert.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Comparison {
    Above(f64),
    Below(f64),
}

/// A rule from the alerts file.
#[derive(Clone, Debug, PartialEq)]
pub struct AlertRule {
    pub name: String,
    /// A channel name or a derived quantity's name
    /// (`derived.boost_left.seconds`; an old name is replaced by its new one).
    pub channel: String,
    pub comparison: Comparison,
    /// The condition must hold this long before the alert is raised, s.
    pub for_s: f64,
    /// The value must come back past the threshold by this much to clear.
    pub hysteresis: f64,
    pub severity: Severity,
    pub message: String,
}

/// Limits of the built-in alerts.
#[derive(Clone, Debug, PartialEq)]
pub struct Limits {
    /// A channel is stale after this many expected periods without a sample.
    pub stale_after_periods: f64,
    /// Boost time left below this raises an alert, s.
    pub boost_left_low_s: f64,
    /// Tyre speed margin below this raises an alert, m/s.
    pub tyre_margin_low_mps: f64,
    /// Battery temperature within this of its limit raises an alert, °C.
    pub battery_temp_margin_c: f64,
    /// Braking point closer than this raises the approach alert, s.
    pub braking_approach_s: f64,
    /// Deliverable battery power below this fraction of rated is derating.
    pub derating_onset_ratio: f64,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            stale_after_periods: 3.0,
            boost_left_low_s: 5.0,
            tyre_margin_low_mps: 15.0 / 3.6,
            battery_temp_margin_c: 5.0,
            braking_approach_s: 3.0,
            derating_onset_ratio: 0.95,
        }
    }
}

/// Validated alerts file.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Alerts {
    pub limits: Limits,
    pub rules: Vec<AlertRule>,
    /// Deprecation warnings about old rule names (`warning: file:line:col:
    /// rule[i].channel: …`), kept for the command that loads the file to
    /// show: a config set keeps no warnings otherwise.
    pub deprecated: Vec<String>,
}

/// The derived quantities a rule may watch, besides channels: the numeric
/// ones of the table (flags as 0/1).
pub fn rule_names() -> Vec<&'static str> {
    quantities::QUANTITIES.iter().filter(|q| q.kind().is_numeric()).map(|q| q.name).collect()
}

pub(super) fn validate(ctx: &mut Ctx<'_>) -> Option<Alerts> {
    let raw: Raw = ctx.parse()?;
    let mut limits = Limits::default();
    if let Some(l) = &raw.limits {
        if let Some(v) = &l.stale_after_periods {
            limits.stale_after_periods = ctx.range(v, "limits.stale_after_periods", 1.0, 100.0, "a number of periods");
        }
        if let Some(v) = &l.boost_left_low_s {
            limits.boost_left_low_s = ctx.range(v, "limits.boost_left_low_s", 0.0, 600.0, "a time in s");
        }
        if let Some(v) = &l.tyre_margin_low_kmh {
            limits.tyre_margin_low_mps =
                ctx.range(v, "limits.tyre_margin_low_kmh", 0.0, 200.0, "a speed in km/h") / 3.6;
        }
        if let Some(v) = &l.battery_temp_margin_c {
            limits.battery_temp_margin_c =
                ctx.range(v, "limits.battery_temp_margin_c", 0.0, 50.0, "a temperature difference in °C");
        }
        if let Some(v) = &l.braking_approach_s {
            limits.braking_approach_s = ctx.range(v, "limits.braking_approach_s", 0.0, 60.0, "a time in s");
        }
        if let Some(v) = &l.derating_onset_ratio {
            limits.derating_onset_ratio =
                ctx.range(v, "limits.derating_onset_ratio", 0.1, 1.0, "a fraction of rated power");
        }
    }
    let mut rules = Vec::new();
    let mut deprecated = Vec::new();
    for (i, r) in raw.rule.iter().enumerate() {
        let k = |s: &str| format!("rule[{i}].{s}");
        let name = r.name.get_ref().trim().to_string();
        if name.is_empty() {
            ctx.err(r.name.span(), &k("name"), "expected a non-empty name");
        } else if rules.iter().any(|o: &AlertRule| o.name == name) {
            ctx.err(r.name.span(), &k("name"), format!("expected a unique rule name; \"{name}\" is used twice"));
        }
        let mut channel = r.channel.get_ref().trim().to_string();
        if !valid_channel_name(&channel) {
            ctx.err(
                r.channel.span(),
                &k("channel"),
                format!("expected a channel or derived name, found \"{channel}\""),
            );
        } else if channel.starts_with("derived.") {
            // Old names keep an engineer's alerts file working; the rule
            // watches the quantity under its present name from here on.
            if let Some(new) = quantities::alias(&channel) {
                let message = format!("\"{channel}\" is deprecated; use \"{new}\" (the same quantity)");
                ctx.warn(r.channel.span(), &k("channel"), message);
                deprecated.extend(ctx.warnings.last().map(|w| format!("warning: {w}")));
                channel = new.to_string();
            }
            match quantities::find(&channel) {
                Some(q) if q.kind().is_numeric() => {}
                Some(_) => ctx.err(
                    r.channel.span(),
                    &k("channel"),
                    format!("expected a numeric derived quantity, found \"{channel}\", which is a word"),
                ),
                None => ctx.err(
                    r.channel.span(),
                    &k("channel"),
                    format!("expected one of {}, found \"{channel}\"", rule_names().join(", ")),
                ),
            }
        }
        let comparison = match (&r.above, &r.below) {
            (Some(a), None) => Comparison::Above(finite(ctx, a, &k("above"))),
            (None, Some(b)) => Comparison::Below(finite(ctx, b, &k("below"))),
            (Some(_), Some(b)) => {
                ctx.err(b.span(), &k("below"), "expected either `above` or `below`, not both");
                continue;
            }
            (None, None) => {
                ctx.err(r.name.span(), &k("above"), "expected a threshold: `above = …` or `below = …`");
                continue;
            }
        };
        let for_s = r.for_s.as_ref().map_or(0.0, |v| ctx.range(v, &k("for_s"), 0.0, 3600.0, "a duration in s"));
        let hysteresis = r
            .hysteresis
            .as_ref()
            .map_or(0.0, |v| ctx.range(v, &k("hysteresis"), 0.0, f64::MAX, "a non-negative amount"));
        let Some(severity) = Severity::parse(r.severity.get_ref()) else {
            ctx.err(
                r.severity.span(),
                &k("severity"),
                format!("expected \"info\", \"caution\" or \"alarm\", found \"{}\"", r.severity.get_ref()),
            );
            continue;
        };
        let message = r.message.get_ref().trim().to_string();
        if message.is_empty() || message.len() > 120 {
            ctx.err(
                r.message.span(),
                &k("message"),
                format!("expected a message of 1 to 120 characters, found {}", message.len()),
            );
        }
        rules.push(AlertRule { name, channel, comparison, for_s, hysteresis, severity, message });
    }
    Some(Alerts { limits, rules, deprecated })
}

fn finite(ctx: &mut Ctx<'_>, v: &F, key: &str) -> f64 {
    let x = *v.get_ref();
    if !x.is_finite() {
        ctx.err(v.span(), key, format!("expected a finite threshold, found {x}"));
    }
    x
}

#[cfg(test)]
mod tests {
    use crate::config::{Parsed, validate_text};

    fn rule(channel: &str) -> String {
        format!(
            "kind = \"alerts\"\n\n[[rule]]\nname = \"r\"\nchannel = \"{channel}\"\nbelow = 5.0\nseverity = \"alarm\"\nmessage = \"m\"\n"
        )
    }

    #[test]
    fn an_old_derived_name_works_with_a_warning_naming_the_new_one() {
        let r = validate_text("alerts.toml", &rule("derived.boost_left_s"));
        assert!(r.errors.is_empty(), "{:?}", r.errors);
        assert_eq!(r.warnings.len(), 1);
        let w = r.warnings[0].to_string();
        assert!(w.starts_with("alerts.toml:5:11: rule[0].channel: "), "{w}");
        assert!(w.contains("\"derived.boost_left_s\" is deprecated; use \"derived.boost_left.seconds\""), "{w}");
        let Some(Parsed::Alerts(a)) = r.parsed else { panic!("valid") };
        assert_eq!(a.rules[0].channel, "derived.boost_left.seconds");
        assert_eq!(a.deprecated, vec![format!("warning: {w}")]);
    }

    #[test]
    fn a_new_name_is_accepted_silently_and_unknown_or_word_names_are_errors() {
        let r = validate_text("alerts.toml", &rule("derived.road_load.margin_w"));
        assert!(r.errors.is_empty() && r.warnings.is_empty(), "{:?} {:?}", r.errors, r.warnings);
        let r = validate_text("alerts.toml", &rule("derived.road_load.margin"));
        assert_eq!(r.errors.len(), 1);
        assert!(r.errors[0].message.contains("derived.road_load.margin_w"), "the list names the real ones");
        let r = validate_text("alerts.toml", &rule("derived.boost_left.binding"));
        assert_eq!(r.errors.len(), 1);
        assert!(r.errors[0].message.contains("a word"), "{}", r.errors[0].message);
    }
}
