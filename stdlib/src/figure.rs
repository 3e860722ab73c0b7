//! Publication-style line plots rendered to SVG text with plotters.
//!
//! A [`LinePlot`] is plain data (serde), so the language layer can build one
//! from any table of results; [`render_svg`] validates it completely before
//! drawing and returns a clear [`FigureError`] instead of a broken picture:
//! NaN/∞ values, non-positive values on a logarithmic axis, mismatched
//! lengths, negative error bars. Degenerate ranges (one point, constant data)
//! are padded so the data sit inside the frame.

use plotters::coord::combinators::BindKeyPoints;
use plotters::coord::ranged1d::{AsRangedCoord, ValueFormatter};
use plotters::coord::Shift;
use plotters::prelude::*;
use serde::{Deserialize, Serialize};
use std::fmt;

/// Linear or base-10 logarithmic axis.
#[derive(Clone, Copy, Debug, Serialize, Deserialize, PartialEq, Eq)]
pub enum AxisScale {
    /// Linear.
    Linear,
    /// Base-10 logarithmic (data must be > 0).
    Log,
}

/// An axis: quantity name, optional unit, scale. Drawn as "label [unit]".
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct Axis {
    /// Quantity, e.g. "temperature".
    pub label: String,
    /// Unit, e.g. "K"; `None` for dimensionless quantities.
    pub unit: Option<String>,
    /// Scale.
    pub scale: AxisScale,
}

impl Axis {
    /// A linear axis.
    pub fn linear(label: &str, unit: Option<&str>) -> Self {
        Self {
            label: label.to_string(),
            unit: unit.map(str::to_string),
            scale: AxisScale::Linear,
        }
    }

    /// A logarithmic axis.
    pub fn log(label: &str, unit: Option<&str>) -> Self {
        Self {
            scale: AxisScale::Log,
            ..Self::linear(label, unit)
        }
    }

    /// The caption drawn beside the axis: "label [unit]" or "label".
    pub fn caption(&self) -> String {
        match self.unit.as_deref().map(str::trim) {
            Some(u) if !u.is_empty() => format!("{} [{}]", self.label, u),
            _ => self.label.clone(),
        }
    }
}

/// How a series is drawn.
#[derive(Clone, Copy, Debug, Serialize, Deserialize, PartialEq, Eq)]
pub enum SeriesStyle {
    /// A polyline through the points.
    Line,
    /// Markers only.
    Points,
    /// Polyline and markers.
    LineAndPoints,
}

/// One data series with optional symmetric y error bars.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct Series {
    /// Legend entry.
    pub label: String,
    /// Abscissae.
    pub x: Vec<f64>,
    /// Ordinates (same length as `x`).
    pub y: Vec<f64>,
    /// One-σ errors of `y` (same length, ≥ 0), drawn as bars.
    pub y_error: Option<Vec<f64>>,
    /// Drawing style.
    pub style: SeriesStyle,
}

/// A titled x–y plot of one or more series.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct LinePlot {
    /// Title above the plot.
    pub title: String,
    /// Horizontal axis.
    pub x: Axis,
    /// Vertical axis.
    pub y: Axis,
    /// The data.
    pub series: Vec<Series>,
}

/// Which axis a value belongs to (for error messages).
#[derive(Clone, Copy, Debug, Serialize, Deserialize, PartialEq, Eq)]
pub enum AxisName {
    /// Horizontal.
    X,
    /// Vertical.
    Y,
}

impl fmt::Display for AxisName {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            AxisName::X => "x",
            AxisName::Y => "y",
        })
    }
}

/// Why a plot could not be drawn.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub enum FigureError {
    /// The plot has no series.
    NoSeries,
    /// A series has no points.
    EmptySeries {
        /// Series label.
        series: String,
    },
    /// `x` and `y` (or `y_error`) lengths differ.
    LengthMismatch {
        /// Series label.
        series: String,
        /// What was compared, e.g. "x and y".
        what: String,
        /// First length.
        left: usize,
        /// Second length.
        right: usize,
    },
    /// NaN or ±∞ in the data.
    NonFinite {
        /// Series label.
        series: String,
        /// Axis.
        axis: AxisName,
        /// 0-based point index.
        index: usize,
    },
    /// A value ≤ 0 on a logarithmic axis.
    NonPositiveOnLogAxis {
        /// Series label.
        series: String,
        /// Axis.
        axis: AxisName,
        /// 0-based point index.
        index: usize,
        /// The offending value.
        value: f64,
    },
    /// An error bar is negative or not finite.
    InvalidErrorBar {
        /// Series label.
        series: String,
        /// 0-based point index.
        index: usize,
        /// The offending value.
        value: f64,
    },
    /// The requested picture size is outside the supported range.
    InvalidSize {
        /// Width (px).
        width_px: u32,
        /// Height (px).
        height_px: u32,
    },
    /// The data span more than an `f64` can represent once padded.
    RangeTooLarge {
        /// Axis.
        axis: AxisName,
    },
    /// plotters reported a drawing error.
    Drawing(String),
}

/// Smallest and largest supported picture edges (px).
pub const MIN_SIZE_PX: u32 = 160;
/// See [`MIN_SIZE_PX`].
pub const MAX_SIZE_PX: u32 = 8000;

impl fmt::Display for FigureError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FigureError::NoSeries => write!(f, "the plot has no data series"),
            FigureError::EmptySeries { series } => write!(f, "series '{series}' has no points"),
            FigureError::LengthMismatch {
                series,
                what,
                left,
                right,
            } => write!(f, "series '{series}': {what} have different lengths ({left} and {right})"),
            FigureError::NonFinite {
                series,
                axis,
                index,
            } => write!(
                f,
                "series '{series}': {axis} value of point {} is not a finite number",
                index + 1
            ),
            FigureError::NonPositiveOnLogAxis {
                series,
                axis,
                index,
                value,
            } => write!(
                f,
                "series '{series}': {axis} value {value} of point {} cannot be shown on a logarithmic \
                 {axis} axis (values must be > 0); use a linear axis or drop the point",
                index + 1
            ),
            FigureError::InvalidErrorBar {
                series,
                index,
                value,
            } => write!(
                f,
                "series '{series}': error bar {value} of point {} must be a finite number ≥ 0",
                index + 1
            ),
            FigureError::InvalidSize {
                width_px,
                height_px,
            } => write!(
                f,
                "figure size {width_px}×{height_px} px is outside {MIN_SIZE_PX}..={MAX_SIZE_PX} px per side"
            ),
            FigureError::RangeTooLarge { axis } => {
                write!(f, "the {axis} values span too large a range to draw")
            }
            FigureError::Drawing(message) => write!(f, "drawing failed: {message}"),
        }
    }
}

impl std::error::Error for FigureError {}

/// Series colours: our own palette of eight well-separated, print-safe hues.
pub const PALETTE: [RGBColor; 8] = [
    RGBColor(0x1d, 0x5b, 0xa8), // cobalt
    RGBColor(0xc4, 0x4e, 0x24), // rust
    RGBColor(0x2f, 0x8a, 0x4c), // moss
    RGBColor(0x7b, 0x3f, 0x9e), // violet
    RGBColor(0xd0, 0x97, 0x18), // ochre
    RGBColor(0x1b, 0x9a, 0xa6), // lagoon
    RGBColor(0x8c, 0x2d, 0x4d), // claret
    RGBColor(0x4d, 0x4d, 0x4d), // graphite
];

/// Validate everything that could make the drawing meaningless.
fn validate(plot: &LinePlot, width_px: u32, height_px: u32) -> Result<(), FigureError> {
    let size_ok = |v: u32| (MIN_SIZE_PX..=MAX_SIZE_PX).contains(&v);
    if !size_ok(width_px) || !size_ok(height_px) {
        return Err(FigureError::InvalidSize {
            width_px,
            height_px,
        });
    }
    if plot.series.is_empty() {
        return Err(FigureError::NoSeries);
    }
    for s in &plot.series {
        let series = s.label.clone();
        if s.x.len() != s.y.len() {
            return Err(FigureError::LengthMismatch {
                series,
                what: "x and y".into(),
                left: s.x.len(),
                right: s.y.len(),
            });
        }
        if s.x.is_empty() {
            return Err(FigureError::EmptySeries { series });
        }
        for (axis, values, scale) in [
            (AxisName::X, &s.x, plot.x.scale),
            (AxisName::Y, &s.y, plot.y.scale),
        ] {
            for (index, &value) in values.iter().enumerate() {
                if !value.is_finite() {
                    return Err(FigureError::NonFinite {
                        series,
                        axis,
                        index,
                    });
                }
                if scale == AxisScale::Log && value <= 0.0 {
                    return Err(FigureError::NonPositiveOnLogAxis {
                        series,
                        axis,
                        index,
                        value,
                    });
                }
            }
        }
        if let Some(errors) = &s.y_error {
            if errors.len() != s.y.len() {
                return Err(FigureError::LengthMismatch {
                    series,
                    what: "y and y_error".into(),
                    left: s.y.len(),
                    right: errors.len(),
                });
            }
            if let Some((index, &value)) = errors
                .iter()
                .enumerate()
                .find(|(_, e)| !(e.is_finite() && **e >= 0.0))
            {
                return Err(FigureError::InvalidErrorBar {
                    series,
                    index,
                    value,
                });
            }
        }
    }
    Ok(())
}

/// Padded display range of a set of values (all finite; all > 0 on a log axis).
fn padded_range(values: impl Iterator<Item = f64>, scale: AxisScale) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values {
        let v = match scale {
            AxisScale::Linear => v,
            AxisScale::Log => v.log10(),
        };
        lo = lo.min(v);
        hi = hi.max(v);
    }
    let span = hi - lo;
    let (lo, hi) = if span > 1e-12 * hi.abs().max(lo.abs()).max(f64::MIN_POSITIVE) {
        (lo - 0.05 * span, hi + 0.05 * span)
    } else {
        // One point or constant data: a window around the value (half a
        // decade on a log axis, ±10 % or ±1 on a linear one).
        let half = match scale {
            AxisScale::Log => 0.5,
            AxisScale::Linear => {
                if lo == 0.0 {
                    1.0
                } else {
                    0.1 * lo.abs()
                }
            }
        };
        (lo - half, hi + half)
    };
    match scale {
        AxisScale::Linear => (lo, hi),
        AxisScale::Log => (10f64.powf(lo), 10f64.powf(hi)),
    }
}

fn checked(range: (f64, f64), axis: AxisName) -> Result<(f64, f64), FigureError> {
    let (lo, hi) = range;
    if lo.is_finite() && hi.is_finite() && hi > lo && (hi - lo).is_finite() {
        Ok(range)
    } else {
        Err(FigureError::RangeTooLarge { axis })
    }
}

fn x_range(plot: &LinePlot) -> (f64, f64) {
    padded_range(
        plot.series.iter().flat_map(|s| s.x.iter().copied()),
        plot.x.scale,
    )
}

fn y_range(plot: &LinePlot) -> (f64, f64) {
    let log = plot.y.scale == AxisScale::Log;
    let values = plot.series.iter().flat_map(|s| {
        let errors = s.y_error.as_deref();
        s.y.iter().enumerate().flat_map(move |(i, &y)| {
            let e = errors.map_or(0.0, |e| e[i]);
            // On a log axis a bar reaching zero is clipped at the frame, so
            // only its positive end counts for the range.
            let low = if log && y - e <= 0.0 { y } else { y - e };
            [low, y + e]
        })
    });
    padded_range(values, plot.y.scale)
}

const SUPERSCRIPT: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];

fn superscript(exponent: i32) -> String {
    let mut s = String::new();
    if exponent < 0 {
        s.push('⁻');
    }
    for c in exponent.unsigned_abs().to_string().chars() {
        s.push(SUPERSCRIPT[c.to_digit(10).unwrap_or(0) as usize]);
    }
    s
}

/// Tick label: plain decimals for moderate magnitudes, `m×10ⁿ` otherwise.
pub fn format_tick(value: f64) -> String {
    if value == 0.0 || !value.is_finite() {
        return if value == 0.0 {
            "0".into()
        } else {
            value.to_string()
        };
    }
    let magnitude = value.abs().log10().floor() as i32;
    if (-3..5).contains(&magnitude) {
        let decimals = (3 - magnitude).clamp(0, 7) as usize;
        let text = format!("{value:.decimals$}");
        let text = if text.contains('.') {
            text.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            text
        };
        if text == "-0" {
            "0".into()
        } else {
            text
        }
    } else {
        let mantissa = value / 10f64.powi(magnitude);
        let m = format!("{mantissa:.2}");
        let m = m.trim_end_matches('0').trim_end_matches('.');
        if m == "1" {
            format!("10{}", superscript(magnitude))
        } else if m == "-1" {
            format!("−10{}", superscript(magnitude))
        } else {
            format!("{m}×10{}", superscript(magnitude))
        }
    }
}

/// Tick values for a logarithmic axis on `[lo, hi]` (0 < lo < hi): every
/// mantissa 1…9 below half a decade, 1–2–5 up to 2.5 decades, the decades up
/// to 6, then every k-th decade; at least two ticks (falling back to evenly
/// spaced "nice" values on very short ranges).
pub fn log_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let decades = (hi / lo).log10();
    let (mantissas, decade_step): (&[f64], i32) = if decades < 0.5 {
        (&[1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0], 1)
    } else if decades < 2.5 {
        (&[1.0, 2.0, 5.0], 1)
    } else if decades <= 6.0 {
        (&[1.0], 1)
    } else {
        (&[1.0], (decades / 6.0).ceil() as i32)
    };
    let first = lo.log10().floor() as i32;
    let last = hi.log10().ceil() as i32;
    let mut ticks = Vec::new();
    let mut exponent = first;
    // Align stepped decades on multiples of the step (…, 10⁻⁶, 10⁰, 10⁶, …).
    if decade_step > 1 {
        exponent = first.div_euclid(decade_step) * decade_step;
    }
    while exponent <= last {
        for &m in mantissas {
            let v = m * 10f64.powi(exponent);
            if v >= lo * (1.0 - 1e-12) && v <= hi * (1.0 + 1e-12) {
                ticks.push(v);
            }
        }
        exponent += decade_step;
    }
    if ticks.len() < 2 {
        ticks = linear_ticks(lo, hi, 5);
    }
    ticks
}

/// About `target` evenly spaced ticks on `[lo, hi]` with 1–2–5 steps.
fn linear_ticks(lo: f64, hi: f64, target: usize) -> Vec<f64> {
    let raw = (hi - lo) / target.max(1) as f64;
    if !(raw.is_finite() && raw > 0.0) {
        return vec![lo, hi];
    }
    let magnitude = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * magnitude)
        .find(|&s| s >= raw)
        .unwrap_or(10.0 * magnitude);
    let mut ticks = Vec::new();
    let mut k = (lo / step).ceil();
    while k * step <= hi && ticks.len() < 4 * target {
        ticks.push(k * step);
        k += 1.0;
    }
    if ticks.len() < 2 {
        vec![lo, hi]
    } else {
        ticks
    }
}

fn drawing_error<E: std::error::Error + Send + Sync>(e: DrawingAreaErrorKind<E>) -> FigureError {
    FigureError::Drawing(e.to_string())
}

/// Draw `plot` as an SVG document of `width_px × height_px`.
pub fn render_svg(plot: &LinePlot, width_px: u32, height_px: u32) -> Result<String, FigureError> {
    validate(plot, width_px, height_px)?;
    let (x0, x1) = checked(x_range(plot), AxisName::X)?;
    let (y0, y1) = checked(y_range(plot), AxisName::Y)?;
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width_px, height_px)).into_drawing_area();
        root.fill(&WHITE).map_err(drawing_error)?;
        use AxisScale::{Linear, Log};
        // Log axes get our own 1–2–5 ticks (plotters' default gives only the
        // decades, often a single label on a short range).
        let log_x = || (x0..x1).log_scale().with_key_points(log_ticks(x0, x1));
        let log_y = || (y0..y1).log_scale().with_key_points(log_ticks(y0, y1));
        match (plot.x.scale, plot.y.scale) {
            (Linear, Linear) => draw(&root, plot, x0..x1, y0..y1, (x0, y0))?,
            (Log, Linear) => draw(&root, plot, log_x(), y0..y1, (x0, y0))?,
            (Linear, Log) => draw(&root, plot, x0..x1, log_y(), (x0, y0))?,
            (Log, Log) => draw(&root, plot, log_x(), log_y(), (x0, y0))?,
        }
        root.present().map_err(drawing_error)?;
    }
    Ok(svg)
}

fn draw<X, Y>(
    root: &DrawingArea<SVGBackend<'_>, Shift>,
    plot: &LinePlot,
    x_range: X,
    y_range: Y,
    lower_left: (f64, f64),
) -> Result<(), FigureError>
where
    X: AsRangedCoord<Value = f64>,
    Y: AsRangedCoord<Value = f64>,
    X::CoordDescType: ValueFormatter<f64>,
    Y::CoordDescType: ValueFormatter<f64>,
{
    let (w, h) = root.dim_in_pixel();
    // Sizes designed at 800×500 and scaled with the picture.
    let scale = (w as f64 / 800.0).min(h as f64 / 500.0).clamp(0.5, 3.0);
    let px = |v: f64| (v * scale).round().max(1.0) as u32;
    let title_font = ("sans-serif", px(24.0) as f64).into_font();
    let desc_font = ("sans-serif", px(19.0) as f64).into_font();
    let tick_font = ("sans-serif", px(16.0) as f64).into_font();
    let mut chart = ChartBuilder::on(root)
        .caption(&plot.title, title_font)
        .margin(px(18.0))
        .x_label_area_size(px(58.0))
        .y_label_area_size(px(86.0))
        .build_cartesian_2d(x_range, y_range)
        .map_err(drawing_error)?;
    let grid = RGBColor(0xdd, 0xdd, 0xdd);
    chart
        .configure_mesh()
        .x_desc(plot.x.caption())
        .y_desc(plot.y.caption())
        .axis_desc_style(desc_font)
        .label_style(tick_font)
        .x_label_formatter(&|v| format_tick(*v))
        .y_label_formatter(&|v| format_tick(*v))
        .bold_line_style(grid.stroke_width(1))
        .light_line_style(WHITE.mix(0.0))
        .axis_style(BLACK.stroke_width(px(1.5)))
        .x_labels(8)
        .y_labels(7)
        .draw()
        .map_err(drawing_error)?;

    let line_width = px(2.2);
    let marker = px(4.0);
    for (k, series) in plot.series.iter().enumerate() {
        let colour = PALETTE[k % PALETTE.len()];
        let points: Vec<(f64, f64)> = series
            .x
            .iter()
            .copied()
            .zip(series.y.iter().copied())
            .collect();
        if let Some(errors) = &series.y_error {
            let floor = lower_left.1;
            let bar_style = colour.stroke_width(px(1.4));
            chart
                .draw_series(points.iter().zip(errors).map(|(&(x, y), &e)| {
                    let low = if plot.y.scale == AxisScale::Log && y - e <= 0.0 {
                        floor
                    } else {
                        y - e
                    };
                    ErrorBar::new_vertical(x, low, y, y + e, bar_style, px(8.0))
                }))
                .map_err(drawing_error)?;
        }
        let draws_line = matches!(series.style, SeriesStyle::Line | SeriesStyle::LineAndPoints);
        let draws_points = matches!(
            series.style,
            SeriesStyle::Points | SeriesStyle::LineAndPoints
        );
        // The legend entry is attached to the first element drawn.
        let legend_line = colour.stroke_width(line_width);
        if draws_line {
            let annotation = chart
                .draw_series(LineSeries::new(points.iter().copied(), legend_line))
                .map_err(drawing_error)?;
            annotation
                .label(series.label.clone())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(line_width))
                });
        }
        if draws_points {
            let annotation = chart
                .draw_series(
                    points
                        .iter()
                        .map(|&p| Circle::new(p, marker, colour.filled())),
                )
                .map_err(drawing_error)?;
            if !draws_line {
                annotation
                    .label(series.label.clone())
                    .legend(move |(x, y)| Circle::new((x + 12, y), marker, colour.filled()));
            }
        }
    }
    if plot.series.len() > 1 {
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(0x99, 0x99, 0x99))
            .label_font(("sans-serif", px(16.0) as f64))
            .margin(px(10.0))
            .draw()
            .map_err(drawing_error)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn series(label: &str, x: Vec<f64>, y: Vec<f64>, style: SeriesStyle) -> Series {
        Series {
            label: label.into(),
            x,
            y,
            y_error: None,
            style,
        }
    }

    fn plot(series: Vec<Series>) -> LinePlot {
        LinePlot {
            title: "Specific heat of Vintrite".into(),
            x: Axis::linear("temperature", Some("K")),
            y: Axis::linear("C", None),
            series,
        }
    }

    fn count(haystack: &str, needle: &str) -> usize {
        haystack.matches(needle).count()
    }

    /// Polylines drawn in colour `c` (plotters writes `stroke="#RRGGBB"`).
    fn polylines_in(svg: &str, c: RGBColor) -> usize {
        let stroke = format!("stroke=\"#{:02X}{:02X}{:02X}\"", c.0, c.1, c.2);
        svg.split("<polyline")
            .skip(1)
            .filter(|el| {
                el.split("/>")
                    .next()
                    .is_some_and(|attrs| attrs.contains(&stroke))
            })
            .count()
    }

    #[test]
    fn svg_has_title_axis_captions_and_one_polyline_per_series() {
        let p = plot(vec![
            series(
                "L = 2",
                vec![0.5, 1.0, 2.0],
                vec![0.1, 0.4, 0.2],
                SeriesStyle::Line,
            ),
            series(
                "L = 3",
                vec![0.5, 1.0, 2.0],
                vec![0.12, 0.45, 0.21],
                SeriesStyle::Line,
            ),
        ]);
        let svg = render_svg(&p, 800, 500).unwrap();
        assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
        assert_eq!(count(&svg, "<svg"), 1);
        assert!(svg.contains("Specific heat of Vintrite"));
        assert!(svg.contains("temperature [K]"));
        assert!(svg.contains(">\nC\n</text>") || svg.contains(">C</text>") || svg.contains("C\n"));
        // One data polyline plus one legend sample per series.
        assert_eq!(polylines_in(&svg, PALETTE[0]), 2);
        assert_eq!(polylines_in(&svg, PALETTE[1]), 2);
        assert!(
            svg.contains("L = 2") && svg.contains("L = 3"),
            "legend labels"
        );
        // Tags balance (XML-ish well-formedness of what plotters opens).
        assert_eq!(count(&svg, "<text"), count(&svg, "</text>"));
    }

    #[test]
    fn single_series_has_no_legend_and_points_style_has_no_line() {
        let p = plot(vec![series(
            "only",
            vec![1.0, 2.0],
            vec![3.0, 4.0],
            SeriesStyle::Points,
        )]);
        let svg = render_svg(&p, 640, 400).unwrap();
        assert_eq!(polylines_in(&svg, PALETTE[0]), 0);
        assert_eq!(count(&svg, "<circle"), 2);
        assert!(!svg.contains(">only<") && !svg.contains("only\n"));
    }

    #[test]
    fn error_bars_are_drawn() {
        let mut s = series(
            "E",
            vec![1.0, 2.0, 3.0],
            vec![1.0, 2.0, 1.5],
            SeriesStyle::LineAndPoints,
        );
        s.y_error = Some(vec![0.1, 0.2, 0.1]);
        let svg_with = render_svg(&plot(vec![s.clone()]), 800, 500).unwrap();
        s.y_error = None;
        let svg_without = render_svg(&plot(vec![s]), 800, 500).unwrap();
        // Each error bar adds a vertical stroke and two caps in the series colour.
        let stroke = "stroke=\"#1D5BA8\"";
        assert!(count(&svg_with, stroke) >= count(&svg_without, stroke) + 3 * 3);
    }

    #[test]
    fn log_axes_render_and_reject_non_positive_values() {
        let mut p = plot(vec![series(
            "decay",
            vec![1.0, 10.0, 100.0, 1000.0],
            vec![1e-1, 1e-2, 1e-3, 1e-4],
            SeriesStyle::LineAndPoints,
        )]);
        p.x.scale = AxisScale::Log;
        p.y.scale = AxisScale::Log;
        let svg = render_svg(&p, 800, 500).unwrap();
        assert!(
            svg.contains("10⁻³") || svg.contains("0.001"),
            "decade labels"
        );
        p.series[0].y[2] = 0.0;
        match render_svg(&p, 800, 500) {
            Err(FigureError::NonPositiveOnLogAxis {
                axis: AxisName::Y,
                index: 2,
                ..
            }) => {}
            other => panic!("expected a log-axis error, got {other:?}"),
        }
        p.series[0].y[2] = 1e-3;
        p.series[0].x[0] = -1.0;
        let err = render_svg(&p, 800, 500).unwrap_err();
        assert!(err.to_string().contains("logarithmic x axis"), "{err}");
    }

    #[test]
    fn nan_and_bad_shapes_are_clear_errors() {
        let p = plot(vec![series(
            "s",
            vec![1.0, f64::NAN],
            vec![1.0, 2.0],
            SeriesStyle::Line,
        )]);
        assert!(matches!(
            render_svg(&p, 800, 500),
            Err(FigureError::NonFinite {
                axis: AxisName::X,
                index: 1,
                ..
            })
        ));
        let p = plot(vec![series(
            "s",
            vec![1.0, 2.0],
            vec![1.0],
            SeriesStyle::Line,
        )]);
        assert!(matches!(
            render_svg(&p, 800, 500),
            Err(FigureError::LengthMismatch { .. })
        ));
        let p = plot(vec![]);
        assert_eq!(render_svg(&p, 800, 500), Err(FigureError::NoSeries));
        let mut s = series("s", vec![1.0], vec![1.0], SeriesStyle::Line);
        s.y_error = Some(vec![-0.5]);
        assert!(matches!(
            render_svg(&plot(vec![s]), 800, 500),
            Err(FigureError::InvalidErrorBar { .. })
        ));
        let huge = plot(vec![series(
            "s",
            vec![-1e308, 1e308],
            vec![1.0, 2.0],
            SeriesStyle::Line,
        )]);
        assert_eq!(
            render_svg(&huge, 800, 500),
            Err(FigureError::RangeTooLarge { axis: AxisName::X })
        );
        let ok = plot(vec![series("s", vec![1.0], vec![1.0], SeriesStyle::Line)]);
        assert!(matches!(
            render_svg(&ok, 10, 500),
            Err(FigureError::InvalidSize { .. })
        ));
    }

    #[test]
    fn single_point_and_constant_data_get_padded_ranges() {
        assert_eq!(
            padded_range([2.0].into_iter(), AxisScale::Linear),
            (1.8, 2.2)
        );
        assert_eq!(
            padded_range([0.0, 0.0].into_iter(), AxisScale::Linear),
            (-1.0, 1.0)
        );
        let (lo, hi) = padded_range([10.0].into_iter(), AxisScale::Log);
        assert!((lo - 10f64.powf(0.5)).abs() < 1e-12 && (hi - 10f64.powf(1.5)).abs() < 1e-9);
        let (lo, hi) = padded_range([0.0, 10.0].into_iter(), AxisScale::Linear);
        assert!((lo + 0.5).abs() < 1e-12 && (hi - 10.5).abs() < 1e-12);
        let p = plot(vec![series(
            "one",
            vec![3.0],
            vec![7.0],
            SeriesStyle::Points,
        )]);
        let svg = render_svg(&p, 800, 500).unwrap();
        assert_eq!(count(&svg, "<circle"), 1);
    }

    #[test]
    fn log_ticks_follow_one_two_five() {
        assert_eq!(log_ticks(0.35, 12.0), vec![0.5, 1.0, 2.0, 5.0, 10.0]);
        assert_eq!(log_ticks(0.9, 1e4), vec![1.0, 10.0, 100.0, 1000.0, 1e4]);
        let many = log_ticks(1e-20, 1e20);
        assert!(many.len() >= 5 && many.len() <= 8, "{many:?}");
        assert!(many.contains(&1.0));
        let short = log_ticks(100.0, 101.0);
        assert!(short.len() >= 2 && short.iter().all(|&t| (100.0..=101.0).contains(&t)));
        let sub_decade = log_ticks(2.5, 6.5);
        assert_eq!(sub_decade, vec![3.0, 4.0, 5.0, 6.0]);
    }

    #[test]
    fn tick_labels_are_readable() {
        assert_eq!(format_tick(0.30000000000000004), "0.3");
        assert_eq!(format_tick(0.0), "0");
        assert_eq!(format_tick(-2.5), "-2.5");
        assert_eq!(format_tick(1500.0), "1500");
        assert_eq!(format_tick(1e-4), "10⁻⁴");
        assert_eq!(format_tick(2.5e6), "2.5×10⁶");
    }

    #[test]
    fn axis_caption_has_unit_in_brackets() {
        assert_eq!(
            Axis::linear("χT", Some("μ² K⁻¹ K")).caption(),
            "χT [μ² K⁻¹ K]"
        );
        assert_eq!(Axis::log("density", Some(" ")).caption(), "density");
    }
}
