//! After the run: `termvel report` and `termvel export` on the bundled demo
//! recording and on rehearsals, checked against independent readers
//! (python-can and this suite's own byte slicing for the raw frames, pyarrow
//! for the Parquet file, Python's csv module for the CSV) and against the
//! simulator's truth.

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

use crate::util::{demo, root};

fn termvel(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_termvel")).args(args).current_dir(root()).output().expect("termvel runs")
}

fn report_json(files: &[&Path]) -> Value {
    let mut args = vec!["report", "--json"];
    let s: Vec<String> = files.iter().map(|f| f.display().to_string()).collect();
    args.extend(s.iter().map(String::as_str));
    let out = termvel(&args);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).expect("one JSON document")
}

/// The demo plan with `from` replaced by `to` in its text, rehearsed and
/// recorded to `dir/name`.
fn rehearsed_variant(dir: &Path, name: &str, from: &str, to: &str) -> PathBuf {
    let base = termvel::config::EMBEDDED_PLAN.1;
    assert!(base.contains(from), "the demo plan has {from}");
    let text = base.replace(from, to);
    let plan = match termvel::config::validate_text("variant.toml", &text).parsed {
        Some(termvel::config::Parsed::Plan(p)) => p,
        _ => panic!("the variant plan is valid"),
    };
    let r = crate::rehearsal::rehearse(plan);
    let path = dir.join(name);
    std::fs::write(&path, &r.recording).unwrap();
    path
}

#[test]
fn the_demo_report_agrees_with_independent_readers_and_the_truth() {
    let dir = tempfile::tempdir().unwrap();
    let j = report_json(&[&demo()]);
    assert_eq!(j["termvel_report"], 1);
    assert!(j["caution"].as_str().unwrap().contains("run director"));
    let r = &j["runs"][0];
    let f = |k: &str| r[k].as_f64().unwrap_or_else(|| panic!("{k} in {r}"));

    // Exports, read back by pyarrow and Python's csv module.
    let csv = dir.path().join("demo.csv");
    let parquet = dir.path().join("demo.parquet");
    let long = dir.path().join("demo-long.parquet");
    for (to, out, extra) in [("csv", &csv, None), ("parquet", &parquet, None), ("parquet", &long, Some("--long"))] {
        let mut args = vec!["export", "replays/demo.tvrec", "--to", to, "--out", out.to_str().unwrap()];
        args.extend(extra);
        let o = termvel(&args);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
    let py = Command::new(root().join(".venv/bin/python"))
        .arg(root().join("tests/report_check.py"))
        .args([demo().as_path(), &csv, &parquet, &long])
        .output()
        .expect("the venv's python (scripts/setup.sh makes it)");
    assert!(py.status.success(), "{}", String::from_utf8_lossy(&py.stderr));
    let p: Value = serde_json::from_slice(&py.stdout).unwrap();
    let g = |k: &str| p[k].as_f64().unwrap_or_else(|| panic!("{k} in {p}"));

    // Peak speed: python-can's frames, decoded by hand, against the report
    // (which takes the peak over its 100 ms snapshots, so it may sit a
    // little below the highest single frame).
    let peak_kmh = f("peak_speed_mps") * 3.6;
    assert!(peak_kmh <= g("peak_kmh") + 0.01 && g("peak_kmh") - peak_kmh < 0.5, "peak {peak_kmh} vs {}", g("peak_kmh"));
    // Energy out of the battery: trapezoids of V·I over every frame (50 Hz)
    // against the report's over its snapshots: within 1 %.
    let e = f("battery_energy_out_j");
    assert!((e / g("energy_out_j") - 1.0).abs() < 0.01, "energy {e} vs {}", g("energy_out_j"));
    assert_eq!(f("soc_start"), g("soc_first"));
    assert_eq!(f("soc_end"), g("soc_last"));

    // The simulator's truth (config/demo-plan.toml [car]): drag area 0.90 m²,
    // derating time constant 17 s.
    let cda = r["estimate"]["cda_m2"].as_f64().unwrap();
    assert!((cda / 0.90 - 1.0).abs() < 0.02, "drag area {cda}");
    let tau = r["derating"]["tau_s"].as_f64().unwrap();
    assert!((tau / 17.0 - 1.0).abs() < 0.1, "derating time constant {tau}");
    // The measured floor sits below the law's 0.40: the deliverable power
    // also falls with the charge (the pack's voltage drops as it empties).
    let floor = r["derating"]["floor"].as_f64().unwrap();
    assert!((0.25..0.40).contains(&floor), "derating floor {floor}");
    assert!(r["derating"]["r2"].as_f64().unwrap() > 0.95);
    // The demo plan boosts from 1100 m and brakes at 5750 m.
    assert!((f("boost_start_m") - 1100.0).abs() < 25.0, "boost from {}", f("boost_start_m"));
    assert!((r["brake_start_m"].as_f64().unwrap() - 5750.0).abs() < 25.0);
    assert!(f("time_at_full_boost_s") > 0.9 * f("time_in_boost_s"), "the demo boosts at full throttle");
    // Data quality: both sources, their rates (CAN frames over the run;
    // GNSS at 10 Hz, three sentences each).
    let sources = r["sources"].as_array().unwrap();
    assert_eq!(sources.len(), 2);
    let gnss = sources.iter().find(|s| s["name"] == "gnss0").unwrap();
    assert!((gnss["rate_per_s"].as_f64().unwrap() - 30.0).abs() < 1.0, "{gnss}");
    // The demo's one fault, the weather message stopping for 2.5 s at 30 s.
    let stale = r["stale"].as_array().unwrap();
    let w = stale.iter().find(|s| s["what"] == "weather").expect("the weather gap");
    assert_eq!(w["periods"], 1);
    assert!((w["total_s"].as_f64().unwrap() - 2.5).abs() < 0.6, "{w}");
    assert!(r["alerts"].as_array().unwrap().iter().any(|a| a["key"] == "stale:weather" && a["what"] == "raise"));

    // The exports, as read back.
    assert_eq!(p["mismatches"], serde_json::json!([]), "CSV and Parquet agree cell for cell");
    assert_eq!(p["csv_rows"], p["parquet_rows"]);
    // 50 Hz over the run: one row per 20 ms of stream time.
    let rows = g("parquet_rows");
    assert!((rows - (f("duration_s") * 50.0).floor()).abs() <= 2.0, "{rows} rows over {} s", f("duration_s"));
    assert_eq!(p["t_ns_type"], "timestamp[ns, tz=UTC]");
    assert_eq!(p["speed_unit"], "m/s");
    assert_eq!(p["long_speed_rows"], p["pt_frames"], "every speed sample in the long form, one per frame");
    assert!(g("long_derived_rows") > 0.0);
}

#[test]
fn the_text_report_reads_as_a_page() {
    let out = termvel(&["report", "replays/demo.tvrec"]);
    assert!(out.status.success());
    let t = String::from_utf8(out.stdout).unwrap();
    for section in ["run\n", "boost and battery\n", "estimates\n", "alerts (", "data quality\n", "Advisory only"] {
        assert!(t.contains(section), "{section:?} in\n{t}");
    }
    assert!(t.contains("peak speed           363."), "{t}");
    assert!(t.contains("stale: weather"), "{t}");
    // Piped: no progress bar on stderr.
    assert!(!String::from_utf8_lossy(&out.stderr).contains('█'));
}

#[test]
fn two_runs_side_by_side() {
    let dir = tempfile::tempdir().unwrap();
    // The same car with a battery that derates to a lower floor.
    let b = rehearsed_variant(dir.path(), "weaker.tvrec", "derate_floor = 0.40", "derate_floor = 0.25");
    let j = report_json(&[&demo(), &b]);
    let (ra, rb) = (&j["runs"][0], &j["runs"][1]);
    let d = &j["difference"];
    let peak_a = ra["peak_speed_mps"].as_f64().unwrap();
    let peak_b = rb["peak_speed_mps"].as_f64().unwrap();
    assert!(peak_b < peak_a, "less power, lower peak: {peak_a} vs {peak_b}");
    assert!((d["peak_speed_mps"].as_f64().unwrap() - (peak_b - peak_a)).abs() < 1e-9);
    assert!(d["derating_floor"].as_f64().unwrap() < -0.05, "{d}");
    let plots = dir.path().join("plots");
    let out = termvel(&["report", "replays/demo.tvrec", b.to_str().unwrap(), "--plots", plots.to_str().unwrap()]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("termvel comparison") && text.contains("B − A"), "{text}");
    let svg = std::fs::read_to_string(plots.join("speed-distance.svg")).unwrap();
    assert!(svg.contains("A demo.tvrec") && svg.contains("B weaker.tvrec (dashed)"), "both runs in the legend");
    for stem in
        ["A-power-speed", "B-power-speed", "A-derating", "B-derating", "A-charge-temperature", "B-charge-temperature"]
    {
        assert!(plots.join(format!("{stem}.svg")).exists() && plots.join(format!("{stem}.png")).exists(), "{stem}");
    }
}

#[test]
fn plots_are_svg_and_png_and_say_what_their_lines_are() {
    let dir = tempfile::tempdir().unwrap();
    let out = termvel(&["report", "replays/demo.tvrec", "--plots", dir.path().to_str().unwrap()]);
    assert!(out.status.success());
    for (stem, words) in [
        ("speed-distance", &["speed over distance", "stop by", "latest braking point", "braking began", "target"][..]),
        ("power-speed", &["power against speed", "road load, fitted", "vehicle file", "available"][..]),
        ("derating", &["battery power over time in boost", "fit:", "rated"][..]),
        ("charge-temperature", &["state of charge", "pack temperature"][..]),
    ] {
        let svg = std::fs::read_to_string(dir.path().join(format!("{stem}.svg"))).unwrap();
        assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"), "{stem} is a whole SVG");
        for w in words {
            assert!(svg.contains(w), "{stem}.svg says {w:?}");
        }
        let png = std::fs::read(dir.path().join(format!("{stem}.png"))).unwrap();
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n", "{stem}.png is a PNG");
        // IHDR: width and height, big-endian, after the chunk header.
        let (w, h) =
            (u32::from_be_bytes(png[16..20].try_into().unwrap()), u32::from_be_bytes(png[20..24].try_into().unwrap()));
        assert_eq!((w, h), (1100, 650));
        // Not blank: some pixels are dark (lines and text).
        assert!(png.len() > 20_000, "{stem}.png has content");
    }
}

#[test]
fn a_torn_recording_reports_up_to_the_tear() {
    let dir = tempfile::tempdir().unwrap();
    let full = std::fs::read(demo()).unwrap();
    let cut = &full[..full.len() * 2 / 3];
    let cut = &cut[..cut.len() - 7]; // mid-line
    let torn = dir.path().join("torn.tvrec");
    std::fs::write(&torn, cut).unwrap();
    let out = termvel(&["report", torn.to_str().unwrap(), "--json"]);
    assert!(out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("torn"), "{err}");
    let j: Value = serde_json::from_slice(&out.stdout).unwrap();
    let r = &j["runs"][0];
    assert!(r["torn_tail_line"].as_u64().is_some());
    let d = r["duration_s"].as_f64().unwrap();
    assert!(d > 50.0 && d < 104.0, "up to the tear: {d} s");
}

#[test]
fn bad_inputs_to_report_and_export_say_what_and_where() {
    let out = termvel(&["report", "no/such/file.tvrec"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no/such/file.tvrec"));
    let out = termvel(&["export", "replays/demo.tvrec", "--to", "csv", "--out", "/tmp/x.csv", "--rate", "fast"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("expected a rate such as 50Hz"));
    let out = termvel(&["export", "replays/demo.tvrec", "--to", "csv", "--out", "/no/such/dir/x.csv"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("/no/such/dir/x.csv"));
}

#[test]
fn a_rehearsed_coast_in_a_headwind_gives_the_road_load_a_b_c_it_was_built_with() {
    // Issue 14, item 9: the report gives the coast-down road load in the
    // trade's form F = A + B·v + C·v² (SAE J2263; REFERENCES.md "Road load
    // and coast-down") with its uncertainties. The demo car coasts from
    // 2 km (throttle 0, no boost) to the brake point in a steady 4 m/s
    // headwind without gusts. The simulator's truth (sim/car.rs: drag on
    // the air speed, Crr(v) = c₀ + c₂·v²) expands to
    //   A = c₀·m·g + ½ρ·CdA·w², B = ρ·CdA·w, C = ½ρ·CdA + c₂·m·g
    // (expanding ½ρ·CdA·(v + w)²), and the fit must find each within 3 of
    // its standard deviations.
    let base = termvel::config::EMBEDDED_PLAN.1;
    let mut text = base.to_string();
    for (from, to) in [
        ("throttle = [[0, 1.0]]", "throttle = [[0, 1.0], [2000, 0.0]]"),
        ("headwind_mps = 1.4", "headwind_mps = 4.0"),
        ("gust_mps = 1.2", "gust_mps = 0.0"),
    ] {
        assert!(text.contains(from), "the demo plan has {from}");
        text = text.replace(from, to);
    }
    let plan = match termvel::config::validate_text("coast.toml", &text).parsed {
        Some(termvel::config::Parsed::Plan(p)) => p,
        _ => panic!("the coast plan is valid"),
    };
    let weather = plan.ambient.weather.expect("the demo plan has weather");
    let (t_c, p_pa, rh, w) = (weather.temp_c, weather.pressure_pa, weather.humidity, 4.0);
    let (cda, c0) = (plan.car.cda_m2.unwrap(), plan.car.crr0.unwrap());
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("coast.tvrec");
    std::fs::write(&path, crate::rehearsal::rehearse(plan).recording).unwrap();

    let veh = termvel::config::ConfigSet::embedded().vehicle;
    let rho = termvel::engine::physics::air::moist_air_density_cipm2007(t_c, p_pa, rh);
    let mg = veh.mass_kg * termvel::engine::physics::roadload::G_MPS2;
    let truth = [c0 * mg + 0.5 * rho * cda * w * w, rho * cda * w, 0.5 * rho * cda + veh.crr2_s2_m2 * mg];

    let j = report_json(&[&path]);
    let c = &j["runs"][0]["estimate"]["coast_curve"];
    assert!(c.is_object(), "a coast-down fit: {}", j["runs"][0]["estimate"]);
    let got = [
        ("A", c["a_n"].as_f64().unwrap(), c["a_sd_n"].as_f64().unwrap()),
        ("B", c["b_n_s_per_m"].as_f64().unwrap(), c["b_sd_n_s_per_m"].as_f64().unwrap()),
        ("C", c["c_n_s2_per_m2"].as_f64().unwrap(), c["c_sd_n_s2_per_m2"].as_f64().unwrap()),
    ];
    eprintln!("coast fit {got:?} against truth {truth:?}; {c}");
    for ((what, x, sd), truth) in got.into_iter().zip(truth) {
        assert!(sd > 0.0 && (x - truth).abs() <= 3.0 * sd, "{what}: {x} ± {sd} against the truth {truth}");
    }
    // B is the headwind's: clearly above zero (still air would give 0).
    assert!(got[1].1 > 3.0 * got[1].2, "B shows the headwind: {got:?}");

    // The text report shows it beside drag area and rolling resistance.
    let out = termvel(&["report", path.to_str().unwrap()]);
    let t = String::from_utf8(out.stdout).unwrap();
    assert!(t.contains("road load (coast)    F = A + B·v + C·v²: A "), "{t}");
}
