//! Plots of the output tables, drawn with `plotters` as SVG or PNG: the angular distribution
//! with its fits and pulls, the ratio to Rutherford, a run's energy spectrum with its gates
//! and its ΔE–E histogram, run health, and an optical fit's landscape of minima.
//! Everything drawn is read from the tables `reduce` and `fit` write, so a plot never
//! re-reduces. The drawing code lives here only; one file per kind of plot.
//!
//! The output is byte-deterministic: pixel coordinates are integers, numbers in labels are
//! formatted with a fixed number of digits, and nothing records the time.

mod angular;
mod health;
mod landscape;
mod pid;
mod ratio;
mod spectrum;

use std::fmt::Display;
use std::path::Path;

use plotters::coord::ranged1d::ValueFormatter;
use plotters::prelude::*;
use polars::prelude::*;

pub use angular::{angular_distribution, find_fits};
pub use health::{describe as describe_outliers, outliers, run_figures, run_health, HealthRun, Outlier, RunFigures};
pub use landscape::{draw_minima, landscape, minima_of};
pub use pid::pid;
pub use ratio::ratio_rutherford;
pub use spectrum::spectrum;

use crate::error::Diagnostic;
use crate::tables::write_atomic;

/// What to draw.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Kind {
    /// dσ/dΩ_cm versus θ_cm (log axis) from angular_distribution.* with the fitted curves
    /// and a pull panel; one panel per state.
    AngularDistribution,
    /// The ratio to Rutherford versus θ_cm (linear axis) from cross_sections.*.
    RatioRutherford,
    /// A telescope's ΔE–E histogram (shade by log counts) with its particle-identification
    /// polygon, from a list-mode run's pid.parquet.
    Pid,
    /// Charge, live fraction, (with `--detector`) net counts per µC and the monitor over
    /// absolute luminosity versus run, from a `batch` output folder's catalogue, with the
    /// runs far from the median marked.
    RunHealth,
    /// χ² of every distinct minimum of an optical-model fit against its real depth and its
    /// real volume integral per nucleon pair, from a fit folder or its fit.json.
    FitLandscape,
    /// One detector's energy spectrum (log counts) from a run's spectra.parquet, with each
    /// state's window and side bands shaded and the net counts printed.
    Spectrum,
}

/// Page size in pixels (SVG user units): 1 px = 1/96 in, so 960 × 640 is 25 × 17 cm.
pub const PAGE_PX: (u32, u32) = (960, 640);
/// The one font family: generic, so every machine has it.
pub const FONT: &str = "sans-serif";
/// Axes, ticks, text and data markers.
pub const INK: RGBColor = RGBColor(0x26, 0x2a, 0x33);
/// Statistical error bars.
pub const STAT_BAR: RGBColor = RGBColor(0x26, 0x2a, 0x33);
/// Total error bars (stat ⊕ sys), drawn behind the statistical ones.
pub const TOTAL_BAR: RGBColor = RGBColor(0x8c, 0x93, 0x9e);
/// Reference lines (pull 0, ratio 1).
pub const REFERENCE: RGBColor = RGBColor(0xb8, 0xbd, 0xc6);
/// Curves and states, in order: deep teal, brick, olive, plum, slate blue.
pub const SERIES: [RGBColor; 5] = [
    RGBColor(0x1f, 0x6e, 0x68),
    RGBColor(0xa3, 0x47, 0x2f),
    RGBColor(0x7a, 0x7a, 0x1e),
    RGBColor(0x6b, 0x4a, 0x7d),
    RGBColor(0x3d, 0x5a, 0x8a),
];

/// What a plot is written as: SVG (default) or PNG (by the output's file name).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Scalable vector graphics, text.
    Svg,
    /// A PNG image of [`PAGE_PX`] pixels.
    Png,
}

impl Format {
    /// PNG for a file name ending in `.png` (any case), SVG otherwise.
    pub fn of(path: &Path) -> Format {
        match path.extension().and_then(|e| e.to_str()) {
            Some(e) if e.eq_ignore_ascii_case("png") => Format::Png,
            _ => Format::Svg,
        }
    }
}

/// The font every plot writes with, embedded so that a PNG looks the same on any machine:
/// DejaVu Sans (Bitstream Vera licence, `pipeline/fonts/DejaVuSans.LICENSE`). SVG files
/// name the generic family `sans-serif`; the font only measures their text.
const FONT_BYTES: &[u8] = include_bytes!("../../fonts/DejaVuSans.ttf");

/// Register the embedded font under [`FONT`] once per process.
fn register_font() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| {
        // The embedded file is a valid TrueType font; a failure would only leave text out.
        let _ = plotters::style::register_font(FONT, FontStyle::Normal, FONT_BYTES);
    });
}

/// A page being drawn: SVG text, or RGB pixels for a PNG.
enum Page {
    Svg(String),
    Png(Vec<u8>),
}

impl Page {
    fn new(format: Format) -> Page {
        register_font();
        match format {
            Format::Svg => Page::Svg(String::new()),
            Format::Png => Page::Png(vec![255; PAGE_PX.0 as usize * PAGE_PX.1 as usize * 3]),
        }
    }

    /// The file's bytes: the SVG text, or the pixels encoded as PNG.
    fn finish(self) -> Result<Vec<u8>, String> {
        match self {
            Page::Svg(text) => Ok(text.into_bytes()),
            Page::Png(pixels) => {
                use image::ImageEncoder as _;
                let mut png = Vec::new();
                image::codecs::png::PngEncoder::new(&mut png)
                    .write_image(&pixels, PAGE_PX.0, PAGE_PX.1, image::ExtendedColorType::Rgb8)
                    .map_err(|e| format!("cannot encode the PNG: {e}"))?;
                Ok(png)
            }
        }
    }
}

/// Draw `$body` on the drawing area `$root` of `$page`, whichever backend the page has
/// (the body is compiled once per backend).
macro_rules! on_page {
    ($page:expr, $root:ident, $body:block) => {
        match &mut $page {
            Page::Svg(text) => {
                let $root = SVGBackend::with_string(text, PAGE_PX).into_drawing_area();
                $body
            }
            Page::Png(pixels) => {
                let $root = BitMapBackend::with_buffer(pixels, PAGE_PX).into_drawing_area();
                $body
            }
        }
    };
}
use on_page;

/// The colour of series `i`.
fn series_colour(i: usize) -> RGBColor {
    SERIES[i % SERIES.len()]
}

/// A failure while drawing, as text (the backend's error types differ per area).
fn drawing<E: Display>(e: E) -> String {
    format!("cannot draw the plot: {e}")
}

/// Draw `kind` from `input` into the file `out` (PNG when its name ends in `.png`, SVG
/// otherwise); `fits` is a fit folder (or a folder
/// of them) for the angular distribution, `detector` the spectrum's detector (or the
/// run-health counts' one), `outlier_sigmas` the run-health outlier distance.
///
/// # Errors
/// An unreadable input, a missing column, or an unwritable output, naming the file.
pub fn draw(
    kind: Kind,
    input: &Path,
    out: &Path,
    fits: Option<&Path>,
    detector: Option<&str>,
    outlier_sigmas: f64,
) -> Result<(), Diagnostic> {
    let format = Format::of(out);
    let bytes = match kind {
        Kind::AngularDistribution => {
            // A `reduce` output folder stands for its combined table.
            let table = if input.is_dir() {
                input.join(crate::layout::ANGULAR_DISTRIBUTION_PARQUET)
            } else {
                input.to_path_buf()
            };
            let fits = match fits {
                Some(f) => find_fits(f)?,
                None => table
                    .parent()
                    .map(|d| d.join(crate::layout::FITS_DIR))
                    .filter(|d| d.is_dir())
                    .map_or_else(|| Ok(Vec::new()), |d| find_fits(&d))?,
            };
            angular_distribution(&table, &fits, format)?
        }
        Kind::RatioRutherford => ratio_rutherford(input, format)?,
        Kind::Spectrum => spectrum(input, detector, format)?,
        Kind::FitLandscape => landscape(input, format)?,
        Kind::Pid => pid(input, detector, format)?,
        Kind::RunHealth => {
            if !(outlier_sigmas.is_finite() && outlier_sigmas > 0.0) {
                return Err(Diagnostic::new(
                    input,
                    "--outlier-sigmas",
                    format!("found {outlier_sigmas}, expected a number of standard deviations above 0, e.g. 3"),
                ));
            }
            let runs = crate::report::health_of_batch(input, detector)?;
            run_health(&runs, outlier_sigmas, format)?.0
        }
    };
    write_plot(out, &bytes)
}

/// Write a plot atomically.
fn write_plot(out: &Path, bytes: &[u8]) -> Result<(), Diagnostic> {
    write_atomic(out, bytes).map_err(|e| Diagnostic::new(out, "", format!("cannot write the plot: {e}")))
}

/// Read a table, naming the file on failure.
fn read(path: &Path) -> Result<DataFrame, Diagnostic> {
    crate::tables::read_table(path).map_err(|e| Diagnostic::new(path, "", e.to_string()))
}

/// Column `name` of `table` cast to `to`, or a diagnostic naming the file and the column.
fn column(table: &DataFrame, name: &str, file: &Path, to: &DataType) -> Result<Column, Diagnostic> {
    let key = format!("column `{name}`");
    let column = table.column(name).map_err(|_| {
        Diagnostic::new(file, key.clone(), "not found; this plot needs it")
            .with_help("give a table written by xsflow reduce or fit (see `xsflow schema`)")
    })?;
    column.cast(to).map_err(|e| Diagnostic::new(file, key, format!("expected {to}: {e}")))
}

/// A column as numbers (empty cells as `None`), or a diagnostic naming the file and column.
fn optional_floats(table: &DataFrame, name: &str, file: &Path) -> Result<Vec<Option<f64>>, Diagnostic> {
    let cast = column(table, name, file, &DataType::Float64)?;
    let values =
        cast.f64().map_err(|e| Diagnostic::new(file, format!("column `{name}`"), format!("expected numbers: {e}")))?;
    Ok(values.iter().collect())
}

/// A column of numbers with no empty cell.
fn floats(table: &DataFrame, name: &str, file: &Path) -> Result<Vec<f64>, Diagnostic> {
    optional_floats(table, name, file)?
        .into_iter()
        .enumerate()
        .map(|(i, v)| {
            v.filter(|x| x.is_finite()).ok_or_else(|| {
                Diagnostic::new(
                    file,
                    format!("data row {}, column `{name}`", i + 1),
                    "found an empty or non-finite cell, expected a number",
                )
            })
        })
        .collect()
}

/// A column as text.
fn strings(table: &DataFrame, name: &str, file: &Path) -> Result<Vec<String>, Diagnostic> {
    let cast = column(table, name, file, &DataType::String)?;
    let values =
        cast.str().map_err(|e| Diagnostic::new(file, format!("column `{name}`"), format!("expected text: {e}")))?;
    Ok(values.iter().map(|v| v.unwrap_or("").to_string()).collect())
}

/// The CM cross sections of a reduced or combined table, row by row.
struct CmColumns {
    state: Vec<String>,
    theta_cm_deg: Vec<f64>,
    dsdo_cm_mb_sr: Vec<f64>,
    stat_err_mb_sr: Vec<f64>,
}

/// Read a table and its CM cross-section columns; the table is returned for the others.
fn cm_columns(file: &Path) -> Result<(DataFrame, CmColumns), Diagnostic> {
    let table = read(file)?;
    let columns = CmColumns {
        state: strings(&table, "state", file)?,
        theta_cm_deg: floats(&table, "theta_cm_deg", file)?,
        dsdo_cm_mb_sr: floats(&table, "dsdo_cm_mb_sr", file)?,
        stat_err_mb_sr: floats(&table, "stat_err_mb_sr", file)?,
    };
    Ok((table, columns))
}

/// The distinct values of `keys` in order of first appearance.
pub(crate) fn distinct(keys: &[String]) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for k in keys {
        if !out.contains(k) {
            out.push(k.clone());
        }
    }
    out
}

/// A tick label with a fixed form: up to 4 significant digits, no exponent between 1e-3 and
/// 1e5, trailing zeros removed, so that the same axis gives the same bytes everywhere.
pub fn tick_label(v: f64) -> String {
    fixed_form(v, 4, 0)
}

/// A number in the fixed form of [`tick_label`] with up to `digits` significant digits
/// (and as many in the mantissa outside 1e-3..1e5), for tables.
pub fn tick_label_digits(v: f64, digits: usize) -> String {
    let digits = digits.max(1);
    fixed_form(v, digits, digits - 1)
}

/// Up to `digits` significant digits without exponent in 1e-3..1e5, trailing zeros
/// removed; outside, an exponent with `exponent_decimals` decimals.
fn fixed_form(v: f64, digits: usize, exponent_decimals: usize) -> String {
    let a = v.abs();
    if a != 0.0 && !(1e-3..1e5).contains(&a) {
        return format!("{v:.exponent_decimals$e}");
    }
    let decimals = if a == 0.0 { 0 } else { (digits as i32 - 1 - a.log10().floor() as i32).clamp(0, 6) as usize };
    let s = format!("{v:.decimals$}");
    let s = if s.contains('.') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s };
    if s == "-0" {
        "0".into()
    } else {
        s
    }
}

/// An axis range around `values` with `pad` of the span added on each side (a unit span
/// when the values are all equal, `fallback` when there are none).
fn padded(values: impl Iterator<Item = f64>, pad: f64, fallback: (f64, f64)) -> (f64, f64) {
    let (lo, hi) =
        values.filter(|v| v.is_finite()).fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| (l.min(v), h.max(v)));
    if !lo.is_finite() {
        return fallback;
    }
    let span = if hi > lo { hi - lo } else { 1.0 };
    (lo - pad * span, hi + pad * span)
}

/// A page that only says why there is nothing to draw.
fn empty_page(message: &str, format: Format) -> Result<Vec<u8>, Diagnostic> {
    let fail = |e: String| Diagnostic::new(Path::new(""), "", e);
    let mut page = Page::new(format);
    on_page!(page, root, {
        root.fill(&WHITE).map_err(drawing).map_err(fail)?;
        let style = TextStyle::from((FONT, 20).into_font()).color(&INK).pos(plotters::style::text_anchor::Pos::new(
            plotters::style::text_anchor::HPos::Center,
            plotters::style::text_anchor::VPos::Center,
        ));
        root.draw(&Text::new(message.to_string(), (PAGE_PX.0 as i32 / 2, PAGE_PX.1 as i32 / 2), style))
            .map_err(drawing)
            .map_err(fail)?;
        root.present().map_err(drawing).map_err(fail)?;
    });
    page.finish().map_err(fail)
}

/// Thin axes with ticks and no grid, tick labels in the fixed form of [`tick_label`], and
/// the axis titles (with their units); `y_labels` is the most tick labels on the y axis.
fn axes<'a, DB, X, Y>(
    chart: &mut ChartContext<'a, DB, Cartesian2d<X, Y>>,
    x_desc: Option<&str>,
    y_desc: &str,
    y_labels: usize,
) -> Result<(), String>
where
    DB: DrawingBackend + 'a,
    X: Ranged<ValueType = f64> + ValueFormatter<f64>,
    Y: Ranged<ValueType = f64> + ValueFormatter<f64>,
{
    let formatter = |v: &f64| tick_label(*v);
    let mut mesh = chart.configure_mesh();
    mesh.disable_mesh()
        .axis_style(INK.stroke_width(1))
        .label_style((FONT, 15).into_font().color(&INK))
        .x_label_formatter(&formatter)
        .y_label_formatter(&formatter)
        .y_labels(y_labels)
        .y_desc(y_desc);
    if let Some(d) = x_desc {
        mesh.x_desc(d);
    }
    mesh.draw().map_err(drawing)
}

/// The legend of a chart's labelled series: a white box with a thin border.
fn legend<'a, DB: DrawingBackend + 'a, CT: plotters::coord::CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
    position: SeriesLabelPosition,
    font_px: u32,
) -> Result<(), String> {
    chart
        .configure_series_labels()
        .position(position)
        .background_style(WHITE)
        .border_style(INK.stroke_width(1))
        .label_font((FONT, font_px).into_font().color(&INK))
        .draw()
        .map_err(drawing)
}

/// Vertical error bars with caps: one path per point from `low` to `high` at `x`.
fn error_bar<X: Clone + 'static, Y: Clone + 'static>(x: X, low: Y, high: Y, style: ShapeStyle) -> PathElement<(X, Y)> {
    PathElement::new(vec![(x.clone(), low), (x, high)], style)
}

#[cfg(test)]
mod tests;
