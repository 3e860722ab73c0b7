//! Running the percolation toolkit commands: Newman–Ziff threshold sweeps, cluster
//! statistics, chemical-distance growth, walkers, and the open-hop graph of spin-ice
//! states under the declared dynamics rule (stdlib::percolation).
//!
//! Long loops run in chunks on this thread so progress can be sent between chunks (at
//! most every `PROGRESS_INTERVAL`); every chunk polls the interrupt, and an interrupted
//! command stores what it finished before returning an `Interrupted` error.

use std::collections::BTreeMap;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::time::Instant;

use icefield_stdlib::control::Progress;
use icefield_stdlib::engine::{FlipRule, LocalFieldSampler};
use icefield_stdlib::exchange::{CouplingConvention, ExchangeCouplings};
use icefield_stdlib::figure::{render_svg, Axis, AxisScale, LinePlot, Series, SeriesStyle};
use icefield_stdlib::fit::fit_power_law_with_correction;
use icefield_stdlib::lattice::Pyrochlore;
use icefield_stdlib::loops::LoopMoves;
use icefield_stdlib::metropolis::{initial_configuration, Start};
use icefield_stdlib::monopoles::open_classes;
use icefield_stdlib::percolation::{
    chemical_growth, clusters, crossing_estimate, fresh_pair_exits, newman_ziff, random_walks,
    threshold, ChemicalGrowth, CrossingEstimate, CrossingObservable, ExitCount, LatticeKind,
    NewmanZiffRun, OpenHopGraph, PercolationError, PercolationGraph, PercolationKind, Realisation,
    DIAMOND_BOND_THRESHOLD,
};
use icefield_stdlib::rng::RngStreams;
use icefield_stdlib::spectra::{welch_psd, WelchSettings};

use super::{column, Runner, PROGRESS_INTERVAL};
use crate::ast::Span;
use crate::check::percolation::{
    displacement_unit, squared_unit, ClustersSpec, GrowthSpec, Occupation, OpenHopsSpec,
    PercolationSpec, ThresholdSpec, WalkersSpec,
};
use crate::diagnostic::{CellError, ErrorKind, Problem};
use crate::display;
use crate::plan::GeneralModel;
use crate::units::format_number;
use crate::workspace::{Figure, FigureSeries, Model, Provenance, Table, Value, DEFAULT_SEED};
use crate::Output;
use icefield_stdlib::scan::coupling_table;

/// The three-dimensional chemical dimension d_ℓ = d_f/d_min = 2.5230/1.3756 = 1.834
/// (physics-reference §9: Wang et al., PRE 87, 052107 (2013) (memory); Zhou, Yang, Deng &
/// Ziff, PRE 86, 061101 (2012)).
const CHEMICAL_DIMENSION_3D: f64 = 1.834;

/// Sends progress at most every `PROGRESS_INTERVAL`.
struct Throttle {
    label: String,
    last: Option<Instant>,
}

impl Throttle {
    fn new(label: String) -> Self {
        Throttle { label, last: None }
    }
    fn report(&mut self, done: u64, total: u64, emit: &mut dyn FnMut(Output)) {
        let due = self.last.is_none_or(|t| t.elapsed() >= PROGRESS_INTERVAL) || done >= total;
        if due {
            emit(Output::Progress(Progress {
                label: self.label.clone(),
                done,
                total,
            }));
            self.last = Some(Instant::now());
        }
    }
}

fn lattice_name(lattice: LatticeKind) -> &'static str {
    match lattice {
        LatticeKind::Diamond => "diamond",
        LatticeKind::SimpleCubic => "simple cubic",
        LatticeKind::Square => "square",
    }
}

fn kind_name(kind: PercolationKind) -> &'static str {
    match kind {
        PercolationKind::Bond => "bond",
        PercolationKind::Site => "site",
    }
}

/// Draws a line plot; points that cannot be shown (NaN, ≤ 0 on a log axis) are left out.
#[allow(clippy::too_many_arguments)]
fn figure(
    title: &str,
    x: (&str, &str),
    y: (&str, &str),
    series: Vec<FigureSeries>,
    log_x: bool,
    log_y: bool,
    style: SeriesStyle,
) -> Option<Figure> {
    let keep = |v: f64, log: bool| v.is_finite() && (!log || v > 0.0);
    let series: Vec<FigureSeries> = series
        .into_iter()
        .map(|s| {
            let mut out = FigureSeries {
                label: s.label,
                x: Vec::new(),
                y: Vec::new(),
                y_error: None,
            };
            for (&a, &b) in s.x.iter().zip(&s.y) {
                if keep(a, log_x) && keep(b, log_y) {
                    out.x.push(a);
                    out.y.push(b);
                }
            }
            out
        })
        .filter(|s| !s.x.is_empty())
        .collect();
    if series.is_empty() {
        return None;
    }
    let axis = |(label, unit): (&str, &str), log: bool| Axis {
        label: label.to_string(),
        unit: (!unit.is_empty()).then(|| unit.to_string()),
        scale: if log {
            AxisScale::Log
        } else {
            AxisScale::Linear
        },
    };
    let plot = LinePlot {
        title: title.to_string(),
        x: axis(x, log_x),
        y: axis(y, log_y),
        series: series
            .iter()
            .map(|s| Series {
                label: s.label.clone(),
                x: s.x.clone(),
                y: s.y.clone(),
                y_error: None,
                style,
            })
            .collect(),
    };
    let svg = catch_unwind(AssertUnwindSafe(|| render_svg(&plot, 640, 400)))
        .ok()?
        .ok()?;
    Some(Figure {
        name: String::new(),
        title: title.to_string(),
        x_label: x.0.to_string(),
        x_unit: x.1.to_string(),
        y_label: y.0.to_string(),
        y_unit: y.1.to_string(),
        series,
        svg,
    })
}

fn mean_and_error(values: &[f64]) -> (f64, f64) {
    let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    let n = finite.len() as f64;
    if finite.is_empty() {
        return (f64::NAN, f64::NAN);
    }
    let mean = finite.iter().sum::<f64>() / n;
    if finite.len() < 2 {
        return (mean, f64::NAN);
    }
    let var = finite.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, (var / n).sqrt())
}

impl Runner<'_> {
    pub(super) fn run_percolation(
        &mut self,
        spec: &PercolationSpec,
        model: &Model,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let seed = model.seed.unwrap_or(DEFAULT_SEED);
        match spec {
            PercolationSpec::Threshold(s) => {
                self.percolation_threshold(s, seed, span, keyword, emit)
            }
            PercolationSpec::Clusters(s) => self.percolation_clusters(s, seed, span, keyword, emit),
            PercolationSpec::Growth(s) => self.percolation_growth(s, seed, span, keyword, emit),
            PercolationSpec::Walkers(s) => self.percolation_walkers(s, seed, span, keyword, emit),
            PercolationSpec::OpenHops(s) => {
                self.percolation_open_hops(s, model, seed, keyword, emit)
            }
        }
    }

    fn provenance(
        &self,
        source: String,
        lattice: String,
        seed: u64,
        sweeps: u64,
        interrupted: bool,
    ) -> Provenance {
        Provenance {
            source,
            lattice,
            model: "independent random occupation (no spin model)".to_string(),
            seed,
            measurement_sweeps: sweeps,
            equilibration_sweeps: 0,
            sample_every_sweeps: 1,
            start: String::new(),
            temperatures_requested: 0,
            interrupted,
            cell: self.cell,
            kinetics: None,
        }
    }

    /// Stores a result table (under its own name) and the table beside it; a run the user
    /// interrupted shows the table it kept and stops the cell with `kept`, what it kept.
    fn keep_tables(
        &mut self,
        table: &Table,
        beside: Option<(&str, Table)>,
        keyword: Span,
        kept: Option<String>,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        self.workspace
            .insert(&table.name, Value::Table(table.clone()));
        if let Some((name, beside)) = beside {
            self.workspace.insert(name, Value::Table(beside));
        }
        if let Some(kept) = kept {
            emit(Output::Display(display::table(table, None)));
            return Err(self.interrupted(keyword, kept));
        }
        Ok(())
    }

    fn graph(
        &self,
        lattice: LatticeKind,
        size: usize,
        span: Span,
    ) -> Result<PercolationGraph, CellError> {
        PercolationGraph::lattice(lattice, size).map_err(|e| self.runtime(span, e.to_string()))
    }

    fn percolation_threshold(
        &mut self,
        spec: &ThresholdSpec,
        seed: u64,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let started = Instant::now();
        let streams = RngStreams::new(seed);
        let total = (spec.sweeps * spec.sizes.len()) as u64;
        let mut throttle = Throttle::new(format!("{}: Newman–Ziff sweeps", spec.target));
        let mut runs: Vec<NewmanZiffRun> = Vec::new();
        let mut interrupted = false;
        let chunk = (spec.sweeps / 20).max(1);
        let mut done_total = 0u64;
        for (index, &size) in spec.sizes.iter().enumerate() {
            if interrupted {
                break;
            }
            let graph = self.graph(spec.lattice, size, span)?;
            let mut rng = streams.stream(index as u64);
            let mut run: Option<NewmanZiffRun> = None;
            let mut done = 0;
            while done < spec.sweeps {
                let n = chunk.min(spec.sweeps - done);
                match newman_ziff(&graph, spec.kind, n, &mut rng, self.interrupt) {
                    Ok(part) => {
                        done += part.sweeps;
                        done_total += part.sweeps as u64;
                        let stop = part.interrupted;
                        match run.as_mut() {
                            Some(r) => r
                                .absorb(part)
                                .map_err(|e| self.runtime(span, e.to_string()))?,
                            None => run = Some(part),
                        }
                        if stop {
                            interrupted = true;
                            break;
                        }
                    }
                    Err(PercolationError::Interrupted) => {
                        interrupted = true;
                        break;
                    }
                    Err(e) => return Err(self.runtime(span, e.to_string())),
                }
                throttle.report(done_total, total, emit);
            }
            if let Some(r) = run {
                runs.push(r);
            }
        }
        let (lo, hi) = spec.window;
        let grid: Vec<f64> = (0..spec.points)
            .map(|k| lo + (hi - lo) * k as f64 / (spec.points - 1) as f64)
            .collect();
        let mut columns = vec![column("p", "", grid.clone(), None)];
        let mut wrapping_series = Vec::new();
        let mut largest_columns = Vec::new();
        for r in &runs {
            let points: Vec<_> = grid
                .iter()
                .map(|&p| r.at_probability(p))
                .collect::<Result<_, _>>()
                .map_err(|e| self.runtime(span, e.to_string()))?;
            let wrapping: Vec<f64> = points.iter().map(|q| q.wrapping_x).collect();
            wrapping_series.push(FigureSeries {
                label: format!("L = {}", r.linear_size),
                x: grid.clone(),
                y: wrapping.clone(),
                y_error: None,
            });
            columns.push(column(
                &format!("wrapping_L{}", r.linear_size),
                "",
                wrapping,
                None,
            ));
            largest_columns.push(column(
                &format!("largest_L{}", r.linear_size),
                "",
                points.iter().map(|q| q.largest_cluster_fraction).collect(),
                Some(
                    points
                        .iter()
                        .map(|q| q.largest_cluster_fraction_error)
                        .collect(),
                ),
            ));
        }
        columns.extend(largest_columns);
        let reference = threshold(spec.lattice, spec.kind);
        let crossing: Option<Result<CrossingEstimate, PercolationError>> =
            (runs.len() >= 2).then(|| {
                let mut rng = streams.stream(1 << 32);
                crossing_estimate(
                    &runs,
                    CrossingObservable::WrappingX,
                    lo,
                    hi,
                    spec.bootstrap,
                    &mut rng,
                    self.interrupt,
                )
            });
        if let Some(Ok(c)) = &crossing {
            interrupted |= c.interrupted;
        }
        let lattice = format!(
            "{} lattice, L = {}",
            lattice_name(spec.lattice),
            runs.iter()
                .map(|r| r.linear_size.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        );
        let source = format!(
            "Newman–Ziff {} percolation sweeps, wrapping along x; crossing estimate of p_c with a bootstrap error",
            kind_name(spec.kind)
        );
        let sweeps_done = runs.iter().map(|r| r.sweeps).min().unwrap_or(0) as u64;
        let table = Table {
            name: spec.target.clone(),
            columns,
            provenance: Some(self.provenance(
                source.clone(),
                lattice.clone(),
                seed,
                sweeps_done,
                interrupted,
            )),
        };
        let (p_c, error, samples, note) = match &crossing {
            Some(Ok(c)) => (c.p_c, c.error, c.bootstrap_samples as f64, None),
            Some(Err(e)) => (f64::NAN, f64::NAN, 0.0, Some(e.to_string())),
            None => (
                f64::NAN,
                f64::NAN,
                0.0,
                Some("fewer than two sizes finished".to_string()),
            ),
        };
        let pc_name = format!("{}_pc", spec.target);
        let pc_table = Table {
            name: pc_name.clone(),
            columns: vec![
                column("p_c", "", vec![p_c], Some(vec![error])),
                column("p_c_reference", "", vec![reference], None),
                column("bootstrap_samples", "", vec![samples], None),
            ],
            provenance: Some(self.provenance(source, lattice, seed, sweeps_done, interrupted)),
        };
        let kept = interrupted.then(|| {
            format!(
                "interrupted: kept {} of {} sizes ({} sweeps or more each) in `{}` and `{pc_name}`",
                runs.len(),
                spec.sizes.len(),
                sweeps_done,
                spec.target
            )
        });
        self.keep_tables(&table, Some((&pc_name, pc_table)), keyword, kept, emit)?;
        let mut text = format!(
            "{}: {} percolation on the {} lattice, L = {}, {} sweeps each, in {:.1} s\n",
            spec.target,
            kind_name(spec.kind),
            lattice_name(spec.lattice),
            spec.sizes
                .iter()
                .map(|l| l.to_string())
                .collect::<Vec<_>>()
                .join(", "),
            spec.sweeps,
            started.elapsed().as_secs_f64()
        );
        match (&crossing, note) {
            (Some(Ok(c)), _) => {
                text.push_str(&format!(
                    "crossing of the wrapping probabilities: p_c = {} ± {} (published {}; {} bootstrap resamples)\n",
                    format_number(c.p_c),
                    format_number(c.error),
                    format_number(reference),
                    c.bootstrap_samples
                ));
                for (a, b, p) in &c.pair_crossings {
                    text.push_str(&format!(
                        "  L = {a} and {b} cross at p = {}\n",
                        format_number(*p)
                    ));
                }
            }
            (_, Some(note)) => text.push_str(&format!("no crossing estimate: {note}\n")),
            _ => {}
        }
        text.push_str(&format!(
            "columns: p, wrapping_L…, largest_L…; p_c in `{pc_name}`; show it with `table {}`\n",
            spec.target
        ));
        emit(Output::Stream { text });
        if let Some(f) = figure(
            &format!(
                "wrapping probability, {} {} percolation",
                lattice_name(spec.lattice),
                kind_name(spec.kind)
            ),
            ("p", ""),
            ("wrapping probability", ""),
            wrapping_series,
            false,
            false,
            SeriesStyle::Line,
        ) {
            emit(Output::Display(display::figure(&f)));
        }
        Ok(())
    }

    fn percolation_clusters(
        &mut self,
        spec: &ClustersSpec,
        seed: u64,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let o = &spec.occupation;
        let graph = self.graph(o.lattice, o.size, span)?;
        let streams = RngStreams::new(seed);
        let mut rng = streams.stream(0);
        let mut histogram: BTreeMap<u64, u64> = BTreeMap::new();
        let mut largest = Vec::new();
        let total = (spec.realisations + spec.sweeps) as u64;
        let mut throttle = Throttle::new(format!("{}: cluster statistics", spec.target));
        let mut interrupted = false;
        for k in 0..spec.realisations {
            if self.interrupt.is_requested() {
                interrupted = true;
                break;
            }
            let r = Realisation::random(&graph, o.kind, o.p, &mut rng)
                .map_err(|e| self.runtime(span, e.to_string()))?;
            let stats = clusters(&graph, &r).map_err(|e| self.runtime(span, e.to_string()))?;
            for (s, n) in stats.size_distribution {
                *histogram.entry(s).or_insert(0) += n;
            }
            largest.push(stats.largest_cluster_fraction);
            throttle.report(k as u64 + 1, total, emit);
        }
        let done = largest.len();
        let mut point = None;
        if !interrupted {
            let mut rng = streams.stream(1);
            match newman_ziff(&graph, o.kind, spec.sweeps, &mut rng, self.interrupt) {
                Ok(run) => {
                    interrupted |= run.interrupted;
                    point = Some(
                        run.at_probability(o.p)
                            .map_err(|e| self.runtime(span, e.to_string()))?,
                    );
                }
                Err(PercolationError::Interrupted) => interrupted = true,
                Err(e) => return Err(self.runtime(span, e.to_string())),
            }
            throttle.report(total, total, emit);
        }
        let sites = graph.site_count() as f64;
        let per_site = (done.max(1) as f64) * sites;
        let sizes: Vec<f64> = histogram.keys().map(|&s| s as f64).collect();
        let n_s: Vec<f64> = histogram.values().map(|&n| n as f64 / per_site).collect();
        let lattice = format!(
            "{} lattice, L = {} ({} sites)",
            lattice_name(o.lattice),
            o.size,
            graph.site_count()
        );
        let source = format!(
            "{} percolation at p = {}: cluster sizes from {} realisations; largest cluster and ξ from {} Newman–Ziff sweeps",
            kind_name(o.kind),
            format_number(o.p),
            done,
            spec.sweeps
        );
        let table = Table {
            name: spec.target.clone(),
            columns: vec![
                column("s", "", sizes.clone(), None),
                column("n_s", "", n_s.clone(), None),
            ],
            provenance: Some(self.provenance(
                source.clone(),
                lattice.clone(),
                seed,
                spec.sweeps as u64,
                interrupted,
            )),
        };
        let (largest_mean, largest_error) = match &point {
            Some(p) => (p.largest_cluster_fraction, p.largest_cluster_fraction_error),
            None => mean_and_error(&largest),
        };
        let unit = displacement_unit(o.lattice);
        let stats_name = format!("{}_stats", spec.target);
        let reference = threshold(o.lattice, o.kind);
        let stats = Table {
            name: stats_name.clone(),
            columns: vec![
                column("p", "", vec![o.p], None),
                column(
                    "largest_cluster_fraction",
                    "",
                    vec![largest_mean],
                    Some(vec![largest_error]),
                ),
                column(
                    "mean_cluster_size",
                    "",
                    vec![point.map(|p| p.mean_cluster_size).unwrap_or(f64::NAN)],
                    None,
                ),
                column(
                    "correlation_length",
                    unit,
                    vec![point.map(|p| p.correlation_length).unwrap_or(f64::NAN)],
                    None,
                ),
                column("p_c_reference", "", vec![reference], None),
            ],
            provenance: Some(self.provenance(
                source,
                lattice,
                seed,
                spec.sweeps as u64,
                interrupted,
            )),
        };
        let kept = interrupted.then(|| {
            format!(
                "interrupted: kept the cluster sizes of {done} of {} realisations in `{}`",
                spec.realisations, spec.target
            )
        });
        self.keep_tables(&table, Some((&stats_name, stats)), keyword, kept, emit)?;
        let xi = point.map(|p| p.correlation_length).unwrap_or(f64::NAN);
        emit(Output::Stream {
            text: format!(
                "{}: {} percolation on the {} lattice, L = {}, p = {} (p_c = {}, p − p_c = {})\n\
                 largest-cluster fraction {} ± {}; mean cluster size {}; correlation length ξ = {} {unit}\n\
                 {} cluster sizes in `{}` (n_s = clusters of size s per site); the numbers in `{stats_name}`\n",
                spec.target,
                kind_name(o.kind),
                lattice_name(o.lattice),
                o.size,
                format_number(o.p),
                format_number(reference),
                format_number(o.p - reference),
                format_number(largest_mean),
                format_number(largest_error),
                format_number(point.map(|p| p.mean_cluster_size).unwrap_or(f64::NAN)),
                format_number(xi),
                sizes.len(),
                spec.target,
            ),
        });
        if let Some(f) = figure(
            &format!(
                "cluster sizes, {} {} percolation at p = {}",
                lattice_name(o.lattice),
                kind_name(o.kind),
                format_number(o.p)
            ),
            ("s", ""),
            ("n_s", ""),
            vec![FigureSeries {
                label: spec.target.clone(),
                x: sizes,
                y: n_s,
                y_error: None,
            }],
            true,
            true,
            SeriesStyle::Points,
        ) {
            emit(Output::Display(display::figure(&f)));
        }
        Ok(())
    }

    fn percolation_growth(
        &mut self,
        spec: &GrowthSpec,
        seed: u64,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let o = &spec.occupation;
        let graph = self.graph(o.lattice, o.size, span)?;
        let mut rng = RngStreams::new(seed).stream(0);
        let chunk = (spec.realisations / 20).max(1);
        let mut growth: Option<ChemicalGrowth> = None;
        let mut done = 0;
        let mut interrupted = false;
        let mut throttle = Throttle::new(format!("{}: chemical distance", spec.target));
        while done < spec.realisations {
            let n = chunk.min(spec.realisations - done);
            match chemical_growth(
                &graph,
                o.kind,
                o.p,
                n,
                spec.seeds,
                spec.max_distance,
                &mut rng,
                self.interrupt,
            ) {
                Ok(part) => match growth.as_mut() {
                    Some(g) => g
                        .absorb(&part)
                        .map_err(|e| self.runtime(span, e.to_string()))?,
                    None => growth = Some(part),
                },
                Err(PercolationError::Interrupted) => {}
                Err(e) => return Err(self.runtime(span, e.to_string())),
            }
            if self.interrupt.is_requested() {
                // The chunk stopped early; the seeds it finished are kept.
                interrupted = true;
                break;
            }
            done += n;
            throttle.report(done as u64, spec.realisations as u64, emit);
        }
        let Some(growth) = growth else {
            if !interrupted {
                return Err(self.runtime(
                    span,
                    "no site is occupied at this p, so there is no seed to grow from",
                ));
            }
            return Err(self.interrupted(
                keyword,
                "interrupted before any seed finished; nothing was stored".into(),
            ));
        };
        let fit = {
            let (x, y): (Vec<f64>, Vec<f64>) = growth
                .distance
                .iter()
                .zip(&growth.mean_sites)
                .filter(|(l, n)| **l >= 1.0 && n.is_finite() && **n > 0.0)
                .map(|(l, n)| (*l, *n))
                .unzip();
            fit_power_law_with_correction(&x, &y, None, Some(spec.band))
        };
        let lattice = format!("{} lattice, L = {}", lattice_name(o.lattice), o.size);
        let source = format!(
            "chemical-distance growth N(ℓ) by breadth-first search, {} percolation at p = {}, {} seeds",
            kind_name(o.kind),
            format_number(o.p),
            growth.seeds
        );
        let table = Table {
            name: spec.target.clone(),
            columns: vec![
                column("l", "", growth.distance.clone(), None),
                column("N", "", growth.mean_sites.clone(), None),
                column(
                    "surviving_seeds",
                    "",
                    growth.surviving_seeds.iter().map(|&s| s as f64).collect(),
                    None,
                ),
            ],
            provenance: Some(self.provenance(
                source.clone(),
                lattice.clone(),
                seed,
                0,
                interrupted,
            )),
        };
        let fit_name = format!("{}_fit", spec.target);
        let (d_l, d_l_error, amplitude, amplitude_error, fit_note) = match &fit {
            Ok(f) => (
                f.parameters[1],
                f.standard_errors[1],
                f.parameters[0],
                f.standard_errors[0],
                None,
            ),
            Err(e) => (f64::NAN, f64::NAN, f64::NAN, f64::NAN, Some(e.to_string())),
        };
        let fit_table = Table {
            name: fit_name.clone(),
            columns: vec![
                column("d_l", "", vec![d_l], Some(vec![d_l_error])),
                column(
                    "amplitude",
                    "",
                    vec![amplitude],
                    Some(vec![amplitude_error]),
                ),
            ],
            provenance: Some(self.provenance(source, lattice, seed, 0, interrupted)),
        };
        let kept = interrupted.then(|| {
            format!(
                "interrupted: kept {} seeds in `{}` and the fit in `{fit_name}`",
                growth.seeds, spec.target
            )
        });
        self.keep_tables(&table, Some((&fit_name, fit_table)), keyword, kept, emit)?;
        let mut text = format!(
            "{}: chemical-distance growth on the {} lattice, L = {}, {} percolation at p = {} ({} seeds)\n",
            spec.target,
            lattice_name(o.lattice),
            o.size,
            kind_name(o.kind),
            format_number(o.p),
            growth.seeds
        );
        match &fit_note {
            None => {
                text.push_str(&format!(
                    "N(ℓ) ∝ ℓ^d_ℓ (with a 1/ℓ correction) over ℓ = {}..{}: d_ℓ = {} ± {}",
                    format_number(spec.band.0),
                    format_number(spec.band.1),
                    format_number(d_l),
                    format_number(d_l_error)
                ));
                if o.lattice != LatticeKind::Square {
                    text.push_str(&format!(
                        " (3D percolation at p_c: d_f/d_min = {CHEMICAL_DIMENSION_3D})"
                    ));
                }
                text.push('\n');
            }
            Some(note) => text.push_str(&format!("the power-law fit failed: {note}\n")),
        }
        emit(Output::Stream { text });
        let mut series = vec![FigureSeries {
            label: "N(ℓ)".to_string(),
            x: growth.distance.clone(),
            y: growth.mean_sites.clone(),
            y_error: None,
        }];
        if let Ok(f) = &fit {
            let xs: Vec<f64> = growth
                .distance
                .iter()
                .copied()
                .filter(|l| *l >= spec.band.0 && *l <= spec.band.1)
                .collect();
            let ys = xs
                .iter()
                .map(|&l| {
                    f.parameters[0]
                        * l.powf(f.parameters[1])
                        * (1.0 + f.parameters.get(2).copied().unwrap_or(0.0) / l)
                })
                .collect();
            series.push(FigureSeries {
                label: format!("fit, d_ℓ = {}", format_number(d_l)),
                x: xs,
                y: ys,
                y_error: None,
            });
        }
        if let Some(f) = figure(
            "chemical-distance growth",
            ("ℓ", ""),
            ("N(ℓ)", ""),
            series,
            true,
            true,
            SeriesStyle::LineAndPoints,
        ) {
            emit(Output::Display(display::figure(&f)));
        }
        Ok(())
    }

    fn percolation_walkers(
        &mut self,
        spec: &WalkersSpec,
        seed: u64,
        span: Span,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let o: &Occupation = &spec.occupation;
        let graph = self.graph(o.lattice, o.size, span)?;
        let streams = RngStreams::new(seed);
        let mut rng = streams.stream(0);
        let diluted = Realisation::random(&graph, o.kind, o.p, &mut rng)
            .map_err(|e| self.runtime(span, e.to_string()))?;
        let stats = clusters(&graph, &diluted).map_err(|e| self.runtime(span, e.to_string()))?;
        let members: Vec<usize> = (0..graph.site_count())
            .filter(|&s| stats.label[s] == stats.largest_label)
            .collect();
        if members.is_empty() {
            return Err(self.runtime(
                span,
                "no site is occupied at this p, so no walker can start",
            ));
        }
        // Starts spread evenly over the cluster's sites (in index order).
        let starts: Vec<usize> = (0..spec.walkers)
            .map(|k| members[k * members.len() / spec.walkers])
            .collect();
        let full = Realisation {
            kind: o.kind,
            open: vec![true; diluted.open.len()],
        };
        let chunk = (spec.walkers / 20).max(1);
        let samples = (spec.steps / spec.sample_every) as usize + 1;
        let mut sums = [vec![0.0; samples], vec![0.0; samples]];
        let mut series: [Vec<Vec<f64>>; 2] = [Vec::new(), Vec::new()];
        let mut done = [0usize; 2];
        let mut interrupted = false;
        let mut throttle = Throttle::new(format!("{}: walkers", spec.target));
        let total = 2 * spec.walkers as u64;
        'outer: for (which, realisation) in [&diluted, &full].into_iter().enumerate() {
            let mut rng = streams.stream(1 + which as u64);
            let mut begun = 0;
            while begun < spec.walkers {
                let n = chunk.min(spec.walkers - begun);
                match random_walks(
                    &graph,
                    realisation,
                    &starts[begun..begun + n],
                    n,
                    spec.steps,
                    spec.sample_every,
                    &mut rng,
                    self.interrupt,
                ) {
                    Ok(walks) => {
                        for (s, m) in sums[which].iter_mut().zip(&walks.mean_square_displacement) {
                            *s += m * walks.walkers as f64;
                        }
                        done[which] += walks.walkers;
                        series[which].extend(walks.x_series);
                        if walks.interrupted {
                            interrupted = true;
                            break 'outer;
                        }
                    }
                    Err(PercolationError::Interrupted) => {
                        interrupted = true;
                        break 'outer;
                    }
                    Err(e) => return Err(self.runtime(span, e.to_string())),
                }
                begun += n;
                throttle.report((done[0] + done[1]) as u64, total, emit);
            }
        }
        let times: Vec<f64> = (0..samples)
            .map(|k| (k as u64 * spec.sample_every) as f64)
            .collect();
        let msd = |which: usize| -> Vec<f64> {
            if done[which] == 0 {
                vec![f64::NAN; samples]
            } else {
                sums[which].iter().map(|s| s / done[which] as f64).collect()
            }
        };
        let (msd_cluster, msd_full) = (msd(0), msd(1));
        // Welch PSD of the unwrapped x coordinate, averaged over walkers; segments of a
        // quarter of the series (a power of two) with half overlap (Welch, IEEE Trans.
        // Audio Electroacoust. 15, 70 (1967)).
        let segment = {
            let mut n = 8usize;
            while n * 2 <= samples / 4 {
                n *= 2;
            }
            n.min(samples)
        };
        let settings = WelchSettings::hann(1.0 / spec.sample_every as f64, segment);
        let psd = |list: &[Vec<f64>]| -> Result<(Vec<f64>, Vec<f64>), String> {
            let mut f = Vec::new();
            let mut total: Vec<f64> = Vec::new();
            for x in list {
                let s = welch_psd(x, &settings).map_err(|e| e.to_string())?;
                if total.is_empty() {
                    f = s.frequencies_hertz.clone();
                    total = vec![0.0; s.density_per_hertz.len()];
                }
                total
                    .iter_mut()
                    .zip(&s.density_per_hertz)
                    .for_each(|(t, d)| *t += d);
            }
            let n = list.len().max(1) as f64;
            Ok((f, total.into_iter().map(|t| t / n).collect()))
        };
        let (f_cluster, psd_cluster) = psd(&series[0]).map_err(|e| self.runtime(span, e))?;
        let (f_full, psd_full) = psd(&series[1]).map_err(|e| self.runtime(span, e))?;
        let frequencies = if f_cluster.is_empty() {
            f_full
        } else {
            f_cluster
        };
        let bins = frequencies.len();
        let pad = |v: Vec<f64>| {
            if v.len() == bins {
                v
            } else {
                vec![f64::NAN; bins]
            }
        };
        // The zero-frequency bin carries only the removed mean: leave it out.
        let skip = |v: Vec<f64>| v.into_iter().skip(1).collect::<Vec<f64>>();
        let (frequencies, psd_cluster, psd_full) = (
            skip(frequencies),
            skip(pad(psd_cluster)),
            skip(pad(psd_full)),
        );
        let u2 = squared_unit(o.lattice);
        let psd_unit = format!("{u2}·step");
        let lattice = format!("{} lattice, L = {}", lattice_name(o.lattice), o.size);
        let source = format!(
            "blind-ant random walks, {} steps: {} walkers on the largest cluster of {} percolation at p = {} and {} on the full lattice",
            spec.steps,
            done[0],
            kind_name(o.kind),
            format_number(o.p),
            done[1]
        );
        let table = Table {
            name: spec.target.clone(),
            columns: vec![
                column("t", "step", times.clone(), None),
                column("msd_cluster", &u2, msd_cluster.clone(), None),
                column("msd_full", &u2, msd_full.clone(), None),
            ],
            provenance: Some(self.provenance(
                source.clone(),
                lattice.clone(),
                seed,
                spec.steps,
                interrupted,
            )),
        };
        let psd_name = format!("{}_psd", spec.target);
        let psd_table = Table {
            name: psd_name.clone(),
            columns: vec![
                column("f", "1/step", frequencies.clone(), None),
                column("psd_cluster", &psd_unit, psd_cluster.clone(), None),
                column("psd_full", &psd_unit, psd_full.clone(), None),
            ],
            provenance: Some(self.provenance(source, lattice, seed, spec.steps, interrupted)),
        };
        let kept = interrupted.then(|| {
            format!(
                "interrupted: kept {} walkers on the cluster and {} on the full lattice in `{}` and `{psd_name}`",
                done[0], done[1], spec.target
            )
        });
        self.keep_tables(&table, Some((&psd_name, psd_table)), keyword, kept, emit)?;
        let last = samples - 1;
        emit(Output::Stream {
            text: format!(
                "{}: {} walkers × {} steps on the {} lattice, L = {}; largest cluster at p = {} holds {} of the sites\n\
                 MSD after {} steps: {} {u2} on the cluster, {} {u2} on the full lattice\n\
                 columns: t, msd_cluster, msd_full; spectra of x(t) in `{psd_name}` (f, psd_cluster, psd_full)\n",
                spec.target,
                spec.walkers,
                spec.steps,
                lattice_name(o.lattice),
                o.size,
                format_number(o.p),
                format_number(stats.largest_cluster_fraction),
                spec.steps / spec.sample_every * spec.sample_every,
                format_number(msd_cluster[last]),
                format_number(msd_full[last]),
            ),
        });
        let both = |a: &str, b: &str, x: &[f64], ya: Vec<f64>, yb: Vec<f64>| {
            vec![
                FigureSeries {
                    label: a.to_string(),
                    x: x.to_vec(),
                    y: ya,
                    y_error: None,
                },
                FigureSeries {
                    label: b.to_string(),
                    x: x.to_vec(),
                    y: yb,
                    y_error: None,
                },
            ]
        };
        if let Some(f) = figure(
            "walkers: mean-square displacement",
            ("t", "step"),
            ("MSD", &u2),
            both(
                "largest cluster",
                "full lattice",
                &times,
                msd_cluster,
                msd_full,
            ),
            true,
            true,
            SeriesStyle::Line,
        ) {
            emit(Output::Display(display::figure(&f)));
        }
        if let Some(f) = figure(
            "walkers: spectrum of x(t)",
            ("f", "1/step"),
            ("PSD", &psd_unit),
            both(
                "largest cluster",
                "full lattice",
                &frequencies,
                psd_cluster,
                psd_full,
            ),
            true,
            true,
            SeriesStyle::Line,
        ) {
            emit(Output::Display(display::figure(&f)));
        }
        Ok(())
    }

    fn percolation_open_hops(
        &mut self,
        spec: &OpenHopsSpec,
        model: &Model,
        seed: u64,
        keyword: Span,
        emit: &mut dyn FnMut(Output),
    ) -> Result<(), CellError> {
        let (Some(lattice), Some(couplings)) = (&model.lattice, &model.couplings) else {
            return Err(CellError::from_problems(
                self.source,
                &[Problem::new(
                    ErrorKind::Name,
                    keyword,
                    "no lattice and couplings are declared",
                )
                .with_help(
                    "declare e.g. `lattice pyrochlore L = 4` and `couplings nearest J_eff = 1.8 K`",
                )],
            ));
        };
        let Some(dynamics) = &model.dynamics else {
            return Err(CellError::from_problems(
                self.source,
                &[Problem::new(
                    ErrorKind::Name,
                    keyword,
                    "`percolation open_hops` needs a dynamics rule: which hops are open depends on its attempt times by gate class",
                )
                .with_help("declare one first, e.g. `dynamics single_flip, rates = gated, fast = 1 µs, slow = 10 ms` (REFERENCE.md §4)")],
            ));
        };
        let open = open_classes(&dynamics.attempt_times, spec.open_within);
        let lat = Pyrochlore::new(lattice.cells_per_side)
            .map_err(|e| self.runtime(keyword, e.to_string()))?;
        let general = GeneralModel {
            exchange: if couplings.is_nearest() {
                Some(ExchangeCouplings::nearest_neighbour(
                    couplings.j_eff_kelvin,
                    CouplingConvention::IsingPseudospins,
                ))
            } else {
                couplings.exchange
            },
            dipolar_kelvin: couplings.dipolar_kelvin,
            zeeman: model.field.as_ref().map(|f| f.field),
            direction: None,
            rule: FlipRule::Metropolis,
            loops_per_sweep: spec.loops_per_sweep,
            ladder: Default::default(),
        };
        let table =
            coupling_table(&lat, &general).map_err(|e| self.runtime(keyword, e.to_string()))?;
        let diamond = PercolationGraph::pyrochlore_diamond(&lat)
            .map_err(|e| self.runtime(keyword, e.to_string()))?;
        let streams = RngStreams::new(seed);
        let per_temperature =
            spec.equilibration_sweeps + spec.states as u64 * spec.sample_every_sweeps;
        let total = per_temperature * spec.temperatures_kelvin.len() as u64;
        let mut throttle = Throttle::new(format!("{}: equilibrated states", spec.target));
        let mut rows: Vec<[f64; 8]> = Vec::new();
        let mut exits_by_t: Vec<(f64, ExitCount, ExitCount)> = Vec::new();
        let mut interrupted = false;
        let mut done = 0u64;
        let n_spins = lat.spin_count() as f64;
        'temperatures: for (index, &t) in spec.temperatures_kelvin.iter().enumerate() {
            let mut rng = streams.stream(index as u64);
            let sigma = initial_configuration(&lat, Start::Random, &mut rng);
            let mut sampler =
                LocalFieldSampler::new(&lat, &table, t, FlipRule::Metropolis, sigma, rng)
                    .map_err(|e| self.runtime(keyword, e.to_string()))?;
            let mut loops = (spec.loops_per_sweep > 0).then(|| LoopMoves::new(&lat));
            let mut thermal = ExitCount::default();
            let mut fresh_total = ExitCount::default();
            let mut sweep = |sampler: &mut LocalFieldSampler<'_>| {
                sampler.sweep();
                if let Some(moves) = loops.as_mut() {
                    for _ in 0..spec.loops_per_sweep {
                        moves.attempt(sampler);
                    }
                }
            };
            for _ in 0..spec.equilibration_sweeps {
                if self.interrupt.is_requested() {
                    interrupted = true;
                    break 'temperatures;
                }
                sweep(&mut sampler);
                done += 1;
                throttle.report(done, total, emit);
            }
            for state in 0..spec.states {
                for _ in 0..spec.sample_every_sweeps {
                    if self.interrupt.is_requested() {
                        interrupted = true;
                        if thermal.monopoles + fresh_total.monopoles > 0 || state > 0 {
                            exits_by_t.push((t, thermal, fresh_total));
                        }
                        break 'temperatures;
                    }
                    sweep(&mut sampler);
                    done += 1;
                    throttle.report(done, total, emit);
                }
                let sigma = sampler.sigma();
                let graph = OpenHopGraph::from_state(&lat, sigma, open)
                    .map_err(|e| self.runtime(keyword, e.to_string()))?;
                let own = graph.monopole_exits(&lat, sigma);
                let fresh = fresh_pair_exits(&lat, sigma, open)
                    .map_err(|e| self.runtime(keyword, e.to_string()))?;
                let cluster = clusters(&diamond, &graph.realisation())
                    .map_err(|e| self.runtime(keyword, e.to_string()))?;
                let charges = sampler.charge_counts();
                thermal = thermal.combined(own);
                fresh_total = fresh_total.combined(fresh);
                rows.push([
                    t,
                    state as f64,
                    graph.open_bond_fraction(),
                    graph.distance_from_threshold(),
                    own.fraction(),
                    fresh.fraction(),
                    cluster.largest_cluster_fraction,
                    (charges.single + 2 * charges.double) as f64 / n_spins,
                ]);
            }
            exits_by_t.push((t, thermal, fresh_total));
        }
        let names = [
            ("T", "K"),
            ("state", ""),
            ("open_fraction", ""),
            ("distance_from_p_c", ""),
            ("monopole_exit_fraction", ""),
            ("fresh_pair_exit_fraction", ""),
            ("largest_cluster_fraction", ""),
            ("monopole_density", ""),
        ];
        let columns = names
            .iter()
            .enumerate()
            .map(|(k, (name, unit))| column(name, unit, rows.iter().map(|r| r[k]).collect(), None))
            .collect();
        let source = format!(
            "open hop directions of equilibrated states (Metropolis{} sweeps); dynamics rule {}; classes open within ×{} of the fastest: {:?}",
            if spec.loops_per_sweep > 0 { format!(" + {} loop moves per", spec.loops_per_sweep) } else { String::new() },
            dynamics.rates_description,
            format_number(spec.open_within),
            open
        );
        let result = Table {
            name: spec.target.clone(),
            columns,
            provenance: Some(Provenance {
                source,
                lattice: lattice.describe(),
                model: couplings.describe(),
                seed,
                measurement_sweeps: spec.states as u64 * spec.sample_every_sweeps,
                equilibration_sweeps: spec.equilibration_sweeps,
                sample_every_sweeps: spec.sample_every_sweeps,
                start: "Random".to_string(),
                temperatures_requested: spec.temperatures_kelvin.len(),
                interrupted,
                cell: self.cell,
                kinetics: None,
            }),
        };
        let kept = interrupted.then(|| {
            format!(
                "interrupted: kept {} states in `{}`",
                rows.len(),
                spec.target
            )
        });
        self.keep_tables(&result, None, keyword, kept, emit)?;
        let mut text = format!(
            "{}: open hop directions under the dynamics rule ({}), {} states per temperature; diamond bond p_c = {}\n",
            spec.target,
            dynamics.rates_description,
            spec.states,
            format_number(DIAMOND_BOND_THRESHOLD)
        );
        for (t, thermal, fresh) in &exits_by_t {
            let open_fractions: Vec<f64> =
                rows.iter().filter(|r| r[0] == *t).map(|r| r[2]).collect();
            let (mean, error) = mean_and_error(&open_fractions);
            text.push_str(&format!(
                "  T = {} K: open bonds {} ± {} ({} p_c by {}); a fresh monopole's exits per bond {} ({} p_c by {}); thermal monopoles: {}\n",
                format_number(*t),
                format_number(mean),
                format_number(error),
                if mean >= DIAMOND_BOND_THRESHOLD { "above" } else { "below" },
                format_number((mean - DIAMOND_BOND_THRESHOLD).abs()),
                format_number(fresh.fraction()),
                if fresh.fraction() >= DIAMOND_BOND_THRESHOLD { "above" } else { "below" },
                format_number((fresh.fraction() - DIAMOND_BOND_THRESHOLD).abs()),
                if thermal.monopoles == 0 {
                    "none".to_string()
                } else {
                    format!("{} seen, exits per bond {}", thermal.monopoles, format_number(thermal.fraction()))
                }
            ));
        }
        text.push_str(
            "open bonds: spins whose gate class is open (directions ignored); exits: bonds that are open and carry the monopole's charge onward (at most 3 of 4)\n",
        );
        if dynamics.transverse == crate::workspace::TransverseSource::Dipolar {
            text.push_str("note: the open-hop graph uses the nearest-neighbour gate classes, not the dipolar what-if\n");
        }
        emit(Output::Stream { text });
        Ok(())
    }
}
