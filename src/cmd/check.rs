//! `termvel check`: validate config files and say what they define.

use std::fmt::Write as _;
use std::path::PathBuf;
use std::process::ExitCode;

use crate::channel::canonical_dimension;
use crate::cli::CheckArgs;
use crate::config::{self, ConfigError, ConfigKind, FileReport, Parsed};
use crate::decode::busload::bus_load;

/// Bus load above which `check` warns.
pub const BUS_LOAD_WARN: f64 = 0.70;

pub fn run(args: &CheckArgs) -> anyhow::Result<ExitCode> {
    let (files, read_errors): (Vec<(String, String)>, Vec<ConfigError>) = if args.files.is_empty() {
        let local = PathBuf::from("config");
        if local.is_dir() {
            config::read_paths_partial(&[local])
        } else {
            (config::EMBEDDED.iter().map(|(n, t)| (format!("<embedded>/{n}"), t.to_string())).collect(), Vec::new())
        }
    } else {
        config::read_paths_partial(&args.files)
    };
    if files.is_empty() && !read_errors.is_empty() {
        return print_errors(&read_errors);
    }
    // Files that could not be read are reported first; the others are
    // still checked, so one bad file does not hide the rest's problems.
    for e in &read_errors {
        crate::out!("{e}");
    }
    let (text, ok) = check_texts_with(&files, read_errors.len());
    print!("{text}");
    Ok(if ok { ExitCode::SUCCESS } else { ExitCode::from(super::EXIT_UNUSABLE) })
}

fn print_errors(errors: &[ConfigError]) -> anyhow::Result<ExitCode> {
    for e in errors {
        crate::out!("{e}");
    }
    crate::out!("invalid: {} error{}", errors.len(), if errors.len() == 1 { "" } else { "s" });
    Ok(ExitCode::from(super::EXIT_UNUSABLE))
}

/// Validates a set of (origin, text) files; returns the printed summary
/// and whether the set is valid.
pub fn check_texts(files: &[(String, String)]) -> (String, bool) {
    check_texts_with(files, 0)
}

/// As [`check_texts`], with `unread` files already reported as unreadable
/// (counted as errors in the closing line).
fn check_texts_with(files: &[(String, String)], unread: usize) -> (String, bool) {
    let reports: Vec<FileReport> = files.iter().map(|(o, t)| config::validate_text(o, t)).collect();
    let mut out = String::new();
    let mut errors = unread;
    let mut warnings = 0;
    // Cross-file facts: channels fed by the signal map in this set.
    let fed: Option<std::collections::HashSet<String>> = reports.iter().find_map(|r| match &r.parsed {
        Some(Parsed::Signals(s)) => {
            Some(s.messages.iter().flat_map(|m| m.signals.iter().map(|s| s.channel.clone())).collect())
        }
        _ => None,
    });
    let mut seen_kinds: Vec<ConfigKind> = Vec::new();
    for r in &reports {
        for e in &r.errors {
            let _ = writeln!(out, "{e}");
            errors += 1;
        }
        for w in &r.warnings {
            // Shown as an error is (escaped, cut), with the word in front.
            let _ = writeln!(out, "{}", ConfigError { message: format!("warning: {}", w.message), ..w.clone() });
            warnings += 1;
        }
        if let Some(k) = r.kind {
            if k != ConfigKind::Plan && seen_kinds.contains(&k) {
                let _ = writeln!(
                    out,
                    "{}:1:1: kind: a second {} config in one set; give one file per kind",
                    r.origin,
                    k.as_str()
                );
                errors += 1;
            }
            seen_kinds.push(k);
        }
        let Some(parsed) = &r.parsed else { continue };
        match parsed {
            Parsed::Vehicle(v) => {
                let _ = writeln!(
                    out,
                    "{}: vehicle \"{}\": {:.0} kg, CdA {:.3} m², Crr {:.4}, motor {:.0} kW, battery {:.1} kWh ({:.0}–{:.0} % usable), tyres rated {:.0} km/h",
                    r.origin,
                    v.name,
                    v.mass_kg,
                    v.cda_m2,
                    v.crr0,
                    v.motor_rated_power_w / 1e3,
                    v.battery.energy_j / 3.6e6,
                    v.battery.soc_reserve * 100.0,
                    v.battery.soc_max * 100.0,
                    v.tyre_rated_mps * 3.6
                );
            }
            Parsed::Track(t) => {
                let _ = writeln!(
                    out,
                    "{}: track \"{}\": zone {:.0} m, stop by {:.0} m, target {:.0} km/h, braking {:.1} m/s² to {:.0} km/h, elevation {:.0} m",
                    r.origin,
                    t.name,
                    t.zone_length_m,
                    t.stop_by_m(),
                    t.target_speed_mps * 3.6,
                    t.braking_decel_mps2,
                    t.exit_speed_mps * 3.6,
                    t.elevation_m
                );
            }
            Parsed::Signals(s) => {
                let n_sig: usize = s.messages.iter().map(|m| m.signals.len()).sum();
                let _ = writeln!(
                    out,
                    "{}: signals: {} messages, {} signals, {} kbit/s{}",
                    r.origin,
                    s.messages.len(),
                    n_sig,
                    s.bitrate / 1000,
                    s.data_bitrate.map(|d| format!(" (FD data {} kbit/s)", d / 1000)).unwrap_or_default()
                );
                let load = bus_load(s);
                for (m, l) in s.messages.iter().zip(&load.per_message) {
                    let _ = writeln!(
                        out,
                        "  {:>8}  {:<16} {:>6.1} ms {:>3} B{} {:>2} signals  {:>5.1} % of the bus",
                        m.id.to_string(),
                        m.name,
                        m.period_ns as f64 / 1e6,
                        m.length,
                        if m.fd { " FD" } else { "   " },
                        m.signals.len(),
                        l.load * 100.0
                    );
                }
                let mut canonical: Vec<&str> = Vec::new();
                let mut other: Vec<&str> = Vec::new();
                // Each channel listed once, in map order; a set keeps a map
                // of 40 000 messages linear (issue 13, item 14).
                let mut listed = std::collections::HashSet::new();
                for m in &s.messages {
                    for sig in &m.signals {
                        if listed.insert(sig.channel.as_str()) {
                            let list =
                                if canonical_dimension(&sig.channel).is_some() { &mut canonical } else { &mut other };
                            list.push(&sig.channel);
                        }
                    }
                }
                let _ = writeln!(
                    out,
                    "  channels fed: {}",
                    if canonical.is_empty() { "none".into() } else { canonical.join(", ") }
                );
                let _ = writeln!(
                    out,
                    "  unknown channels (kept under their own names): {}",
                    if other.is_empty() { "none".into() } else { other.join(", ") }
                );
                let _ = writeln!(
                    out,
                    "  bus load at the configured periods: {:.1} % worst case (bit-stuffed), {:.1} % unstuffed, {:.0} frames/s",
                    load.worst * 100.0,
                    load.best * 100.0,
                    load.frames_per_s
                );
                // Compared as printed (tenths of a per cent): a load that
                // reads 70.0 % is not above 70 % because of a float sum.
                if (load.worst * 1000.0).round() > BUS_LOAD_WARN * 1000.0 {
                    let _ = writeln!(
                        out,
                        "{}: warning: worst-case bus load {:.1} % is above {:.0} %: frames will queue and arrive late",
                        r.origin,
                        load.worst * 100.0,
                        BUS_LOAD_WARN * 100.0
                    );
                    warnings += 1;
                }
            }
            Parsed::Plan(p) => {
                let boost = match p.driver.boost_start {
                    config::run_plan::BoostStart::AtDistance(m) => format!("boost from {m:.0} m"),
                    config::run_plan::BoostStart::AtSpeed(v) => format!("boost from {:.0} km/h", v * 3.6),
                };
                let _ = writeln!(
                    out,
                    "{}: plan \"{}\": seed {}, {}, headwind {:.1} m/s; {boost}, brake at {:.0} m; {} fault{}",
                    r.origin,
                    p.name,
                    p.seed,
                    match p.ambient.weather {
                        Some(w) => format!(
                            "{:.1} °C, {:.0} hPa, {:.0} % RH",
                            w.temp_c,
                            w.pressure_pa / 100.0,
                            w.humidity * 100.0
                        ),
                        None => "no weather (the standard atmosphere at the track's elevation)".to_string(),
                    },
                    p.ambient.headwind_mps,
                    p.driver.brake_at_m,
                    p.faults.len(),
                    if p.faults.len() == 1 { "" } else { "s" }
                );
                // What the plan names must exist, be of the right kind and
                // be valid: `plan` and `rehearse` would fail on it later.
                if !r.origin.starts_with("<embedded>") {
                    for e in config::plan_references(p, std::path::Path::new(&r.origin)).1 {
                        let _ = writeln!(out, "{e}");
                        errors += 1;
                    }
                }
            }
            Parsed::Alerts(a) => {
                let _ = writeln!(
                    out,
                    "{}: alerts: {} rule{}; stale after {} periods, boost-left alert below {:.0} s",
                    r.origin,
                    a.rules.len(),
                    if a.rules.len() == 1 { "" } else { "s" },
                    a.limits.stale_after_periods,
                    a.limits.boost_left_low_s
                );
                if let Some(fed) = &fed {
                    for (i, rule) in a.rules.iter().enumerate() {
                        let known = fed.contains(&rule.channel)
                            || canonical_dimension(&rule.channel).is_some()
                            || crate::engine::quantities::find(&rule.channel).is_some();
                        if !known {
                            let _ = writeln!(
                                out,
                                "{}: warning: rule[{i}].channel: \"{}\" is not fed by the signal map in this set; the rule can never fire",
                                r.origin, rule.channel
                            );
                            warnings += 1;
                        }
                    }
                }
            }
        }
    }
    let valid = errors == 0;
    let _ = writeln!(
        out,
        "{}: {} file{}, {} error{}, {} warning{}",
        if valid { "valid" } else { "invalid" },
        files.len() + unread,
        if files.len() + unread == 1 { "" } else { "s" },
        errors,
        if errors == 1 { "" } else { "s" },
        warnings,
        if warnings == 1 { "" } else { "s" }
    );
    (out, valid)
}
