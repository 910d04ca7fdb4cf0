//! The envelope's plots, SVG drawn with plotters as the report's are (text
//! through ab_glyph with the DejaVu Sans font built in), each series told
//! apart by line style and named in a legend so they read in black and
//! white:
//!
//! - `envelope-power-speed`: road load and the power at the wheels of each
//!   power case against speed, with the target;
//! - `envelope-speed-time` and `envelope-speed-distance`: a standing start
//!   under each power case (constant in time: no derating), with the target
//!   and, on the distance plot, the braking point.
//!
//! Each file is written under a temporary name in the same directory and
//! renamed, so a reader never sees half a plot.

use std::path::{Path, PathBuf};
use std::sync::Once;

use plotters::element::DashedPathElement;
use plotters::prelude::*;

use super::{Case, Envelope, Model};
use crate::config::Vehicle;

const W: u32 = 1100;
const H: u32 = 650;
const FONT: &str = "sans-serif";
const GREY: RGBColor = RGBColor(110, 110, 110);
const DARK_BLUE: RGBColor = RGBColor(20, 60, 150);
const DARK_RED: RGBColor = RGBColor(160, 30, 30);

/// Why a plot could not be written.
#[derive(Debug, thiserror::Error)]
pub enum PlotError {
    /// The directory or a file could not be made, written or renamed.
    #[error("{path}: {source}")]
    Io { path: PathBuf, source: std::io::Error },
    /// plotters failed to draw.
    #[error("plot {name}: {message}")]
    Draw { name: String, message: String },
}

fn fonts() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        for style in [FontStyle::Normal, FontStyle::Bold] {
            // The same built-in font the report registers; registering twice replaces it.
            let _ = plotters::style::register_font(FONT, style, dejavu::sans::regular());
        }
    });
}

/// One line style per power case, and one for the road load.
fn case_style(k: usize) -> (ShapeStyle, Option<(u32, u32)>) {
    match k {
        0 => (BLACK.stroke_width(2), None),
        1 => (DARK_BLUE.stroke_width(2), Some((10, 6))),
        _ => (DARK_RED.stroke_width(2), Some((3, 4))),
    }
}

type Chart<'a> = ChartContext<
    'a,
    SVGBackend<'a>,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

fn draw_line(chart: &mut Chart<'_>, pts: Vec<(f64, f64)>, k: usize, label: String) -> Result<(), String> {
    let (style, dash) = case_style(k);
    let e = |e: plotters::drawing::DrawingAreaErrorKind<std::io::Error>| format!("{e:?}");
    match dash {
        None => {
            chart
                .draw_series(LineSeries::new(pts, style))
                .map_err(e)?
                .label(label)
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 26, y)], style));
        }
        Some((on, off)) => {
            chart
                .draw_series(DashedLineSeries::new(pts, on, off, style))
                .map_err(e)?
                .label(label)
                .legend(move |(x, y)| DashedPathElement::new(vec![(x, y), (x + 26, y)], on, off, style));
        }
    }
    Ok(())
}

/// Draws one SVG into `path` via a temporary file.
fn svg(
    path: &Path,
    draw: impl FnOnce(&DrawingArea<SVGBackend<'_>, plotters::coord::Shift>) -> Result<(), String>,
) -> Result<(), PlotError> {
    // Written to a temporary beside it and renamed when whole: a failed
    // write leaves no partial file (the temporary goes when `pending` drops).
    let pending = crate::output_file::PendingFile::beside(path);
    // The error names the file, and says what failed in words.
    let fail = |message: String| PlotError::Draw { name: path.display().to_string(), message };
    {
        let root = SVGBackend::new(pending.tmp(), (W, H)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| fail(format!("{e}")))?;
        draw(&root).map_err(fail)?;
        root.present().map_err(|e| fail(format!("writing the file: {e}")))?;
    }
    pending.commit().map(|_| ()).map_err(|e| PlotError::Io { path: path.into(), source: e.source })
}

/// Writes the three plots into `dir`; the files written.
pub fn write(dir: &Path, e: &Envelope, veh: &Vehicle) -> Result<Vec<PathBuf>, PlotError> {
    fonts();
    std::fs::create_dir_all(dir).map_err(|source| PlotError::Io { path: dir.into(), source })?;
    let model = Model::new(veh, &e.inputs);
    let target_kmh = e.inputs.target_mps * 3.6;
    let err = |e: plotters::drawing::DrawingAreaErrorKind<std::io::Error>| format!("{e}");
    let mut written = Vec::new();

    // Power against speed.
    let top_mps = e.rows.last().map_or(e.inputs.target_mps, |r| r.speed_mps);
    let speeds: Vec<f64> = (0..=200).map(|i| top_mps * i as f64 / 200.0).collect();
    let load: Vec<(f64, f64)> = speeds.iter().map(|&v| (v * 3.6, model.road_load(v).total_w / 1000.0)).collect();
    let cases: Vec<Vec<(f64, f64)>> = Case::ALL
        .iter()
        .map(|&c| speeds.iter().map(|&v| (v * 3.6, model.wheel_power_w(c, v) / 1000.0)).collect())
        .collect();
    let p_max = cases.iter().flatten().chain(&load).map(|p| p.1).fold(1.0, f64::max) * 1.08;
    let path = dir.join("envelope-power-speed.svg");
    svg(&path, |area| {
        let mut chart = ChartBuilder::on(area)
            .caption("power at the wheels against speed", (FONT, 24))
            .margin(14)
            .x_label_area_size(45)
            .y_label_area_size(65)
            .build_cartesian_2d(0.0..top_mps * 3.6 * 1.02, 0.0..p_max)
            .map_err(err)?;
        chart
            .configure_mesh()
            .x_desc("speed, km/h")
            .y_desc("power, kW")
            .light_line_style(WHITE.mix(0.0))
            .draw()
            .map_err(err)?;
        chart
            .draw_series(LineSeries::new(load, GREY.stroke_width(4)))
            .map_err(err)?
            .label("road load (thick grey)")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 26, y)], GREY.stroke_width(4)));
        for (k, (c, pts)) in Case::ALL.iter().zip(cases).enumerate() {
            draw_line(&mut chart, pts, k, format!("{} ({})", c.label(), ["solid", "dashed", "dotted"][k]))?;
        }
        chart
            .draw_series(LineSeries::new(vec![(target_kmh, 0.0), (target_kmh, p_max)], GREY.stroke_width(1)))
            .map_err(err)?
            .label(format!("target {target_kmh:.0} km/h (thin)"))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 26, y)], GREY.stroke_width(1)));
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK)
            .label_font((FONT, 14))
            .draw()
            .map_err(err)
    })?;
    written.push(path);

    // Standing starts against time and distance.
    let runs: Vec<Vec<(f64, f64, f64)>> = Case::ALL.iter().map(|&c| model.standing_start(c, 1.0 / 3.6)).collect();
    let v_max = runs.iter().flatten().map(|p| p.2 * 3.6).fold(target_kmh, f64::max) * 1.05;
    let brake_km = e.run.brake_at_m / 1000.0;
    for (stem, axis, pick) in [
        ("envelope-speed-time", "time from the launch, s", 0usize),
        ("envelope-speed-distance", "distance from the start line, km", 1),
    ] {
        let coord = |p: &(f64, f64, f64)| if pick == 0 { p.0 } else { p.1 / 1000.0 };
        // The axis ends where the slowest case is at 99.5 % of its terminal
        // speed, or at the braking point's distance, whichever is further.
        let x_max = runs.iter().flatten().map(coord).fold(if pick == 1 { brake_km } else { 1.0 }, f64::max) * 1.02;
        let path = dir.join(format!("{stem}.svg"));
        svg(&path, |area| {
            let mut chart = ChartBuilder::on(area)
                .caption(
                    format!(
                        "speed against {} from a standing start, each power case held",
                        if pick == 0 { "time" } else { "distance" }
                    ),
                    (FONT, 22),
                )
                .margin(14)
                .x_label_area_size(45)
                .y_label_area_size(65)
                .build_cartesian_2d(0.0..x_max, 0.0..v_max)
                .map_err(err)?;
            chart
                .configure_mesh()
                .x_desc(axis)
                .y_desc("speed, km/h")
                .light_line_style(WHITE.mix(0.0))
                .draw()
                .map_err(err)?;
            for (k, (c, run)) in Case::ALL.iter().zip(&runs).enumerate() {
                let pts = run.iter().map(|p| (coord(p), p.2 * 3.6)).collect();
                draw_line(&mut chart, pts, k, format!("{} ({})", c.label(), ["solid", "dashed", "dotted"][k]))?;
            }
            chart
                .draw_series(LineSeries::new(vec![(0.0, target_kmh), (x_max, target_kmh)], GREY.stroke_width(1)))
                .map_err(err)?
                .label(format!("target {target_kmh:.0} km/h (thin)"))
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 26, y)], GREY.stroke_width(1)));
            if pick == 1 {
                chart
                    .draw_series(LineSeries::new(vec![(brake_km, 0.0), (brake_km, v_max)], DARK_RED.stroke_width(3)))
                    .map_err(err)?
                    .label(format!("braking point {:.0} m (thick)", e.run.brake_at_m))
                    .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 26, y)], DARK_RED.stroke_width(3)));
            }
            chart
                .configure_series_labels()
                .position(SeriesLabelPosition::LowerRight)
                .background_style(WHITE.mix(0.9))
                .border_style(BLACK)
                .label_font((FONT, 14))
                .draw()
                .map_err(err)
        })?;
        written.push(path);
    }
    Ok(written)
}
