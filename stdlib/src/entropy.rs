//! Entropy by thermodynamic integration from infinite temperature.
//!
//! `S(T) = ln 2 − ∫_T^∞ C(T')/T' dT'` per spin (physics-reference §4). With
//! `dE = C dT` and integration by parts this equals
//!
//! `S(β) = ln 2 + β (E(β) − E_∞) − ∫_0^β (E(β') − E_∞) dβ'`   (derived),
//!
//! which is what is evaluated: the mean energy is measured far more
//! precisely than its fluctuation, and no numerical derivative is needed.
//! `E_∞` is the infinite-temperature energy per spin.
//!
//! * High-temperature tail, `0 < β' < β_1` (below the highest measured
//!   temperature): analytic, from the leading term of the high-temperature
//!   expansion `E − E_∞ = −v β + O(β²)`, where `v` is the variance per spin
//!   of the energy over independent random pseudospins (for a pair model
//!   `v = Σ_{i<j} K_ij²/N`, derived). Its systematic uncertainty is taken as
//!   the size of the neglected next term, estimated from the mismatch
//!   between the first measured energy and `−v β_1`.
//! * Between measured points: piecewise-quadratic (Lagrange) interpolation
//!   of `E(β)` through three neighbouring points, integrated exactly over
//!   each interval (local error O(h³)).
//! * Statistical error: the result is linear in the measured energies, so
//!   independent errors propagate exactly through the quadrature weights.

use crate::observe::Estimate;
use serde::{Deserialize, Serialize};
use std::fmt;

/// Gas constant R (J/(mol K)), CODATA 2018 (N_A k_B, exact).
pub const GAS_CONSTANT_JOULE_PER_MOLE_KELVIN: f64 = 8.314_462_618;

/// A measured mean energy at one temperature.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct EnergyPoint {
    /// T (K).
    pub temperature_kelvin: f64,
    /// ⟨E⟩/N (K) with its error.
    pub energy_per_spin_kelvin: Estimate,
}

/// The analytic high-temperature behaviour `E/N ≈ E_∞ − v/T`.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct HighTemperatureTail {
    /// `E_∞` per spin (K).
    pub infinite_temperature_energy_per_spin_kelvin: f64,
    /// `v`, energy variance per spin at infinite temperature (K²).
    pub energy_variance_per_spin_kelvin2: f64,
}

/// Entropy at one measured temperature.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct EntropyPoint {
    /// T (K).
    pub temperature_kelvin: f64,
    /// S/N (k_B = 1) with its error (statistical and tail, in quadrature).
    pub entropy_per_spin: Estimate,
    /// The same in J/(mol K) per mole of spins.
    pub entropy_joule_per_mole_kelvin: Estimate,
}

/// Why the integration could not be done.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum EntropyError {
    /// Fewer than 3 temperatures.
    TooFewPoints {
        /// Points given.
        points: usize,
    },
    /// A temperature is not positive and finite, or repeated, or an energy is not finite.
    BadPoint {
        /// Index in the input.
        index: usize,
    },
}

impl fmt::Display for EntropyError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            EntropyError::TooFewPoints { points } => write!(
                f,
                "thermodynamic integration needs at least 3 temperatures (got {points})"
            ),
            EntropyError::BadPoint { index } => write!(
                f,
                "point {index}: temperatures must be positive, finite and distinct, energies finite"
            ),
        }
    }
}

impl std::error::Error for EntropyError {}

/// `∫_a^b L_p(x) dx` for the three Lagrange basis polynomials through `x`.
fn quadratic_weights(x: [f64; 3], a: f64, b: f64) -> [f64; 3] {
    let integral = |p: f64, q: f64| {
        let f = |t: f64| t * t * t / 3.0 - (p + q) * t * t / 2.0 + p * q * t;
        f(b) - f(a)
    };
    [
        integral(x[1], x[2]) / ((x[0] - x[1]) * (x[0] - x[2])),
        integral(x[0], x[2]) / ((x[1] - x[0]) * (x[1] - x[2])),
        integral(x[0], x[1]) / ((x[2] - x[0]) * (x[2] - x[1])),
    ]
}

/// Entropy per spin at every measured temperature (returned in order of
/// decreasing temperature). Errors of different points are taken as
/// independent (separate runs).
pub fn entropy_by_thermodynamic_integration(
    points: &[EnergyPoint],
    tail: HighTemperatureTail,
) -> Result<Vec<EntropyPoint>, EntropyError> {
    if points.len() < 3 {
        return Err(EntropyError::TooFewPoints {
            points: points.len(),
        });
    }
    for (index, p) in points.iter().enumerate() {
        let t = p.temperature_kelvin;
        let positive = t.is_finite() && t > 0.0;
        if !positive
            || !p.energy_per_spin_kelvin.mean.is_finite()
            || !p.energy_per_spin_kelvin.error.is_finite()
        {
            return Err(EntropyError::BadPoint { index });
        }
    }
    let mut sorted: Vec<EnergyPoint> = points.to_vec();
    sorted.sort_by(|a, b| b.temperature_kelvin.total_cmp(&a.temperature_kelvin));
    if let Some(k) = sorted
        .windows(2)
        .position(|w| w[0].temperature_kelvin == w[1].temperature_kelvin)
    {
        return Err(EntropyError::BadPoint { index: k + 1 });
    }
    let m = sorted.len();
    let beta: Vec<f64> = sorted.iter().map(|p| 1.0 / p.temperature_kelvin).collect();
    let e_inf = tail.infinite_temperature_energy_per_spin_kelvin;
    let v = tail.energy_variance_per_spin_kelvin2;
    let e: Vec<f64> = sorted
        .iter()
        .map(|p| p.energy_per_spin_kelvin.mean - e_inf)
        .collect();
    let sigma: Vec<f64> = sorted
        .iter()
        .map(|p| p.energy_per_spin_kelvin.error)
        .collect();
    // Tail ∫_0^{β1} (−v β) dβ and its systematic error from the O(β²) term:
    // if E − E_∞ = −vβ + cβ², the neglected part is cβ1³/3 with
    // c ≈ (e_1 + vβ1)/β1² (taken in magnitude).
    let b1 = beta[0];
    let tail_integral = -v * b1 * b1 / 2.0;
    let tail_error = ((e[0] + v * b1).abs() * b1 / 3.0).max(0.0);
    // Cumulative quadrature weights on the measured energies.
    let mut weights = vec![0.0; m];
    let mut out = Vec::with_capacity(m);
    for k in 0..m {
        if k > 0 {
            let i = k - 1; // interval [β_i, β_{i+1}]
            let j0 = if i + 2 < m { i } else { i - 1 };
            let w = quadratic_weights([beta[j0], beta[j0 + 1], beta[j0 + 2]], beta[i], beta[k]);
            for (q, wq) in w.iter().enumerate() {
                weights[j0 + q] += wq;
            }
        }
        let integral: f64 = tail_integral + weights.iter().zip(&e).map(|(w, x)| w * x).sum::<f64>();
        let s = std::f64::consts::LN_2 + beta[k] * e[k] - integral;
        let mut variance = 0.0;
        for q in 0..m {
            let coefficient = if q == k {
                beta[k] - weights[q]
            } else {
                -weights[q]
            };
            variance += (coefficient * sigma[q]).powi(2);
        }
        let error = (variance + tail_error * tail_error).sqrt();
        let est = Estimate::new(s, error);
        out.push(EntropyPoint {
            temperature_kelvin: sorted[k].temperature_kelvin,
            entropy_per_spin: est,
            entropy_joule_per_mole_kelvin: est.scaled(GAS_CONSTANT_JOULE_PER_MOLE_KELVIN),
        });
    }
    Ok(out)
}

/// Temperatures `T = 1/β` for a thermodynamic integration: `count` values of
/// β spaced geometrically from `1/highest_kelvin` to `1/lowest_kelvin`
/// (dense where the energy changes on the scale of β itself).
pub fn integration_temperatures_kelvin(
    highest_kelvin: f64,
    lowest_kelvin: f64,
    count: usize,
) -> Vec<f64> {
    if count < 2 || !(highest_kelvin > lowest_kelvin && lowest_kelvin > 0.0) {
        return vec![];
    }
    let ratio = highest_kelvin / lowest_kelvin;
    (0..count)
        .map(|k| highest_kelvin / ratio.powf(k as f64 / (count - 1) as f64))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::hamiltonian::NearestNeighbourIce;
    use crate::metropolis::Start;
    use crate::scan::{run_scan, ScanSettings};

    /// Pauling, JACS 57, 2680 (1935): ½ ln(3/2).
    const PAULING: f64 = 0.202_732_554;
    /// Nagle, J. Math. Phys. 7, 1484 (1966), series estimate (memory): ½ ln 1.50685.
    const NAGLE: f64 = 0.205_011;

    #[test]
    fn free_spins_in_a_field_have_the_exact_two_level_entropy() {
        // Two-level system E = −h tanh(βh): S = ln(2 cosh βh) − βh tanh βh
        // (exact). Check the quadrature with exact energies (no noise).
        let h = 1.0;
        let temps = integration_temperatures_kelvin(20.0, 0.1, 60);
        let points: Vec<EnergyPoint> = temps
            .iter()
            .map(|&t| EnergyPoint {
                temperature_kelvin: t,
                energy_per_spin_kelvin: Estimate::new(-h * (h / t).tanh(), 0.0),
            })
            .collect();
        let s = entropy_by_thermodynamic_integration(
            &points,
            HighTemperatureTail {
                infinite_temperature_energy_per_spin_kelvin: 0.0,
                energy_variance_per_spin_kelvin2: h * h,
            },
        )
        .unwrap();
        for p in &s {
            let b = 1.0 / p.temperature_kelvin;
            let exact = (2.0 * (b * h).cosh()).ln() - b * h * (b * h).tanh();
            assert!(
                (p.entropy_per_spin.mean - exact).abs() < 2e-4,
                "{p:?} vs {exact}"
            );
        }
        assert!(s.last().unwrap().entropy_per_spin.mean.abs() < 1e-3);
    }

    fn pyrochlore_ice_entropy(cells_per_side: usize, temps: usize, sweeps: u64) -> Estimate {
        let j = 1.0;
        let settings = ScanSettings {
            cells_per_side,
            model: NearestNeighbourIce::new(j),
            temperatures_kelvin: integration_temperatures_kelvin(20.0, 0.15, temps),
            equilibration_sweeps: sweeps / 10,
            measurement_sweeps: sweeps,
            sample_every_sweeps: 1,
            seed: 2026,
            start: Start::IceState,
        };
        let result = run_scan(
            &settings,
            &crate::control::Interrupt::new(),
            &crate::control::ignore_progress,
        )
        .unwrap();
        let points: Vec<EnergyPoint> = result
            .points
            .iter()
            .map(|p| EnergyPoint {
                temperature_kelvin: p.temperature_kelvin,
                energy_per_spin_kelvin: p.energy_per_spin_kelvin,
            })
            .collect();
        // E_∞ = 0 and v = 3 J² (3 bonds per spin, ⟨(σσ)²⟩ = 1; derived).
        let s = entropy_by_thermodynamic_integration(
            &points,
            HighTemperatureTail {
                infinite_temperature_energy_per_spin_kelvin: 0.0,
                energy_variance_per_spin_kelvin2: 3.0 * j * j,
            },
        )
        .unwrap();
        s.last().unwrap().entropy_per_spin
    }

    #[test]
    fn pyrochlore_ice_residual_entropy_is_nagles_not_paulings() {
        // Within 0.0015 of ½ ln 1.50685 = 0.2050 (Nagle, J. Math. Phys. 7,
        // 1484 (1966), memory) and closer to it than to Pauling's ½ ln 3/2
        // (Pauling, JACS 57, 2680 (1935)). L = 6 (3456 spins): the periodic
        // system's entropy exceeds the bulk value by roughly 0.3 ln N / N
        // (measured here: +0.004 at L = 3, +0.002 at L = 4, +0.0008 at L = 6),
        // so smaller systems cannot pass this test honestly. About 25 s on two cores.
        let s = pyrochlore_ice_entropy(6, 56, 12_000);
        eprintln!("L = 6: S = {} ± {}", s.mean, s.error);
        assert!(
            (s.mean - NAGLE).abs() < 0.0015,
            "S = {} ± {}",
            s.mean,
            s.error
        );
        assert!(
            (s.mean - NAGLE).abs() < (s.mean - PAULING).abs(),
            "S = {}",
            s.mean
        );
        assert!(s.error < 0.0007, "error {}", s.error);
    }

    #[test]
    fn bad_inputs_are_errors() {
        let tail = HighTemperatureTail {
            infinite_temperature_energy_per_spin_kelvin: 0.0,
            energy_variance_per_spin_kelvin2: 1.0,
        };
        let p = |t: f64| EnergyPoint {
            temperature_kelvin: t,
            energy_per_spin_kelvin: Estimate::new(0.0, 0.0),
        };
        assert!(entropy_by_thermodynamic_integration(&[p(1.0), p(2.0)], tail).is_err());
        assert!(entropy_by_thermodynamic_integration(&[p(1.0), p(2.0), p(-1.0)], tail).is_err());
        assert!(entropy_by_thermodynamic_integration(&[p(1.0), p(2.0), p(2.0)], tail).is_err());
    }
}
