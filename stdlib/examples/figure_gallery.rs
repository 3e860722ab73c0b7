//! Render a few example figures (a small temperature scan of an invented
//! material) to SVG files, for looking at the figure style.
//! Usage: `cargo run --release -p icefield-stdlib --example figure_gallery OUT_DIR`

use icefield_stdlib::control::{ignore_progress, Interrupt};
use icefield_stdlib::figure::{render_svg, Axis, LinePlot, Series, SeriesStyle};
use icefield_stdlib::hamiltonian::NearestNeighbourIce;
use icefield_stdlib::metropolis::Start;
use icefield_stdlib::scan::{run_scan, ScanSettings};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let out = std::env::args().nth(1).unwrap_or_else(|| ".".into());
    let temperatures: Vec<f64> = (0..24).map(|k| 0.4 * 1.15f64.powi(k)).collect();
    let mut series = Vec::new();
    for cells in [1, 2] {
        let settings = ScanSettings {
            cells_per_side: cells,
            model: NearestNeighbourIce::new(1.1),
            temperatures_kelvin: temperatures.clone(),
            equilibration_sweeps: 2000,
            measurement_sweeps: 20_000,
            sample_every_sweeps: 1,
            seed: 1,
            start: Start::Random,
        };
        let scan = run_scan(&settings, &Interrupt::new(), &ignore_progress)?;
        series.push(scan);
    }
    let heat = LinePlot {
        title: "Specific heat of Vintrite (model, J_eff = 1.1 K)".into(),
        x: Axis::log("temperature", Some("K")),
        y: Axis::linear("C per spin", None),
        series: series
            .iter()
            .map(|s| Series {
                label: format!("L = {}", s.settings.cells_per_side),
                x: s.points.iter().map(|p| p.temperature_kelvin).collect(),
                y: s.points
                    .iter()
                    .map(|p| p.specific_heat_per_spin.mean)
                    .collect(),
                y_error: Some(
                    s.points
                        .iter()
                        .map(|p| p.specific_heat_per_spin.error)
                        .collect(),
                ),
                style: SeriesStyle::LineAndPoints,
            })
            .collect(),
    };
    std::fs::write(format!("{out}/heat.svg"), render_svg(&heat, 800, 500)?)?;
    let monopoles = LinePlot {
        title: "Monopole density".into(),
        x: Axis::log("temperature", Some("K")),
        y: Axis::log("Σ|Q|/N", None),
        series: vec![Series {
            label: "L = 2".into(),
            x: series[1]
                .points
                .iter()
                .map(|p| p.temperature_kelvin)
                .collect(),
            y: series[1]
                .points
                .iter()
                .map(|p| p.monopole_density_per_spin.mean)
                .collect(),
            y_error: Some(
                series[1]
                    .points
                    .iter()
                    .map(|p| p.monopole_density_per_spin.error)
                    .collect(),
            ),
            style: SeriesStyle::Points,
        }],
    };
    std::fs::write(
        format!("{out}/monopoles.svg"),
        render_svg(&monopoles, 800, 500)?,
    )?;
    Ok(())
}
