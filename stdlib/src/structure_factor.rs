//! Magnetic neutron structure factor of pseudospin configurations.
//!
//! `S(Q) = (1/N) ⟨|Σ_i m_i^⊥ e^{iQ·r_i}|²⟩` (physics-reference §4) with
//! `m_i = σ_i e_{a(i)}` (units of the moment μ) and `m^⊥ = m − (m·Q̂)Q̂` the
//! part normal to Q. Q is given in reciprocal lattice units of the cubic
//! cell, `Q = (2π/a)(h, k, l)`, so `Q·r = 2π(hx + ky + lz)` with r in units
//! of a.
//!
//! Polarised channels for a neutron polarisation axis P̂ (half-polarised
//! analysis, Moon, Riste & Koehler, Phys. Rev. 181, 920 (1969)): the
//! non-spin-flip channel sees the component of `M^⊥(Q)` along P̂ and the
//! spin-flip channel the rest, so total = SF + NSF.
//!
//! Optional magnetic form factor in the dipole approximation, `f(Q) = ⟨j0⟩(s)`
//! with `s = |Q|/4π` in Å⁻¹ and `⟨j0⟩(s) = A e^{−a s²} + B e^{−b s²} + C e^{−c s²} + D`;
//! intensities are multiplied by `f²`. Coefficients: International Tables
//! for Crystallography Vol. C, table 4.4.5 (P. J. Brown), recalled from
//! memory for the three ions below "(memory)"; each set sums to 1.000 at
//! s = 0 within 10⁻⁴, a consistency check on the recall.

use crate::lattice::{dot, easy_axis, Pyrochlore};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;
use std::fmt;

/// Scattering channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Channel {
    /// Unpolarised: all of `M^⊥`.
    Total,
    /// Components of `M^⊥` normal to the polarisation axis.
    SpinFlip,
    /// Component of `M^⊥` along the polarisation axis.
    NonSpinFlip,
}

/// Rare-earth ions with tabulated `⟨j0⟩` coefficients.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum MagneticIon {
    /// Ho³⁺.
    Holmium3,
    /// Dy³⁺.
    Dysprosium3,
    /// Tb³⁺.
    Terbium3,
}

/// `⟨j0⟩` coefficients `[A, a, B, b, C, c, D]` (a, b, c in Å²), International
/// Tables for Crystallography Vol. C, table 4.4.5 (memory).
pub const J0_COEFFICIENTS: [(MagneticIon, &str, [f64; 7]); 3] = [
    (
        MagneticIon::Holmium3,
        "Ho3+",
        [0.0566, 18.3176, 0.3365, 7.6880, 0.6317, 2.9427, -0.0248],
    ),
    (
        MagneticIon::Dysprosium3,
        "Dy3+",
        [0.1157, 15.0732, 0.3270, 6.7991, 0.5821, 3.0202, -0.0249],
    ),
    (
        MagneticIon::Terbium3,
        "Tb3+",
        [0.0177, 25.5095, 0.2921, 10.5769, 0.7133, 3.5122, -0.0231],
    ),
];

impl MagneticIon {
    /// Ion by its usual name ("Ho3+", "Dy3+", "Tb3+").
    pub fn from_name(name: &str) -> Result<Self, StructureFactorError> {
        J0_COEFFICIENTS
            .iter()
            .find(|(_, n, _)| n.eq_ignore_ascii_case(name.trim()))
            .map(|(ion, _, _)| *ion)
            .ok_or_else(|| StructureFactorError::UnknownIon {
                name: name.into(),
                known: J0_COEFFICIENTS
                    .iter()
                    .map(|(_, n, _)| n.to_string())
                    .collect(),
            })
    }

    /// `⟨j0⟩(s)` at `s = sin θ/λ` (Å⁻¹).
    pub fn j0(&self, s_per_angstrom: f64) -> f64 {
        let c = J0_COEFFICIENTS
            .iter()
            .find(|(ion, _, _)| ion == self)
            .map(|(_, _, c)| *c)
            .unwrap_or([0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0]);
        let s2 = s_per_angstrom * s_per_angstrom;
        c[0] * (-c[1] * s2).exp() + c[2] * (-c[3] * s2).exp() + c[4] * (-c[5] * s2).exp() + c[6]
    }
}

/// Form factor settings: which ion and the cubic lattice constant (Å) that
/// turns r.l.u. into Å⁻¹.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct FormFactor {
    /// The ion.
    pub ion: MagneticIon,
    /// Cubic lattice constant a (Å).
    pub lattice_constant_angstrom: f64,
}

/// What to compute.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct StructureFactorSettings {
    /// Channel.
    pub channel: Channel,
    /// Polarisation axis (any length; required for SF/NSF).
    pub polarisation: Option<[f64; 3]>,
    /// Optional form factor.
    pub form_factor: Option<FormFactor>,
}

/// A rectangular grid of Q in a plane `origin + x·u + y·v` (r.l.u.).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct QPlane {
    /// Plane origin (r.l.u.).
    pub origin: [f64; 3],
    /// First in-plane direction (r.l.u.).
    pub u: [f64; 3],
    /// Second in-plane direction (r.l.u.).
    pub v: [f64; 3],
    /// Range of the coefficient of `u`.
    pub x_range: [f64; 2],
    /// Range of the coefficient of `v`.
    pub y_range: [f64; 2],
    /// Points along u and v (each ≥ 2).
    pub points: [usize; 2],
}

/// S(Q) on a plane: `values[iy][ix]` at `origin + x_ix u + y_iy v`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PlaneMap {
    /// The plane.
    pub plane: QPlane,
    /// Coefficients of u (length points[0]).
    pub x: Vec<f64>,
    /// Coefficients of v (length points[1]).
    pub y: Vec<f64>,
    /// Intensities (μ² per spin), rows along v.
    pub values: Vec<Vec<f64>>,
    /// Settings used.
    pub settings: StructureFactorSettings,
}

/// Bad structure-factor input.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum StructureFactorError {
    /// The two directions do not span a plane.
    NotAPlane,
    /// Fewer than 2 points, an empty or non-finite range, or too many points.
    BadGrid(String),
    /// SF/NSF without a (non-zero) polarisation axis.
    MissingPolarisation,
    /// No configurations, or one of the wrong length.
    BadConfigurations(String),
    /// Unknown ion name.
    UnknownIon {
        /// Name given.
        name: String,
        /// Names known.
        known: Vec<String>,
    },
    /// A lattice constant that is not positive.
    BadLatticeConstant(f64),
}

impl fmt::Display for StructureFactorError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            StructureFactorError::NotAPlane => write!(
                f,
                "the two Q directions are parallel (or zero), so they do not span a plane"
            ),
            StructureFactorError::BadGrid(m) => write!(f, "bad Q grid: {m}"),
            StructureFactorError::MissingPolarisation => write!(
                f,
                "spin-flip and non-spin-flip channels need a non-zero polarisation axis"
            ),
            StructureFactorError::BadConfigurations(m) => write!(f, "bad configurations: {m}"),
            StructureFactorError::UnknownIon { name, known } => write!(
                f,
                "no form factor for ion {name:?}; known: {}",
                known.join(", ")
            ),
            StructureFactorError::BadLatticeConstant(a) => {
                write!(f, "lattice constant {a} Å must be positive and finite")
            }
        }
    }
}

impl std::error::Error for StructureFactorError {}

/// Most Q points in one request (keeps a notebook cell from hanging).
pub const MAX_Q_POINTS: usize = 1 << 20;

fn cross(a: [f64; 3], b: [f64; 3]) -> [f64; 3] {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}

/// Precomputed positions and moments of one lattice.
struct Sites {
    positions: Vec<[f64; 3]>,
}

fn validate(
    lat: &Pyrochlore,
    configurations: &[Vec<i8>],
    settings: &StructureFactorSettings,
) -> Result<Option<[f64; 3]>, StructureFactorError> {
    if configurations.is_empty() {
        return Err(StructureFactorError::BadConfigurations("none given".into()));
    }
    if let Some(c) = configurations.iter().find(|c| c.len() != lat.spin_count()) {
        return Err(StructureFactorError::BadConfigurations(format!(
            "a configuration has {} entries, the lattice {} spins",
            c.len(),
            lat.spin_count()
        )));
    }
    if let Some(ff) = settings.form_factor {
        let a = ff.lattice_constant_angstrom;
        if !(a.is_finite() && a > 0.0) {
            return Err(StructureFactorError::BadLatticeConstant(a));
        }
    }
    let p = match settings.polarisation {
        Some(p) if p.iter().all(|x| x.is_finite()) && dot(p, p) > 1e-24 => {
            let n = dot(p, p).sqrt();
            Some(p.map(|x| x / n))
        }
        _ if settings.channel != Channel::Total => {
            return Err(StructureFactorError::MissingPolarisation)
        }
        _ => None,
    };
    Ok(p)
}

/// S(Q) at one Q (r.l.u.) averaged over configurations.
fn intensity(
    sites: &Sites,
    configurations: &[Vec<i8>],
    q_rlu: [f64; 3],
    settings: &StructureFactorSettings,
    polarisation: Option<[f64; 3]>,
) -> f64 {
    let n = sites.positions.len() as f64;
    // Per sublattice structure sums F_a = Σ_{i∈a} σ_i e^{iQ·r_i}; then
    // M(Q) = Σ_a e_a F_a (the moments of a sublattice share a direction).
    let phases: Vec<(f64, f64)> = sites
        .positions
        .iter()
        .map(|r| {
            let x = 2.0 * PI * dot(q_rlu, *r);
            (x.cos(), x.sin())
        })
        .collect();
    let q2 = dot(q_rlu, q_rlu);
    let q_hat = if q2 > 0.0 {
        q_rlu.map(|x| x / q2.sqrt())
    } else {
        [0.0; 3]
    };
    let mut total = 0.0;
    for sigma in configurations {
        let mut f = [(0.0f64, 0.0f64); 4];
        for (i, (&s, &(c, si))) in sigma.iter().zip(&phases).enumerate() {
            let slot = &mut f[i % 4];
            slot.0 += s as f64 * c;
            slot.1 += s as f64 * si;
        }
        let mut re = [0.0; 3];
        let mut im = [0.0; 3];
        for (a, fa) in f.iter().enumerate() {
            let e = easy_axis(a);
            for k in 0..3 {
                re[k] += e[k] * fa.0;
                im[k] += e[k] * fa.1;
            }
        }
        // Perpendicular projection (at Q = 0 every direction counts as normal).
        let (pr, pi) = (dot(re, q_hat), dot(im, q_hat));
        for k in 0..3 {
            re[k] -= pr * q_hat[k];
            im[k] -= pi * q_hat[k];
        }
        let all = dot(re, re) + dot(im, im);
        let value = match (settings.channel, polarisation) {
            (Channel::Total, _) => all,
            (channel, Some(p)) => {
                let along = dot(re, p).powi(2) + dot(im, p).powi(2);
                if channel == Channel::NonSpinFlip {
                    along
                } else {
                    all - along
                }
            }
            (_, None) => all,
        };
        total += value;
    }
    let mut s = total / (n * configurations.len() as f64);
    if let Some(ff) = settings.form_factor {
        // |Q| in Å⁻¹ is 2π|q_rlu|/a; s = |Q|/4π.
        let s_inv_angstrom = q2.sqrt() / (2.0 * ff.lattice_constant_angstrom);
        s *= ff.ion.j0(s_inv_angstrom).powi(2);
    }
    s
}

/// S(Q) (μ² per spin) at each of `q_points_rlu`, averaged over `configurations`.
pub fn structure_factor_at(
    lat: &Pyrochlore,
    configurations: &[Vec<i8>],
    q_points_rlu: &[[f64; 3]],
    settings: &StructureFactorSettings,
) -> Result<Vec<f64>, StructureFactorError> {
    let polarisation = validate(lat, configurations, settings)?;
    if q_points_rlu.len() > MAX_Q_POINTS {
        return Err(StructureFactorError::BadGrid(format!(
            "{} Q points, more than the limit {MAX_Q_POINTS}",
            q_points_rlu.len()
        )));
    }
    if q_points_rlu
        .iter()
        .any(|q| q.iter().any(|x| !x.is_finite()))
    {
        return Err(StructureFactorError::BadGrid(
            "a Q point is not finite".into(),
        ));
    }
    let sites = Sites {
        positions: (0..lat.spin_count()).map(|i| lat.position(i)).collect(),
    };
    Ok(q_points_rlu
        .par_iter()
        .map(|&q| intensity(&sites, configurations, q, settings, polarisation))
        .collect())
}

/// `count` equally spaced Q from `start` to `end` (r.l.u.), both included.
pub fn q_line(
    start: [f64; 3],
    end: [f64; 3],
    count: usize,
) -> Result<Vec<[f64; 3]>, StructureFactorError> {
    if !(2..=MAX_Q_POINTS).contains(&count) {
        return Err(StructureFactorError::BadGrid(format!(
            "a line needs 2..={MAX_Q_POINTS} points (got {count})"
        )));
    }
    Ok((0..count)
        .map(|k| {
            let t = k as f64 / (count - 1) as f64;
            [0, 1, 2].map(|c| start[c] + t * (end[c] - start[c]))
        })
        .collect())
}

/// S(Q) on a plane grid.
pub fn structure_factor_plane(
    lat: &Pyrochlore,
    configurations: &[Vec<i8>],
    plane: &QPlane,
    settings: &StructureFactorSettings,
) -> Result<PlaneMap, StructureFactorError> {
    let c = cross(plane.u, plane.v);
    // Parallel (or zero, or NaN) directions: |u × v|² ≤ 10⁻¹² |u|²|v|².
    let spans = dot(c, c) > 1e-12 * dot(plane.u, plane.u) * dot(plane.v, plane.v);
    if !spans || dot(c, c) == 0.0 {
        return Err(StructureFactorError::NotAPlane);
    }
    let [nx, ny] = plane.points;
    if nx < 2 || ny < 2 || nx.saturating_mul(ny) > MAX_Q_POINTS {
        return Err(StructureFactorError::BadGrid(format!(
            "{nx}×{ny} points (each ≥ 2, product ≤ {MAX_Q_POINTS})"
        )));
    }
    let ok = |r: [f64; 2]| r[0].is_finite() && r[1].is_finite() && r[1] > r[0];
    if !ok(plane.x_range) || !ok(plane.y_range) {
        return Err(StructureFactorError::BadGrid(
            "ranges must be finite with min < max".into(),
        ));
    }
    let axis = |r: [f64; 2], n: usize| -> Vec<f64> {
        (0..n)
            .map(|k| r[0] + (r[1] - r[0]) * k as f64 / (n - 1) as f64)
            .collect()
    };
    let x = axis(plane.x_range, nx);
    let y = axis(plane.y_range, ny);
    let mut points = Vec::with_capacity(nx * ny);
    for &b in &y {
        for &a in &x {
            points.push([0, 1, 2].map(|k| plane.origin[k] + a * plane.u[k] + b * plane.v[k]));
        }
    }
    let flat = structure_factor_at(lat, configurations, &points, settings)?;
    let values = flat.chunks(nx).map(|row| row.to_vec()).collect();
    Ok(PlaneMap {
        plane: plane.clone(),
        x,
        y,
        values,
        settings: *settings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::couplings::CouplingTable;
    use crate::engine::{FlipRule, LocalFieldSampler};
    use crate::exchange::{CouplingConvention, ExchangeCouplings};
    use crate::loops::LoopMoves;
    use crate::metropolis::{initial_configuration, Start};
    use crate::rng::RngStreams;
    use rand::Rng;

    fn ice_samples(lat: &Pyrochlore, t: f64, samples: usize, seed: u64) -> Vec<Vec<i8>> {
        let mut table = CouplingTable::zero(lat).unwrap();
        ExchangeCouplings::nearest_neighbour(1.0, CouplingConvention::IsingPseudospins)
            .add_to(lat, &mut table)
            .unwrap();
        let mut rng = RngStreams::new(seed).stream(0);
        let sigma = initial_configuration(lat, Start::IceState, &mut rng);
        let mut s =
            LocalFieldSampler::new(lat, &table, t, FlipRule::Metropolis, sigma, rng).unwrap();
        let mut loops = LoopMoves::new(lat);
        let decorrelate = |s: &mut LocalFieldSampler, loops: &mut LoopMoves| {
            for _ in 0..4 {
                s.sweep();
            }
            for _ in 0..lat.spin_count() / 8 {
                loops.attempt(s);
            }
        };
        for _ in 0..20 {
            decorrelate(&mut s, &mut loops);
        }
        (0..samples)
            .map(|_| {
                decorrelate(&mut s, &mut loops);
                s.sigma().to_vec()
            })
            .collect()
    }

    #[test]
    fn sum_rule_two_thirds_mu_squared() {
        // Averaged over a large ball of Q the cross terms cancel and S(Q)
        // tends to (1/N) Σ ⟨|m_i^⊥|²⟩ = (2/3) μ² (physics-reference §4, derived).
        let lat = Pyrochlore::new(2).unwrap();
        let configs = ice_samples(&lat, 0.5, 4, 1);
        let mut rng = RngStreams::new(2).stream(0);
        let radius = 12.0;
        let mut qs = Vec::new();
        while qs.len() < 20_000 {
            let q = [0, 1, 2].map(|_| radius * (2.0 * rng.gen::<f64>() - 1.0));
            if dot(q, q) <= radius * radius {
                qs.push(q);
            }
        }
        let settings = StructureFactorSettings {
            channel: Channel::Total,
            polarisation: None,
            form_factor: None,
        };
        let s = structure_factor_at(&lat, &configs, &qs, &settings).unwrap();
        let mean = s.iter().sum::<f64>() / s.len() as f64;
        assert!((mean - 2.0 / 3.0).abs() < 0.02, "⟨S⟩ = {mean}");
        // Channels add up: SF + NSF = total at every Q (derived).
        let pol = Some([1.0, -1.0, 0.0]);
        let sf = structure_factor_at(
            &lat,
            &configs,
            &qs[..50],
            &StructureFactorSettings {
                channel: Channel::SpinFlip,
                polarisation: pol,
                form_factor: None,
            },
        )
        .unwrap();
        let nsf = structure_factor_at(
            &lat,
            &configs,
            &qs[..50],
            &StructureFactorSettings {
                channel: Channel::NonSpinFlip,
                polarisation: pol,
                form_factor: None,
            },
        )
        .unwrap();
        for k in 0..50 {
            assert!((sf[k] + nsf[k] - s[k]).abs() < 1e-9);
        }
    }

    /// SF intensity (P ∥ [1,−1,0]) along (h,h,2) and (0,0,2+l) at offsets `d` r.l.u.
    fn pinch_profiles(lat: &Pyrochlore, configs: &[Vec<i8>], d: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let settings = StructureFactorSettings {
            channel: Channel::SpinFlip,
            polarisation: Some([1.0, -1.0, 0.0]),
            form_factor: None,
        };
        // (h,h,2) and (0,0,2+l): average ±offset for symmetry.
        let across: Vec<[f64; 3]> = d
            .iter()
            .flat_map(|&x| [[x, x, 2.0], [-x, -x, 2.0]])
            .collect();
        let along: Vec<[f64; 3]> = d
            .iter()
            .flat_map(|&x| [[0.0, 0.0, 2.0 + x], [0.0, 0.0, 2.0 - x]])
            .collect();
        let a = structure_factor_at(lat, configs, &across, &settings).unwrap();
        let b = structure_factor_at(lat, configs, &along, &settings).unwrap();
        let pair = |v: Vec<f64>| v.chunks(2).map(|p| 0.5 * (p[0] + p[1])).collect();
        (pair(a), pair(b))
    }

    #[test]
    fn pinch_point_at_002_in_the_spin_flip_channel() {
        // Ice rules make the coarse-grained moment field divergence-free;
        // with thermal monopoles (screening wave number κ) its correlations
        // are δ_αβ − q_α q_β/(q² + κ²) near a zone centre (Henley, Annu. Rev.
        // Condens. Matter Phys. 1, 179 (2010), memory; derived from the ice
        // rule). Near (0,0,2) with P ∥ [1,−1,0] the spin-flip channel measures
        // the in-plane component normal to Q, x̂' = [110]/√2, so
        // S_SF ∝ 1 − q_x'²/(q² + κ²): constant along (0,0,l) — the flat line —
        // and κ²/(q² + κ²) along (h,h,2): dark except for a peak of width κ at
        // the point, which narrows as T falls (κ → 0 with the monopole
        // density). Resolution of the periodic L = 6 system: 1/6 r.l.u.
        let lat = Pyrochlore::new(6).unwrap();
        let step = 1.0 / 6.0;
        let d: Vec<f64> = (1..=4).map(|k| k as f64 * step).collect();
        let cold = ice_samples(&lat, 0.3, 60, 3);
        let warm = ice_samples(&lat, 1.2, 60, 4);
        let (across_cold, along_cold) = pinch_profiles(&lat, &cold, &d);
        let (across_warm, along_warm) = pinch_profiles(&lat, &warm, &d);
        let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
        // Flat along (0,0,l): every point within 35 % of the line's mean (60
        // samples, noise ~15 %).
        for v in [&along_cold, &along_warm] {
            let m = mean(v);
            assert!(v.iter().all(|x| (x - m).abs() < 0.35 * m), "{v:?}");
        }
        // Along (h,h,2) the cold system is dark: the bow tie's pinch is
        // narrower than the resolution.
        assert!(
            across_cold.iter().all(|&x| x < 0.05 * mean(&along_cold)),
            "{across_cold:?}"
        );
        // Warmer: a peak at the point, falling away from it (width κ).
        assert!(across_warm[0] > 2.0 * across_warm[3], "{across_warm:?}");
        // Narrowing as T falls: intensity one resolution step away drops.
        assert!(
            across_warm[0] > 10.0 * across_cold[0],
            "{across_warm:?} {across_cold:?}"
        );
    }

    #[test]
    fn form_factor_and_bad_inputs() {
        // ⟨j0⟩(0) = A + B + C + D = 1 within the table's rounding (ITC Vol. C 4.4.5, memory).
        for (ion, name, _) in J0_COEFFICIENTS {
            assert!((ion.j0(0.0) - 1.0).abs() < 2e-4, "{name}");
            assert!(ion.j0(0.5) < ion.j0(0.1));
            assert_eq!(MagneticIon::from_name(name).unwrap(), ion);
        }
        assert!(matches!(
            MagneticIon::from_name("Xx9+"),
            Err(StructureFactorError::UnknownIon { .. })
        ));
        let lat = Pyrochlore::new(1).unwrap();
        let configs = vec![vec![1i8; 16]];
        let plane = QPlane {
            origin: [0.0; 3],
            u: [1.0, 1.0, 0.0],
            v: [2.0, 2.0, 0.0],
            x_range: [-1.0, 1.0],
            y_range: [-1.0, 1.0],
            points: [5, 5],
        };
        let total = StructureFactorSettings {
            channel: Channel::Total,
            polarisation: None,
            form_factor: None,
        };
        assert_eq!(
            structure_factor_plane(&lat, &configs, &plane, &total).unwrap_err(),
            StructureFactorError::NotAPlane
        );
        let sf = StructureFactorSettings {
            channel: Channel::SpinFlip,
            polarisation: None,
            ..total
        };
        assert_eq!(
            structure_factor_at(&lat, &configs, &[[0.0; 3]], &sf).unwrap_err(),
            StructureFactorError::MissingPolarisation
        );
        assert!(structure_factor_at(&lat, &[vec![1i8; 3]], &[[0.0; 3]], &total).is_err());
        let good = QPlane {
            v: [0.0, 0.0, 1.0],
            ..plane
        };
        let map = structure_factor_plane(&lat, &configs, &good, &total).unwrap();
        assert_eq!((map.values.len(), map.values[0].len()), (5, 5));
    }
}
