//! The report's plots, drawn with plotters as SVG and PNG (text through
//! ab_glyph with the DejaVu Sans font built in, so no system library or font
//! is needed). Every series is told apart by line style or marker and named
//! in a legend, so a plot reads the same printed in black and white.
//!
//! - `speed-distance`: speed over distance, the target, where braking began,
//!   the latest braking point at the peak and the stop-by line (two runs are
//!   overlaid, solid and dashed);
//! - `power-speed`: power demand (road load + inertia) and power available
//!   against speed, with the road-load curve from the fitted drag area and
//!   rolling resistance (and the vehicle file's, dashed);
//! - `derating`: battery power and deliverable power over time in boost, with
//!   the fitted derating curve;
//! - `charge-temperature`: state of charge and pack temperature over time.

use std::path::{Path, PathBuf};
use std::sync::Once;

use plotters::coord::Shift;
use plotters::coord::types::RangedCoordf64;
use plotters::element::DashedPathElement;
use plotters::prelude::*;

use super::{Run, Summary};
use crate::engine::physics::roadload::{RoadLoadInputs, road_load};
use crate::output_file::PendingFile;

const W: u32 = 1100;
const H: u32 = 650;
const FONT: &str = "sans-serif";
const GREY: RGBColor = RGBColor(110, 110, 110);
const DARK_BLUE: RGBColor = RGBColor(20, 60, 150);
const DARK_RED: RGBColor = RGBColor(160, 30, 30);

fn fonts() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        for style in [FontStyle::Normal, FontStyle::Bold] {
            // The font is valid: a test draws with it.
            let _ = plotters::style::register_font(FONT, style, dejavu::sans::regular());
        }
    });
}

/// Why the plots could not be written: the file (or folder) and what failed.
#[derive(Debug, thiserror::Error)]
pub enum PlotError {
    /// The folder for the plots could not be created.
    #[error("{}: {source}", dir.display())]
    CreateDir {
        /// The folder asked for.
        dir: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// A plot drawn whole could not be put in place (synced and renamed
    /// from its temporary name).
    #[error(transparent)]
    Output(#[from] crate::output_file::OutputError),
    /// Drawing or writing one plot file failed.
    #[error("{}: {what}: {source}", file.display())]
    Draw {
        /// The SVG or PNG file being written.
        file: PathBuf,
        /// The step that failed, in words ("drawing a series").
        what: &'static str,
        /// The drawing library's error. Boxed: its type depends on the
        /// backend (SVG or bitmap), and each plot is drawn with both.
        #[source]
        source: Box<dyn std::error::Error + Send + Sync>,
    },
}

/// A drawing step that failed, before the file it was drawing is known.
#[derive(Debug)]
struct DrawError {
    what: &'static str,
    source: Box<dyn std::error::Error + Send + Sync>,
}

impl DrawError {
    fn in_file(self, file: &Path) -> PlotError {
        PlotError::Draw { file: file.to_path_buf(), what: self.what, source: self.source }
    }
}

type Res = Result<(), DrawError>;

/// Names the step for a plotters error.
fn fail<E: std::error::Error + Send + Sync + 'static>(what: &'static str) -> impl FnOnce(E) -> DrawError {
    move |e| DrawError { what, source: Box::new(e) }
}

/// Range with a little room, never empty.
fn range(values: impl Iterator<Item = f64>, from_zero: bool) -> std::ops::Range<f64> {
    let (mut lo, mut hi) =
        values.filter(|v| v.is_finite()).fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
    if !lo.is_finite() {
        return 0.0..1.0;
    }
    if from_zero {
        lo = lo.min(0.0);
    }
    if hi - lo < 1e-9 {
        hi = lo + 1.0;
    }
    let pad = 0.05 * (hi - lo);
    (if from_zero && lo >= 0.0 { lo } else { lo - pad })..hi + pad
}

/// A chart in the plots' coordinates: f64 on both axes.
type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// The grid and the two axis titles (light lines left out: they blur in
/// black and white).
fn axes<DB: DrawingBackend>(chart: &mut Chart<'_, DB>, x: &str, y: &str) -> Res
where
    DB::ErrorType: 'static,
{
    chart.configure_mesh().x_desc(x).y_desc(y).light_line_style(WHITE.mix(0.0)).draw().map_err(fail("drawing the axes"))
}

/// The legend box, where the plot leaves room for it.
fn legend<'a, DB: DrawingBackend + 'a>(chart: &mut Chart<'a, DB>, at: SeriesLabelPosition) -> Res
where
    DB::ErrorType: 'static,
{
    chart
        .configure_series_labels()
        .position(at)
        .background_style(WHITE.mix(0.9))
        .border_style(BLACK)
        .label_font((FONT, 14))
        .draw()
        .map_err(fail("drawing the legend"))
}

fn speed_distance<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, runs: &[(&Run, &Summary)]) -> Res
where
    DB::ErrorType: 'static,
{
    area.fill(&WHITE).map_err(fail("filling the background"))?;
    let xs = range(runs.iter().flat_map(|(r, _)| r.rows.iter().map(|x| x.distance_m / 1000.0)), true);
    let top = runs.iter().map(|(_, s)| s.target_speed_mps * 3.6).fold(0.0, f64::max);
    let ys = range(
        runs.iter().flat_map(|(r, _)| r.rows.iter().filter_map(|x| x.speed_mps.map(|v| v * 3.6))).chain([top]),
        true,
    );
    let mut chart = ChartBuilder::on(area)
        .caption("speed over distance", (FONT, 24))
        .margin(14)
        .x_label_area_size(45)
        .y_label_area_size(65)
        .build_cartesian_2d(xs.clone(), ys.clone())
        .map_err(fail("laying out the chart"))?;
    axes(&mut chart, "distance, km", "speed, km/h")?;
    let styles = [BLACK.stroke_width(2), DARK_BLUE.stroke_width(2)];
    for (i, (run, _)) in runs.iter().enumerate() {
        let pts: Vec<(f64, f64)> =
            run.rows.iter().filter_map(|r| Some((r.distance_m / 1000.0, r.speed_mps? * 3.6))).collect();
        let label = if runs.len() > 1 { format!("{} {}", ["A", "B"][i], run.name()) } else { "speed".into() };
        let style = styles[i];
        if i == 0 {
            chart
                .draw_series(LineSeries::new(pts, style))
                .map_err(fail("drawing a series"))?
                .label(label)
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], style));
        } else {
            chart
                .draw_series(DashedLineSeries::new(pts, 10, 6, style))
                .map_err(fail("drawing a series"))?
                .label(format!("{label} (dashed)"))
                .legend(move |(x, y)| DashedPathElement::new(vec![(x, y), (x + 26, y)], 8, 5, style));
        }
    }
    let s = runs[0].1;
    let v_line = |x: f64| vec![(x, ys.start), (x, ys.end)];
    let target = s.target_speed_mps * 3.6;
    chart
        .draw_series(DashedLineSeries::new(vec![(xs.start, target), (xs.end, target)], 4, 4, GREY.stroke_width(1)))
        .map_err(fail("drawing a series"))?
        .label(format!("target {target:.0} km/h (dotted)"))
        .legend(|(x, y)| DashedPathElement::new(vec![(x, y), (x + 26, y)], 3, 3, GREY.stroke_width(1)));
    chart
        .draw_series(LineSeries::new(v_line(s.stop_by_m / 1000.0), DARK_RED.stroke_width(3)))
        .map_err(fail("drawing a series"))?
        .label("stop by (thick)")
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], DARK_RED.stroke_width(3)));
    if let Some(bp) = s.latest_brake_point_m {
        chart
            .draw_series(DashedLineSeries::new(v_line(bp / 1000.0), 12, 4, DARK_RED.stroke_width(1)))
            .map_err(fail("drawing a series"))?
            .label("latest braking point at the peak (long dashes)")
            .legend(|(x, y)| DashedPathElement::new(vec![(x, y), (x + 26, y)], 10, 4, DARK_RED.stroke_width(1)));
    }
    if let Some(b) = s.brake_start_m {
        chart
            .draw_series(std::iter::once(TriangleMarker::new(
                (b / 1000.0, ys.start + 0.04 * (ys.end - ys.start)),
                9,
                BLACK.filled(),
            )))
            .map_err(fail("drawing a series"))?
            .label("braking began (triangle)")
            .legend(|(x, y)| TriangleMarker::new((x + 8, y), 6, BLACK.filled()));
    }
    legend(&mut chart, SeriesLabelPosition::UpperLeft)?;
    Ok(())
}

fn power_speed<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, run: &Run, s: &Summary) -> Res
where
    DB::ErrorType: 'static,
{
    area.fill(&WHITE).map_err(fail("filling the background"))?;
    let veh = &run.config.vehicle;
    // Driving, not braking: the points where demand and availability mean
    // something against each other.
    let rows: Vec<_> = run
        .rows
        .iter()
        .filter(|r| {
            r.speed_mps.is_some_and(|v| v > 1.0)
                && r.throttle.is_some_and(|t| t >= 0.5)
                && !r.brake.is_some_and(|b| b > 0.05)
        })
        .collect();
    let vmax = rows.iter().filter_map(|r| r.speed_mps).fold(10.0, f64::max) * 1.05;
    let rho = if s.air_density_min_kg_m3.is_finite() {
        0.5 * (s.air_density_min_kg_m3 + s.air_density_max_kg_m3)
    } else {
        1.2
    };
    let curve = |cda: f64, crr: f64| -> Vec<(f64, f64)> {
        (0..=80)
            .map(|i| {
                let v = vmax * i as f64 / 80.0;
                let p = road_load(&RoadLoadInputs {
                    v_mps: v,
                    wind_mps: 0.0,
                    rho,
                    cda_m2: cda,
                    crr0: crr,
                    crr2_s2_m2: veh.crr2_s2_m2,
                    mass_kg: veh.mass_kg,
                    grade: 0.0,
                })
                .total_w;
                (v * 3.6, p / 1000.0)
            })
            .collect()
    };
    let fitted = curve(s.estimate.cda_m2, s.estimate.crr);
    let prior = curve(veh.cda_m2, veh.crr0);
    let demand: Vec<(f64, f64)> =
        rows.iter().filter_map(|r| Some((r.speed_mps? * 3.6, r.demand_w? / 1000.0))).collect();
    let avail: Vec<(f64, f64)> =
        rows.iter().filter_map(|r| Some((r.speed_mps? * 3.6, r.available_w? / 1000.0))).collect();
    let ys = range(demand.iter().chain(&avail).chain(&fitted).map(|p| p.1), true);
    let ys = ys.start.max(-0.25 * ys.end)..ys.end;
    let mut chart = ChartBuilder::on(area)
        .caption("power against speed", (FONT, 24))
        .margin(14)
        .x_label_area_size(45)
        .y_label_area_size(65)
        .build_cartesian_2d(0.0..vmax * 3.6, ys)
        .map_err(fail("laying out the chart"))?;
    axes(&mut chart, "speed, km/h", "power, kW")?;
    let every = (demand.len() / 1500).max(1);
    chart
        .draw_series(demand.iter().step_by(every).map(|p| Circle::new(*p, 2, GREY.stroke_width(1))))
        .map_err(fail("drawing a series"))?
        .label("demand at 50 % throttle or more: road load + inertia (circles)")
        .legend(|(x, y)| Circle::new((x + 8, y), 3, GREY.stroke_width(1)));
    chart
        .draw_series(avail.iter().step_by(every).map(|p| Cross::new(*p, 3, DARK_BLUE.stroke_width(1))))
        .map_err(fail("drawing a series"))?
        .label("available (crosses)")
        .legend(|(x, y)| Cross::new((x + 8, y), 3, DARK_BLUE.stroke_width(1)));
    let e = &s.estimate;
    chart
        .draw_series(LineSeries::new(fitted, BLACK.stroke_width(2)))
        .map_err(fail("drawing a series"))?
        .label(format!("road load, fitted: CdA {:.3} m², Crr {:.4}", e.cda_m2, e.crr))
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], BLACK.stroke_width(2)));
    chart
        .draw_series(DashedLineSeries::new(prior, 8, 5, BLACK.stroke_width(1)))
        .map_err(fail("drawing a series"))?
        .label(format!("road load, vehicle file: CdA {:.3} m², Crr {:.4} (dashed)", veh.cda_m2, veh.crr0))
        .legend(|(x, y)| DashedPathElement::new(vec![(x, y), (x + 26, y)], 7, 4, BLACK.stroke_width(1)));
    legend(&mut chart, SeriesLabelPosition::UpperLeft)?;
    Ok(())
}

fn derating<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, run: &Run, s: &Summary) -> Res
where
    DB::ErrorType: 'static,
{
    area.fill(&WHITE).map_err(fail("filling the background"))?;
    let rated = run.last.battery.rated_w;
    let boost: Vec<_> = run.rows.iter().filter(|r| r.boosting).collect();
    let power: Vec<(f64, f64)> =
        boost.iter().filter_map(|r| Some((r.time_in_boost_s, r.battery_power_w? / 1000.0))).collect();
    let deliver: Vec<(f64, f64)> =
        boost.iter().filter_map(|r| Some((r.time_in_boost_s, r.deliverable_w? / 1000.0))).collect();
    let tmax = boost.iter().map(|r| r.time_in_boost_s).fold(1.0, f64::max);
    let ys = range(power.iter().chain(&deliver).map(|p| p.1).chain([rated / 1000.0]), true);
    let mut chart = ChartBuilder::on(area)
        .caption("battery power over time in boost", (FONT, 24))
        .margin(14)
        .x_label_area_size(45)
        .y_label_area_size(65)
        .build_cartesian_2d(0.0..tmax * 1.02, ys)
        .map_err(fail("laying out the chart"))?;
    axes(&mut chart, "time in boost, s", "power, kW")?;
    chart
        .draw_series(power.iter().map(|p| Circle::new(*p, 2, GREY.stroke_width(1))))
        .map_err(fail("drawing a series"))?
        .label("battery power (circles)")
        .legend(|(x, y)| Circle::new((x + 8, y), 3, GREY.stroke_width(1)));
    chart
        .draw_series(deliver.iter().map(|p| Cross::new(*p, 3, DARK_BLUE.stroke_width(1))))
        .map_err(fail("drawing a series"))?
        .label("deliverable now (crosses)")
        .legend(|(x, y)| Cross::new((x + 8, y), 3, DARK_BLUE.stroke_width(1)));
    chart
        .draw_series(DashedLineSeries::new(
            vec![(0.0, rated / 1000.0), (tmax * 1.02, rated / 1000.0)],
            4,
            4,
            GREY.stroke_width(1),
        ))
        .map_err(fail("drawing a series"))?
        .label(format!("rated {:.0} kW (dotted)", rated / 1000.0))
        .legend(|(x, y)| DashedPathElement::new(vec![(x, y), (x + 26, y)], 3, 3, GREY.stroke_width(1)));
    if let Some(f) = run.last.battery.fit {
        let fit: Vec<(f64, f64)> =
            (0..=100).map(|i| tmax * 1.02 * i as f64 / 100.0).map(|t| (t, rated * f.ratio_at(t) / 1000.0)).collect();
        let d = s.derating.expect("the summary has the same fit");
        chart
            .draw_series(LineSeries::new(fit, BLACK.stroke_width(2)))
            .map_err(fail("drawing a series"))?
            .label(format!("fit: {:.3} + {:.3}·e^(−t/{:.1} s) of rated, R² {:.3}", d.floor, d.amplitude, d.tau_s, d.r2))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], BLACK.stroke_width(2)));
    }
    legend(&mut chart, SeriesLabelPosition::LowerLeft)?;
    Ok(())
}

fn charge_temperature<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, run: &Run) -> Res
where
    DB::ErrorType: 'static,
{
    area.fill(&WHITE).map_err(fail("filling the background"))?;
    let (upper, lower) = area.split_vertically(H / 2);
    let tmax = run.rows.last().map_or(1.0, |r| r.t_s.max(1.0));
    let soc: Vec<(f64, f64)> = run.rows.iter().filter_map(|r| Some((r.t_s, r.soc? * 100.0))).collect();
    let temp: Vec<(f64, f64)> = run.rows.iter().filter_map(|r| Some((r.t_s, r.pack_temp_c?))).collect();
    let mut c = ChartBuilder::on(&upper)
        .caption("state of charge and pack temperature", (FONT, 24))
        .margin(14)
        .x_label_area_size(30)
        .y_label_area_size(65)
        .build_cartesian_2d(0.0..tmax, range(soc.iter().map(|p| p.1), false))
        .map_err(fail("laying out the chart"))?;
    c.configure_mesh()
        .y_desc("state of charge, %")
        .light_line_style(WHITE.mix(0.0))
        .draw()
        .map_err(fail("drawing the axes"))?;
    c.draw_series(LineSeries::new(soc, BLACK.stroke_width(2))).map_err(fail("drawing a series"))?;
    let mut c = ChartBuilder::on(&lower)
        .margin(14)
        .x_label_area_size(45)
        .y_label_area_size(65)
        .build_cartesian_2d(0.0..tmax, range(temp.iter().map(|p| p.1), false))
        .map_err(fail("laying out the chart"))?;
    axes(&mut c, "time from the start of the recording, s", "pack temperature, °C")?;
    c.draw_series(LineSeries::new(temp, BLACK.stroke_width(2))).map_err(fail("drawing a series"))?;
    Ok(())
}

/// Draws one plot to `<stem>.svg` and `<stem>.png` in `dir`, each to a
/// temporary name first and renamed when whole (a failed write leaves no
/// partial file: the temporary is removed when `pending` drops).
macro_rules! render {
    ($dir:expr, $stem:expr, $written:expr, |$area:ident| $body:expr) => {{
        let svg = $dir.join(format!("{}.svg", $stem));
        {
            let pending = PendingFile::beside(&svg);
            {
                let root = SVGBackend::new(pending.tmp(), (W, H)).into_drawing_area();
                let $area = &root;
                $body.map_err(|e| e.in_file(&svg))?;
                root.present().map_err(fail("writing the file")).map_err(|e| e.in_file(&svg))?;
            }
            pending.commit()?;
        }
        $written.push(svg);
        let png = $dir.join(format!("{}.png", $stem));
        {
            let pending = PendingFile::beside(&png);
            {
                let root = BitMapBackend::new(pending.tmp(), (W, H)).into_drawing_area();
                let $area = &root;
                $body.map_err(|e| e.in_file(&png))?;
                root.present().map_err(fail("writing the file")).map_err(|e| e.in_file(&png))?;
            }
            pending.commit()?;
        }
        $written.push(png);
    }};
}

/// Draws the plots of one run, or of two (speed over distance overlaid, the
/// others per run, named `A-…` and `B-…`), into `dir`; the files written.
pub fn write(dir: &Path, runs: &[(&Run, &Summary)]) -> Result<Vec<PathBuf>, PlotError> {
    fonts();
    std::fs::create_dir_all(dir).map_err(|source| PlotError::CreateDir { dir: dir.to_path_buf(), source })?;
    let mut written = Vec::new();
    render!(dir, "speed-distance", written, |area| speed_distance(area, runs));
    for (i, (run, s)) in runs.iter().enumerate() {
        let prefix = if runs.len() > 1 { ["A-", "B-"][i] } else { "" };
        render!(dir, format!("{prefix}power-speed"), written, |area| power_speed(area, run, s));
        render!(dir, format!("{prefix}derating"), written, |area| derating(area, run, s));
        render!(dir, format!("{prefix}charge-temperature"), written, |area| charge_temperature(area, run));
    }
    Ok(written)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn short_run(dir: &Path) -> Run {
        let log = dir.join("short.log");
        std::fs::write(&log, b"(1.000000) can0 123#00\n(1.500000) can0 123#01\n").unwrap();
        Run::read(&log, &[], &mut |_, _| {}).unwrap()
    }

    #[test]
    fn errors_name_the_file_and_the_step() {
        let dir = tempfile::tempdir().unwrap();
        let run = short_run(dir.path());
        let summary = Summary::of(&run);

        // The folder cannot be made: a file is in the way.
        let blocked = dir.path().join("short.log").join("plots");
        let e = write(&blocked, &[(&run, &summary)]).unwrap_err();
        assert!(matches!(&e, PlotError::CreateDir { dir, .. } if dir == &blocked), "{e:?}");
        assert!(e.to_string().starts_with(&format!("{}: ", blocked.display())), "{e}");

        // The first file cannot be put in place: a folder of its name is
        // there. Its temporary is not left behind.
        let out = dir.path().join("plots");
        let svg = out.join("speed-distance.svg");
        std::fs::create_dir_all(&svg).unwrap();
        let e = write(&out, &[(&run, &summary)]).unwrap_err();
        assert!(matches!(&e, PlotError::Output(o) if o.path == svg), "{e:?}");
        assert!(e.to_string().starts_with(&format!("{}: ", svg.display())), "{e}");
        assert!(std::error::Error::source(&e).is_some(), "the I/O error is kept as the source");
        assert_eq!(std::fs::read_dir(&out).unwrap().count(), 1, "only the folder in the way");
    }

    #[test]
    fn all_plots_of_one_run_are_written() {
        let dir = tempfile::tempdir().unwrap();
        let run = short_run(dir.path());
        let summary = Summary::of(&run);
        let files = write(&dir.path().join("plots"), &[(&run, &summary)]).unwrap();
        assert_eq!(files.len(), 8, "four plots, SVG and PNG each: {files:?}");
        assert!(files.iter().all(|f| std::fs::metadata(f).is_ok_and(|m| m.len() > 0)));
    }
}
