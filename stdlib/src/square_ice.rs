//! Square ice: the two-dimensional six-vertex geometry (physics-reference §1).
//!
//! Spins sit on the bonds of an `L×L` periodic square lattice of vertices
//! (2L² spins): bond `2v` joins vertex `v = x·L + y` to `v + x̂`, bond
//! `2v + 1` joins it to `v + ŷ`; σ = +1 points the arrow along +x̂ / +ŷ.
//! The charge of a vertex is `q_v = (n_out − n_in)/2`, and the model
//! `H = J Σ_v q_v²` makes the six two-in–two-out vertices degenerate ground
//! states (E = 0), three-in–one-out vertices cost J and four-in vertices 4J.
//! Its residual entropy is Lieb's exact ½ ln (4/3)^{3/2} per spin
//! (Lieb, PRL 18, 692 (1967)), the exact check of the thermodynamic
//! integration in [`crate::entropy`].
//!
//! High-temperature constants (derived): `E_∞ = J/2` per spin (⟨q²⟩ = 1 per
//! vertex, two spins per vertex) and, for L ≥ 3, an energy variance of
//! `¾ J²` per spin (q² = 1 + ½ Σ of six independent ±1 pair products per vertex).

use crate::control::{Interrupt, ProgressFn, SharedProgress};
use crate::entropy::{EnergyPoint, HighTemperatureTail};
use crate::observe::{blocking_analysis, Sample, ThermodynamicSeries};
use crate::rng::{RngStreams, SpinRng};
use crate::scan::{BinnedSeries, ScanError, ScanPoint, ScanResult, ScanSettings, PROGRESS_LABEL};
use rand::Rng;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Largest L accepted (2L² spins; 2·4096² i8 = 32 MiB).
pub const MAX_SQUARE_ICE_SIDE: usize = 4096;

/// The periodic square-ice lattice.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct SquareIce {
    side: usize,
}

impl SquareIce {
    /// `L×L` vertices, `3 ≤ L ≤ MAX_SQUARE_ICE_SIDE` (L ≥ 3 so no two
    /// vertices share two bonds); `None` otherwise.
    pub fn new(side: usize) -> Option<Self> {
        (3..=MAX_SQUARE_ICE_SIDE)
            .contains(&side)
            .then_some(Self { side })
    }

    /// L.
    pub fn side(&self) -> usize {
        self.side
    }

    /// 2L².
    pub fn spin_count(&self) -> usize {
        2 * self.side * self.side
    }

    /// L².
    pub fn vertex_count(&self) -> usize {
        self.side * self.side
    }

    /// The two vertices of bond `spin`: `[tail, head]` (the arrow points
    /// from tail to head for σ = +1).
    pub fn vertices_of(&self, spin: usize) -> [usize; 2] {
        let l = self.side;
        let v = spin / 2;
        let (x, y) = (v / l, v % l);
        let head = if spin.is_multiple_of(2) {
            ((x + 1) % l) * l + y
        } else {
            x * l + (y + 1) % l
        };
        [v, head]
    }

    /// Vertex charge `q_v = (n_out − n_in)/2` for every vertex.
    pub fn charges(&self, sigma: &[i8]) -> Vec<i8> {
        let mut twice = vec![0i8; self.vertex_count()];
        for (s, &x) in sigma.iter().enumerate() {
            let [tail, head] = self.vertices_of(s);
            twice[tail] += x;
            twice[head] -= x;
        }
        twice.into_iter().map(|q| q / 2).collect()
    }

    /// `E = J Σ_v q_v²` (K).
    pub fn energy_kelvin(&self, j_kelvin: f64, sigma: &[i8]) -> f64 {
        j_kelvin
            * self
                .charges(sigma)
                .iter()
                .map(|&q| (q as i64 * q as i64) as f64)
                .sum::<f64>()
    }

    /// High-temperature constants per spin (module docs).
    pub fn high_temperature_tail(&self, j_kelvin: f64) -> HighTemperatureTail {
        HighTemperatureTail {
            infinite_temperature_energy_per_spin_kelvin: 0.5 * j_kelvin,
            energy_variance_per_spin_kelvin2: 0.75 * j_kelvin * j_kelvin,
        }
    }
}

/// Single-flip Metropolis sampler of square ice keeping `2q_v` per vertex.
#[derive(Clone, Debug)]
pub struct SquareIceMetropolis {
    lattice: SquareIce,
    j_kelvin: f64,
    temperature_kelvin: f64,
    sigma: Vec<i8>,
    twice_charge: Vec<i8>,
    energy_quarters: i64,
    rng: SpinRng,
}

impl SquareIceMetropolis {
    /// Start from the ice state with all arrows along +x̂ and +ŷ (every vertex two-in–two-out).
    pub fn new(lattice: SquareIce, j_kelvin: f64, temperature_kelvin: f64, rng: SpinRng) -> Self {
        let sigma = vec![1i8; lattice.spin_count()];
        let twice_charge = vec![0i8; lattice.vertex_count()];
        Self {
            lattice,
            j_kelvin,
            temperature_kelvin,
            sigma,
            twice_charge,
            energy_quarters: 0,
            rng,
        }
    }

    /// One sweep of 2L² attempts at random bonds; returns accepted flips.
    pub fn sweep(&mut self) -> u64 {
        let n = self.sigma.len();
        // ΔE/J in quarter units for (2q_tail, 2q_head) before a flip of σ:
        // q changes by ∓σ at the tail and ±σ at the head.
        let mut accepted = 0;
        for _ in 0..n {
            let s = self.rng.gen_range(0..n);
            let [tail, head] = self.lattice.vertices_of(s);
            let x = self.sigma[s];
            let (a, b) = (
                self.twice_charge[tail] as i64,
                self.twice_charge[head] as i64,
            );
            let (a2, b2) = (a - 2 * x as i64, b + 2 * x as i64);
            // E = J Σ q² = (J/4) Σ (2q)².
            let delta_quarters = a2 * a2 + b2 * b2 - a * a - b * b;
            let delta = self.j_kelvin * delta_quarters as f64 / 4.0;
            let accept = delta <= 0.0
                || (self.temperature_kelvin > 0.0
                    && self.rng.gen::<f64>() < (-delta / self.temperature_kelvin).exp());
            if accept {
                self.sigma[s] = -x;
                self.twice_charge[tail] = a2 as i8;
                self.twice_charge[head] = b2 as i8;
                self.energy_quarters += delta_quarters;
                accepted += 1;
            }
        }
        accepted
    }

    /// Energy (K).
    pub fn energy_kelvin(&self) -> f64 {
        self.j_kelvin * self.energy_quarters as f64 / 4.0
    }

    /// Pseudospins.
    pub fn sigma(&self) -> &[i8] {
        &self.sigma
    }
}

/// Mean energy per spin at each temperature (parallel over temperatures,
/// stream `k` for temperature `k`); stops early on interrupt, returning the
/// points finished. Temperatures that are not positive are skipped.
pub fn square_ice_energies(
    lattice: &SquareIce,
    j_kelvin: f64,
    temperatures_kelvin: &[f64],
    equilibration_sweeps: u64,
    measurement_sweeps: u64,
    seed: u64,
    interrupt: &Interrupt,
) -> Vec<EnergyPoint> {
    let streams = RngStreams::new(seed);
    let n = lattice.spin_count() as f64;
    temperatures_kelvin
        .par_iter()
        .enumerate()
        .filter(|(_, t)| t.is_finite() && **t > 0.0)
        .filter_map(|(k, &t)| {
            let mut m =
                SquareIceMetropolis::new(lattice.clone(), j_kelvin, t, streams.stream(k as u64));
            for _ in 0..equilibration_sweeps {
                m.sweep();
            }
            let mut series = Vec::with_capacity(measurement_sweeps as usize);
            for i in 0..measurement_sweeps {
                if i % 64 == 0 && interrupt.is_requested() {
                    return None;
                }
                m.sweep();
                series.push(m.energy_kelvin() / n);
            }
            let b = blocking_analysis(&series)?;
            Some(EnergyPoint {
                temperature_kelvin: t,
                energy_per_spin_kelvin: b.estimate(),
            })
        })
        .collect()
}

/// A temperature scan of square ice with `H = J Σ_v q_v²`, `J = settings.model.j_eff_kelvin`
/// and `L = settings.cells_per_side` (vertices per side), parallel over temperatures
/// (stream `k` for temperature `k`). Every chain starts from the ordered ice state
/// (`settings.start` is not used). The points carry energy and specific heat per spin
/// (the magnetisation and charge estimates are zero: this sampler does not record them).
/// On interrupt, the finished temperatures are returned with `interrupted = true`.
pub fn run_square_ice_scan(
    settings: &ScanSettings,
    interrupt: &Interrupt,
    progress: ProgressFn,
) -> Result<ScanResult, ScanError> {
    settings.validate()?;
    let lattice = SquareIce::new(settings.cells_per_side).ok_or(ScanError::SquareIceSize {
        side: settings.cells_per_side,
    })?;
    let counter = SharedProgress::start(PROGRESS_LABEL, settings.total_sweeps(), progress);
    let streams = RngStreams::new(settings.seed);
    let outcomes: Vec<Option<ScanPoint>> = settings
        .temperatures_kelvin
        .par_iter()
        .enumerate()
        .map(|(k, &t)| {
            square_ice_temperature(
                &lattice,
                settings,
                t,
                streams.stream(k as u64),
                interrupt,
                &counter,
            )
        })
        .collect();
    let complete = outcomes.iter().all(Option::is_some);
    Ok(ScanResult {
        settings: settings.clone(),
        points: outcomes.into_iter().flatten().collect(),
        interrupted: !complete,
    })
}

/// One temperature of a square-ice scan; `None` if interrupted.
fn square_ice_temperature(
    lattice: &SquareIce,
    settings: &ScanSettings,
    temperature_kelvin: f64,
    rng: SpinRng,
    interrupt: &Interrupt,
    counter: &SharedProgress,
) -> Option<ScanPoint> {
    if interrupt.is_requested() {
        return None;
    }
    let j = settings.model.j_eff_kelvin;
    let mut chain = SquareIceMetropolis::new(lattice.clone(), j, temperature_kelvin, rng);
    for _ in 0..settings.equilibration_sweeps {
        if interrupt.is_requested() {
            return None;
        }
        chain.sweep();
        counter.unit_done();
    }
    let mut series = ThermodynamicSeries::new(lattice.spin_count(), lattice.vertex_count());
    let mut energies = BinnedSeries::new();
    let mut accepted = 0u64;
    for sweep in 1..=settings.measurement_sweeps {
        if interrupt.is_requested() {
            return None;
        }
        accepted += chain.sweep();
        if sweep % settings.sample_every_sweeps == 0 {
            energies.push(chain.energy_kelvin());
            series.push(&Sample {
                energy_kelvin: chain.energy_kelvin(),
                magnetisation: [0.0; 3],
                single_charges: 0,
                double_charges: 0,
            });
        }
        counter.unit_done();
    }
    let th = series.thermodynamics(temperature_kelvin)?;
    let attempted = settings.measurement_sweeps * lattice.spin_count() as u64;
    let mut point = ScanPoint::from_thermodynamics(
        temperature_kelvin,
        &th,
        accepted as f64 / attempted.max(1) as f64,
        settings.sample_every_sweeps,
    );
    point.diagnostics = energies.diagnostics(settings.sample_every_sweeps);
    Some(point)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::entropy::{entropy_by_thermodynamic_integration, integration_temperatures_kelvin};

    #[test]
    fn incremental_energy_and_charges_are_consistent() {
        let lat = SquareIce::new(6).unwrap();
        let mut m = SquareIceMetropolis::new(lat.clone(), 1.0, 1.3, RngStreams::new(1).stream(0));
        for _ in 0..100 {
            m.sweep();
        }
        assert!((m.energy_kelvin() - lat.energy_kelvin(1.0, m.sigma())).abs() < 1e-12);
        // Total charge on a torus is zero (derived: each bond adds +1 and −1).
        assert_eq!(
            lat.charges(m.sigma())
                .iter()
                .map(|&q| q as i64)
                .sum::<i64>(),
            0
        );
        assert!(SquareIce::new(2).is_none());
    }

    #[test]
    fn square_ice_entropy_is_liebs() {
        // Lieb, PRL 18, 692 (1967), exact: ½ ln (4/3)^{3/2} = 0.215762 per spin;
        // within 0.003 (L = 32: the torus's finite-size excess is of order
        // ln N / N, below 0.002).
        let lieb = 0.5 * 1.5 * (4.0f64 / 3.0).ln();
        let lat = SquareIce::new(32).unwrap();
        let temps = integration_temperatures_kelvin(20.0, 0.12, 40);
        let points = square_ice_energies(&lat, 1.0, &temps, 500, 4000, 7, &Interrupt::new());
        assert_eq!(points.len(), temps.len());
        let s =
            entropy_by_thermodynamic_integration(&points, lat.high_temperature_tail(1.0)).unwrap();
        let s0 = s.last().unwrap().entropy_per_spin;
        eprintln!("square ice: S = {} ± {}", s0.mean, s0.error);
        assert!(
            (s0.mean - lieb).abs() < 0.003,
            "S = {} ± {}",
            s0.mean,
            s0.error
        );
        // And far from the free-spin ln 2 and from Pauling's 2D estimate
        // ½ ln(3/2) = 0.2027 (Pauling 1935) by more than the error.
        assert!(s0.error < 0.001);
    }
}
