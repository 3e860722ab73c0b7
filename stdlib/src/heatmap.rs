//! Heat-map SVG of a structure-factor plane (plotters SVG backend), with a
//! colour bar and axes labelled by their reciprocal-lattice directions.

use crate::structure_factor::PlaneMap;
use plotters::prelude::*;

/// Why a heat map could not be drawn.
#[derive(Clone, Debug, PartialEq)]
pub enum HeatmapError {
    /// Empty map, ragged rows or non-finite intensities.
    BadData(String),
    /// Picture size outside 200..=4000 px.
    InvalidSize {
        /// Width (px).
        width_px: u32,
        /// Height (px).
        height_px: u32,
    },
    /// plotters reported a drawing error.
    Drawing(String),
}

impl std::fmt::Display for HeatmapError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            HeatmapError::BadData(m) => write!(f, "cannot draw the map: {m}"),
            HeatmapError::InvalidSize {
                width_px,
                height_px,
            } => write!(
                f,
                "picture size {width_px}×{height_px} px is outside 200..=4000 px"
            ),
            HeatmapError::Drawing(m) => write!(f, "drawing failed: {m}"),
        }
    }
}

impl std::error::Error for HeatmapError {}

/// Colour of `t ∈ [0, 1]`: a ramp from dark blue through magenta to pale
/// yellow (our own stops; monotone in lightness so it prints in grey).
pub fn ramp_colour(t: f64) -> RGBColor {
    const STOPS: [(f64, [f64; 3]); 4] = [
        (0.0, [12.0, 16.0, 64.0]),
        (0.35, [120.0, 36.0, 130.0]),
        (0.7, [232.0, 96.0, 72.0]),
        (1.0, [252.0, 240.0, 170.0]),
    ];
    let t = if t.is_finite() {
        t.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let k = STOPS.iter().rposition(|(s, _)| *s <= t).unwrap_or(0).min(2);
    let (t0, c0) = STOPS[k];
    let (t1, c1) = STOPS[k + 1];
    let x = (t - t0) / (t1 - t0);
    let mix = |i: usize| (c0[i] + x * (c1[i] - c0[i])).round() as u8;
    RGBColor(mix(0), mix(1), mix(2))
}

/// "(1,1,0)"-style label of a direction.
fn direction_label(v: [f64; 3]) -> String {
    let f = |x: f64| {
        if (x - x.round()).abs() < 1e-9 {
            format!("{}", x.round() as i64)
        } else {
            format!("{x:.3}")
        }
    };
    format!("({},{},{})", f(v[0]), f(v[1]), f(v[2]))
}

fn drawing<E: std::fmt::Debug>(e: E) -> HeatmapError {
    HeatmapError::Drawing(format!("{e:?}"))
}

/// Draw `map` as an SVG heat map of `width_px × height_px` with `title`.
pub fn render_heatmap_svg(
    map: &PlaneMap,
    title: &str,
    width_px: u32,
    height_px: u32,
) -> Result<String, HeatmapError> {
    if !(200..=4000).contains(&width_px) || !(200..=4000).contains(&height_px) {
        return Err(HeatmapError::InvalidSize {
            width_px,
            height_px,
        });
    }
    let (nx, ny) = (map.x.len(), map.y.len());
    if nx < 2 || ny < 2 || map.values.len() != ny || map.values.iter().any(|r| r.len() != nx) {
        return Err(HeatmapError::BadData("rows do not match the grid".into()));
    }
    if map.values.iter().flatten().any(|v| !v.is_finite()) {
        return Err(HeatmapError::BadData("an intensity is not finite".into()));
    }
    let lo = map
        .values
        .iter()
        .flatten()
        .cloned()
        .fold(f64::INFINITY, f64::min);
    let mut hi = map
        .values
        .iter()
        .flatten()
        .cloned()
        .fold(f64::NEG_INFINITY, f64::max);
    if hi <= lo {
        hi = lo + 1.0;
    }
    let (dx, dy) = ((map.x[1] - map.x[0]) / 2.0, (map.y[1] - map.y[0]) / 2.0);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width_px, height_px)).into_drawing_area();
        root.fill(&WHITE).map_err(drawing)?;
        let bar_width = 110.min(width_px / 4);
        let (main, bar) = root.split_horizontally(width_px - bar_width);
        let x_label = format!("coefficient of {} [r.l.u.]", direction_label(map.plane.u));
        let y_label = format!("coefficient of {} [r.l.u.]", direction_label(map.plane.v));
        let mut chart = ChartBuilder::on(&main)
            .caption(title, ("sans-serif", 18))
            .margin(10)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .build_cartesian_2d(
                (map.x[0] - dx)..(map.x[nx - 1] + dx),
                (map.y[0] - dy)..(map.y[ny - 1] + dy),
            )
            .map_err(drawing)?;
        chart
            .configure_mesh()
            .disable_mesh()
            .x_desc(x_label)
            .y_desc(y_label)
            .draw()
            .map_err(drawing)?;
        chart
            .draw_series(map.values.iter().enumerate().flat_map(|(iy, row)| {
                row.iter().enumerate().map(move |(ix, &v)| {
                    let (x, y) = (map.x[ix], map.y[iy]);
                    Rectangle::new(
                        [(x - dx, y - dy), (x + dx, y + dy)],
                        ramp_colour((v - lo) / (hi - lo)).filled(),
                    )
                })
            }))
            .map_err(drawing)?;
        let steps = 64;
        let mut colour_bar = ChartBuilder::on(&bar)
            .margin_top(40)
            .margin_bottom(55)
            .margin_right(10)
            .y_label_area_size(55)
            .caption("S(Q) [μ²/spin]", ("sans-serif", 13))
            .build_cartesian_2d(0.0..1.0, lo..hi)
            .map_err(drawing)?;
        colour_bar
            .configure_mesh()
            .disable_mesh()
            .disable_x_axis()
            .y_labels(6)
            .draw()
            .map_err(drawing)?;
        colour_bar
            .draw_series((0..steps).map(|k| {
                let a = lo + (hi - lo) * k as f64 / steps as f64;
                let b = lo + (hi - lo) * (k + 1) as f64 / steps as f64;
                Rectangle::new(
                    [(0.0, a), (1.0, b)],
                    ramp_colour((k as f64 + 0.5) / steps as f64).filled(),
                )
            }))
            .map_err(drawing)?;
        root.present().map_err(drawing)?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::structure_factor::{Channel, QPlane, StructureFactorSettings};

    fn map() -> PlaneMap {
        PlaneMap {
            plane: QPlane {
                origin: [0.0; 3],
                u: [1.0, 1.0, 0.0],
                v: [0.0, 0.0, 1.0],
                x_range: [-1.0, 1.0],
                y_range: [0.0, 2.0],
                points: [3, 2],
            },
            x: vec![-1.0, 0.0, 1.0],
            y: vec![0.0, 2.0],
            values: vec![vec![0.0, 1.0, 2.0], vec![3.0, 4.0, 5.0]],
            settings: StructureFactorSettings {
                channel: Channel::Total,
                polarisation: None,
                form_factor: None,
            },
        }
    }

    #[test]
    fn svg_has_labelled_axes_colour_bar_and_one_cell_per_point() {
        let svg = render_heatmap_svg(&map(), "S(Q), (h,h,l)", 640, 480).unwrap();
        assert!(svg.starts_with("<svg"));
        assert!(svg.contains("coefficient of (1,1,0) [r.l.u.]"));
        assert!(svg.contains("coefficient of (0,0,1) [r.l.u.]"));
        assert!(svg.contains("S(Q) [μ²/spin]"));
        // Extremes get the end colours of the ramp.
        let low = ramp_colour(0.0);
        let high = ramp_colour(1.0);
        assert_eq!((low.0, low.1, low.2), (12, 16, 64));
        assert_eq!((high.0, high.1, high.2), (252, 240, 170));
        assert!(svg.matches("<rect").count() >= 6 + 64);
    }

    #[test]
    fn bad_maps_are_errors() {
        let mut m = map();
        m.values[1][2] = f64::NAN;
        assert!(matches!(
            render_heatmap_svg(&m, "x", 640, 480),
            Err(HeatmapError::BadData(_))
        ));
        assert!(matches!(
            render_heatmap_svg(&map(), "x", 10, 480),
            Err(HeatmapError::InvalidSize { .. })
        ));
        let mut r = map();
        r.values.pop();
        assert!(render_heatmap_svg(&r, "x", 640, 480).is_err());
    }
}
