//! Ewald summation of Coulomb and dipolar lattice sums in a periodic cubic box.
//!
//! Method: Ewald's split of `1/r` into a short-ranged real-space part
//! `erfc(αr)/r` and a smooth part summed in reciprocal space, with
//! conducting ("tin-foil") boundary conditions at infinity, i.e. without the
//! surface term (de Leeuw, Perram & Smith, Proc. R. Soc. A 373, 27 (1980)).
//! For point dipoles the pair tensor is (de Leeuw et al. 1980; common practice)
//!
//! `A(r) = Σ_n' [1 B(|r+n|) − (r+n)(r+n) C(|r+n|)]
//!        + (4π/V) Σ_{k≠0} (k k / k²) e^{−k²/4α²} cos(k·r)
//!        − δ_{r,0} (4α³ / 3√π) 1`,
//!
//! `B(r) = [erfc(αr) + (2αr/√π) e^{−α²r²}] / r³`,
//! `C(r) = [3 erfc(αr) + (2αr/√π)(3 + 2α²r²) e^{−α²r²}] / r⁵`,
//!
//! so that `E = ½ Σ_{i,j} μ_i·A(r_ij)·μ_j` (the self term `i = j` included)
//! in units where two dipoles interact as `μ_i·μ_j/r³ − 3(μ_i·r)(μ_j·r)/r⁵`.
//! A sphere of this periodic system surrounded by vacuum has the extra
//! shape energy `2π|Σμ|²/(3V)` (de Leeuw et al. 1980).
//!
//! Convergence parameters are chosen from a requested accuracy `ε`: with
//! `s` solving `s³ e^{−s²} = ε` (the largest real-space dipolar term at the
//! cut-off is of that order relative to the bare term), `α = √π/L` balances the
//! number of real-space images against reciprocal vectors, the real cut-off
//! is `r_c = s/α` and the reciprocal one `k_c = 2sα` (both truncated terms
//! are then `~ e^{−s²}`).
//!
//! The dipolar spin-ice term (physics-reference §2) is
//! `D r_nn³ Σ_{i<j} [S_i·S_j/r³ − 3(S_i·r)(S_j·r)/r⁵]` with
//! `D = μ0 μ² / (4π k_B r_nn³)`; its σσ coefficient is `D r_nn³ e_a·A·e_b`.

use crate::couplings::{require_finite, CouplingError, CouplingTable};
use crate::lattice::{dot, easy_axis, Pyrochlore, NEAREST_NEIGHBOUR_DISTANCE};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// μ0/(4π) in N/A² (CODATA 2018: μ0 = 1.00000000055 × 4π × 10⁻⁷ N/A²).
pub const MU0_OVER_4PI_NEWTON_PER_AMPERE_SQUARED: f64 = 1.000_000_000_55e-7;
/// Bohr magneton in J/T (CODATA 2018).
pub const BOHR_MAGNETON_JOULE_PER_TESLA: f64 = 9.274_010_078_3e-24;
/// Boltzmann constant in J/K (exact since 2019, CODATA 2018).
pub const BOLTZMANN_JOULE_PER_KELVIN: f64 = 1.380_649e-23;

/// Default relative accuracy of the Ewald sums.
pub const DEFAULT_EWALD_ACCURACY: f64 = 1e-10;

/// Dipolar strength `D = μ0 μ² / (4π k_B r_nn³)` in kelvin from a moment in
/// Bohr magnetons and a nearest-neighbour distance in ångström.
pub fn dipolar_strength_kelvin(moment_bohr_magnetons: f64, nearest_neighbour_angstrom: f64) -> f64 {
    let mu = moment_bohr_magnetons * BOHR_MAGNETON_JOULE_PER_TESLA;
    let r = nearest_neighbour_angstrom * 1e-10;
    MU0_OVER_4PI_NEWTON_PER_AMPERE_SQUARED * mu * mu / (BOLTZMANN_JOULE_PER_KELVIN * r * r * r)
}

/// σσ coefficient (K) of one bare dipolar pair (no images) of sublattices `a`,
/// `b` at displacement `r` (units of the cubic constant):
/// `D r_nn³ [e_a·e_b − 3 (e_a·r̂)(e_b·r̂)] / r³`.
pub fn bare_dipolar_coefficient_kelvin(d_kelvin: f64, a: usize, b: usize, r: [f64; 3]) -> f64 {
    let r2 = dot(r, r);
    let rr = r2.sqrt();
    let (ea, eb) = (easy_axis(a), easy_axis(b));
    let rnn3 = NEAREST_NEIGHBOUR_DISTANCE.powi(3);
    d_kelvin * rnn3 * (dot(ea, eb) / (r2 * rr) - 3.0 * dot(ea, r) * dot(eb, r) / (r2 * r2 * rr))
}

/// Ewald convergence parameters for a cubic box (lengths in the box's unit).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct EwaldParameters {
    /// Box edge.
    pub box_length: f64,
    /// Splitting parameter α (inverse length).
    pub alpha: f64,
    /// Real-space cut-off radius.
    pub real_cutoff: f64,
    /// Reciprocal-space cut-off |k| (inverse length, k = 2πn/L).
    pub reciprocal_cutoff: f64,
    /// Requested relative accuracy.
    pub accuracy: f64,
}

impl EwaldParameters {
    /// Parameters for `box_length` at relative `accuracy` (see module docs).
    pub fn choose(box_length: f64, accuracy: f64) -> Result<Self, CouplingError> {
        if !(box_length.is_finite() && box_length > 0.0) {
            return Err(CouplingError::InvalidParameter {
                name: "box length".into(),
                value: box_length,
                expected: "a positive finite length".into(),
            });
        }
        if !(accuracy.is_finite() && accuracy > 0.0 && accuracy < 0.1) {
            return Err(CouplingError::InvalidParameter {
                name: "Ewald accuracy".into(),
                value: accuracy,
                expected: "a number in (0, 0.1), e.g. 1e-10".into(),
            });
        }
        // s³ e^{−s²} = ε by fixed-point iteration s² = −ln ε + 3 ln s
        // (converges: the map's slope 3/(2s²) < 1 for s > 1.3).
        let mut s = (-accuracy.ln()).sqrt().max(1.5);
        for _ in 0..50 {
            s = (-accuracy.ln() + 3.0 * s.ln()).max(2.25).sqrt();
        }
        Self::with_alpha(box_length, PI.sqrt() / box_length, s, accuracy)
    }

    /// Parameters with an explicit α and the same `s` rule (for checking
    /// that results do not depend on α).
    fn with_alpha(
        box_length: f64,
        alpha: f64,
        s: f64,
        accuracy: f64,
    ) -> Result<Self, CouplingError> {
        Ok(Self {
            box_length,
            alpha,
            real_cutoff: s / alpha,
            reciprocal_cutoff: 2.0 * s * alpha,
            accuracy,
        })
    }

    /// Same accuracy, α scaled by `factor` (cut-offs follow).
    pub fn with_alpha_scaled(&self, factor: f64) -> Result<Self, CouplingError> {
        let s = self.real_cutoff * self.alpha;
        Self::with_alpha(self.box_length, self.alpha * factor, s, self.accuracy)
    }
}

/// Precomputed images and reciprocal vectors for one box.
#[derive(Clone, Debug)]
pub struct EwaldKernel {
    params: EwaldParameters,
    /// Image translations `n` (any with |n| below cut-off plus half a box diagonal).
    images: Vec<[f64; 3]>,
    /// Half of the reciprocal vectors (k and −k folded): `(k, 2·(4π/V)·e^{−k²/4α²}/k²)`.
    reciprocal: Vec<([f64; 3], f64)>,
}

impl EwaldKernel {
    /// Kernel for `params`.
    pub fn new(params: EwaldParameters) -> Self {
        let l = params.box_length;
        let reach = params.real_cutoff + 3f64.sqrt() * l / 2.0;
        let n_max = (reach / l).ceil() as i64;
        let mut images = Vec::new();
        for x in -n_max..=n_max {
            for y in -n_max..=n_max {
                for z in -n_max..=n_max {
                    let n = [x as f64 * l, y as f64 * l, z as f64 * l];
                    if dot(n, n).sqrt() <= reach {
                        images.push(n);
                    }
                }
            }
        }
        let volume = l * l * l;
        let dk = 2.0 * PI / l;
        let m_max = (params.reciprocal_cutoff / dk).ceil() as i64;
        let mut reciprocal = Vec::new();
        for x in -m_max..=m_max {
            for y in -m_max..=m_max {
                for z in -m_max..=m_max {
                    // Half space: first non-zero component positive.
                    let first = if x != 0 {
                        x
                    } else if y != 0 {
                        y
                    } else {
                        z
                    };
                    if first <= 0 {
                        continue;
                    }
                    let k = [x as f64 * dk, y as f64 * dk, z as f64 * dk];
                    let k2 = dot(k, k);
                    if k2.sqrt() > params.reciprocal_cutoff {
                        continue;
                    }
                    let w = 2.0 * 4.0 * PI / volume
                        * (-k2 / (4.0 * params.alpha * params.alpha)).exp()
                        / k2;
                    reciprocal.push((k, w));
                }
            }
        }
        Self {
            params,
            images,
            reciprocal,
        }
    }

    /// The parameters.
    pub fn parameters(&self) -> &EwaldParameters {
        &self.params
    }

    fn minimum_image(&self, r: [f64; 3]) -> [f64; 3] {
        let l = self.params.box_length;
        r.map(|x| x - l * (x / l).round())
    }

    /// Periodic Coulomb potential `ψ(r)` of a unit charge and its images with
    /// a neutralising background omitted (it cancels for neutral systems);
    /// at `r = 0` the self term `−2α/√π` replaces the divergent own term.
    pub fn coulomb_potential(&self, r: [f64; 3]) -> f64 {
        let alpha = self.params.alpha;
        let rc2 = self.params.real_cutoff.powi(2);
        let d = self.minimum_image(r);
        let at_origin = dot(d, d) < 1e-24;
        let mut real = 0.0;
        for n in &self.images {
            let x = [d[0] + n[0], d[1] + n[1], d[2] + n[2]];
            let x2 = dot(x, x);
            if x2 > rc2 || x2 < 1e-24 {
                continue;
            }
            let xr = x2.sqrt();
            real += libm::erfc(alpha * xr) / xr;
        }
        let recip: f64 = self
            .reciprocal
            .iter()
            .map(|(k, w)| w * dot(*k, d).cos())
            .sum();
        let own = if at_origin {
            -2.0 * alpha / PI.sqrt()
        } else {
            0.0
        };
        real + recip + own
    }

    /// Periodic dipolar tensor `A(r)` with tin-foil boundary (module docs);
    /// at `r = 0` it is the interaction of a dipole with its own images plus
    /// the Ewald self term.
    pub fn dipolar_tensor(&self, r: [f64; 3]) -> [[f64; 3]; 3] {
        let alpha = self.params.alpha;
        let rc2 = self.params.real_cutoff.powi(2);
        let d = self.minimum_image(r);
        let at_origin = dot(d, d) < 1e-24;
        let two_over_sqrt_pi = 2.0 / PI.sqrt();
        let mut t = [[0.0; 3]; 3];
        for n in &self.images {
            let x = [d[0] + n[0], d[1] + n[1], d[2] + n[2]];
            let x2 = dot(x, x);
            if x2 > rc2 || x2 < 1e-24 {
                continue;
            }
            let xr = x2.sqrt();
            let ar = alpha * xr;
            let erfc = libm::erfc(ar);
            let gauss = two_over_sqrt_pi * ar * (-ar * ar).exp();
            let b = (erfc + gauss) / (x2 * xr);
            let c = (3.0 * erfc + gauss * (3.0 + 2.0 * ar * ar)) / (x2 * x2 * xr);
            for p in 0..3 {
                t[p][p] += b;
                for q in 0..3 {
                    t[p][q] -= x[p] * x[q] * c;
                }
            }
        }
        for (k, w) in &self.reciprocal {
            let f = w * dot(*k, d).cos();
            for p in 0..3 {
                for q in 0..3 {
                    t[p][q] += f * k[p] * k[q];
                }
            }
        }
        if at_origin {
            let s = 4.0 * alpha.powi(3) / (3.0 * PI.sqrt());
            for (p, row) in t.iter_mut().enumerate() {
                row[p] -= s;
            }
        }
        t
    }
}

/// Ewald energy `½ Σ_{ij} q_i q_j ψ(r_ij)` of point charges in a periodic
/// cubic box (tin-foil boundary). The charges must sum to zero.
pub fn coulomb_energy(
    positions: &[[f64; 3]],
    charges: &[f64],
    box_length: f64,
    accuracy: f64,
) -> Result<f64, CouplingError> {
    let total: f64 = charges.iter().sum();
    if positions.len() != charges.len() || total.abs() > 1e-12 {
        return Err(CouplingError::InvalidParameter {
            name: "total charge".into(),
            value: total,
            expected: "one charge per position, summing to zero".into(),
        });
    }
    let kernel = EwaldKernel::new(EwaldParameters::choose(box_length, accuracy)?);
    Ok(pair_sum(positions, |i, j, r| {
        charges[i] * charges[j] * kernel.coulomb_potential(r)
    }))
}

/// Ewald energy `½ Σ_{ij} μ_i·A(r_ij)·μ_j` of point dipoles (tin-foil).
pub fn dipolar_energy(
    positions: &[[f64; 3]],
    moments: &[[f64; 3]],
    box_length: f64,
    accuracy: f64,
) -> Result<f64, CouplingError> {
    if positions.len() != moments.len() {
        return Err(CouplingError::InvalidParameter {
            name: "moment count".into(),
            value: moments.len() as f64,
            expected: format!("one moment per position ({})", positions.len()),
        });
    }
    let kernel = EwaldKernel::new(EwaldParameters::choose(box_length, accuracy)?);
    Ok(pair_sum(positions, |i, j, r| {
        contract(&kernel.dipolar_tensor(r), moments[i], moments[j])
    }))
}

fn pair_sum(positions: &[[f64; 3]], f: impl Fn(usize, usize, [f64; 3]) -> f64) -> f64 {
    let mut e = 0.0;
    for (i, ri) in positions.iter().enumerate() {
        for (j, rj) in positions.iter().enumerate() {
            e += 0.5 * f(i, j, [rj[0] - ri[0], rj[1] - ri[1], rj[2] - ri[2]]);
        }
    }
    e
}

fn contract(t: &[[f64; 3]; 3], u: [f64; 3], v: [f64; 3]) -> f64 {
    let mut s = 0.0;
    for p in 0..3 {
        for q in 0..3 {
            s += u[p] * t[p][q] * v[q];
        }
    }
    s
}

/// The long-range dipolar term of the spin-ice Hamiltonian.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct DipolarInteraction {
    /// D (K), see [`dipolar_strength_kelvin`].
    pub d_kelvin: f64,
    /// Relative accuracy of the Ewald sums (e.g. [`DEFAULT_EWALD_ACCURACY`]).
    pub accuracy: f64,
}

impl DipolarInteraction {
    /// Add the Ewald-summed dipolar σσ coefficients to `table` (built for `lat`).
    /// Cost O(N · (images + reciprocal vectors)), parallel over target spins.
    pub fn add_to(&self, lat: &Pyrochlore, table: &mut CouplingTable) -> Result<(), CouplingError> {
        require_finite("D (K)", self.d_kelvin)?;
        let kernel = EwaldKernel::new(EwaldParameters::choose(lat.box_length(), self.accuracy)?);
        let scale = self.d_kelvin * NEAREST_NEIGHBOUR_DISTANCE.powi(3);
        let n = lat.spin_count();
        for a in 0..4 {
            let ra = lat.position(a);
            let ea = easy_axis(a);
            let values: Vec<f64> = (0..n)
                .into_par_iter()
                .map(|j| {
                    let rj = lat.position(j);
                    let t = kernel.dipolar_tensor([rj[0] - ra[0], rj[1] - ra[1], rj[2] - ra[2]]);
                    scale * contract(&t, ea, easy_axis(j % 4))
                })
                .collect();
            for (j, v) in values.into_iter().enumerate() {
                table.add_row_entry(a, j, v);
            }
        }
        Ok(())
    }

    /// The Ewald-summed dipolar *field* as three translation-invariant
    /// tables, one per Cartesian component: entry `(a, j)` of table `c` is
    /// component `c` of `D r_nn³ A(r_j − r_a)·e_a` (K per unit pseudospin),
    /// the field at spin `j` of the spin of sublattice `a` at the origin with
    /// `σ = +1`. Its projection on `e_j` is the σσ coefficient of
    /// [`Self::add_to`]; the rest is the transverse field. The self-image
    /// entry (`j = a`) is left out: by the cubic symmetry of the images it
    /// is parallel to `e_a` (derived) and has no transverse part.
    ///
    /// Sign: this is the field in the energy convention of the σσ
    /// coefficients (`E = Σ K σσ`), i.e. minus the physical dipole field
    /// `∝ 3(e·r̂)r̂ − e`; magnitudes (all the transverse gate uses) agree.
    pub fn field_tables(&self, lat: &Pyrochlore) -> Result<[CouplingTable; 3], CouplingError> {
        require_finite("D (K)", self.d_kelvin)?;
        let kernel = EwaldKernel::new(EwaldParameters::choose(lat.box_length(), self.accuracy)?);
        let scale = self.d_kelvin * NEAREST_NEIGHBOUR_DISTANCE.powi(3);
        let n = lat.spin_count();
        let mut tables = [
            CouplingTable::zero(lat)?,
            CouplingTable::zero(lat)?,
            CouplingTable::zero(lat)?,
        ];
        for a in 0..4 {
            let ra = lat.position(a);
            let ea = easy_axis(a);
            let values: Vec<[f64; 3]> = (0..n)
                .into_par_iter()
                .map(|j| {
                    if j == a {
                        return [0.0; 3];
                    }
                    let rj = lat.position(j);
                    let t = kernel.dipolar_tensor([rj[0] - ra[0], rj[1] - ra[1], rj[2] - ra[2]]);
                    [0, 1, 2].map(|p| scale * (t[p][0] * ea[0] + t[p][1] * ea[1] + t[p][2] * ea[2]))
                })
                .collect();
            for (j, v) in values.into_iter().enumerate() {
                if j != a {
                    for (table, component) in tables.iter_mut().zip(v) {
                        table.add_row_entry(a, j, component);
                    }
                }
            }
        }
        Ok(tables)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    fn nacl_cell() -> (Vec<[f64; 3]>, Vec<f64>) {
        let mut pos = Vec::new();
        let mut q = Vec::new();
        for x in 0..2 {
            for y in 0..2 {
                for z in 0..2 {
                    pos.push([x as f64 * 0.5, y as f64 * 0.5, z as f64 * 0.5]);
                    q.push(if (x + y + z) % 2 == 0 { 1.0 } else { -1.0 });
                }
            }
        }
        (pos, q)
    }

    #[test]
    fn nacl_madelung_constant() {
        // 1.747565 (handbook value, memory). Cell of side 1 holds 4 ion pairs at
        // r_nn = 1/2: E = −4 M / r_nn (derived).
        let (pos, q) = nacl_cell();
        let e = coulomb_energy(&pos, &q, 1.0, 1e-12).unwrap();
        let m = -e * 0.5 / 4.0;
        assert!((m - 1.747_565).abs() < 1e-6, "M = {m}");
    }

    #[test]
    fn cscl_madelung_constant() {
        // 1.762675 (handbook value, memory). One pair per cell, r_nn = √3/2.
        let pos = [[0.0, 0.0, 0.0], [0.5, 0.5, 0.5]];
        let e = coulomb_energy(&pos, &[1.0, -1.0], 1.0, 1e-12).unwrap();
        let m = -e * 3f64.sqrt() / 2.0;
        assert!((m - 1.762_675).abs() < 1e-6, "M = {m}");
    }

    #[test]
    fn results_do_not_depend_on_alpha() {
        // The Ewald split is exact for any α (de Leeuw et al. 1980): the
        // dipolar tensor must agree to the stated accuracy for α/2 and 2α.
        let p = EwaldParameters::choose(2.0, 1e-12).unwrap();
        let r = [0.3, -0.7, 0.45];
        let t0 = EwaldKernel::new(p).dipolar_tensor(r);
        for factor in [0.6, 1.7] {
            let t1 = EwaldKernel::new(p.with_alpha_scaled(factor).unwrap()).dipolar_tensor(r);
            for a in 0..3 {
                for b in 0..3 {
                    assert!((t0[a][b] - t1[a][b]).abs() < 1e-9, "{factor} {a}{b}");
                }
            }
        }
    }

    #[test]
    fn tin_foil_plus_shape_term_equals_growing_sphere_sum() {
        // Direct summation over image cells within a sphere of radius R in
        // vacuum tends to E_tinfoil + 2π|M|²/(3V) (de Leeuw, Perram & Smith 1980).
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(3);
        let pos: Vec<[f64; 3]> = (0..4).map(|_| [rng.gen(), rng.gen(), rng.gen()]).collect();
        let mom: Vec<[f64; 3]> = (0..4)
            .map(|_| {
                [
                    rng.gen::<f64>() - 0.5,
                    rng.gen::<f64>() - 0.5,
                    rng.gen::<f64>() - 0.5,
                ]
            })
            .collect();
        let tin_foil = dipolar_energy(&pos, &mom, 1.0, 1e-12).unwrap();
        let m: [f64; 3] = [0, 1, 2].map(|k| mom.iter().map(|u| u[k]).sum());
        let expected = tin_foil + 2.0 * PI * dot(m, m) / 3.0;
        let sphere = |radius: i64| {
            let mut e = 0.0;
            for x in -radius..=radius {
                for y in -radius..=radius {
                    for z in -radius..=radius {
                        if x * x + y * y + z * z > radius * radius {
                            continue;
                        }
                        for (i, ri) in pos.iter().enumerate() {
                            for (j, rj) in pos.iter().enumerate() {
                                if x == 0 && y == 0 && z == 0 && i == j {
                                    continue;
                                }
                                let r = [
                                    rj[0] - ri[0] + x as f64,
                                    rj[1] - ri[1] + y as f64,
                                    rj[2] - ri[2] + z as f64,
                                ];
                                let r2 = dot(r, r);
                                let r5 = r2 * r2 * r2.sqrt();
                                e += 0.5
                                    * (dot(mom[i], mom[j]) / (r2 * r2.sqrt())
                                        - 3.0 * dot(mom[i], r) * dot(mom[j], r) / r5);
                            }
                        }
                    }
                }
            }
            e
        };
        let scale = expected.abs().max(dot(m, m));
        let errors: Vec<f64> = [8, 16, 32]
            .iter()
            .map(|&r| (sphere(r) - expected).abs() / scale)
            .collect();
        // Converges (the sphere's surface roughness decays with R) and ends close.
        assert!(errors[2] < 2e-3, "{errors:?}");
        assert!(errors[2] < errors[0], "{errors:?}");
        // Without the shape term it would be off by an O(1) amount.
        assert!((sphere(32) - tin_foil).abs() / scale > 0.1);
    }

    #[test]
    fn dipolar_strength_from_codata() {
        // μ = 10 μ_B, r_nn = 3.54 Å: D = 1.404 K (physics-reference §2, derived
        // with CODATA 2018; den Hertog & Gingras, PRL 84, 3430 (2000) quote 1.41 K).
        let d = dipolar_strength_kelvin(10.0, 3.54);
        assert!((d - 1.404).abs() < 5e-4, "D = {d}");
    }

    #[test]
    fn nearest_neighbour_dipolar_coefficient_is_five_thirds_d() {
        // D_nn = 5D/3 (physics-reference §2, derived), for every nn pair.
        let lat = Pyrochlore::new(1).unwrap();
        for i in 0..lat.spin_count() {
            for &j in lat.neighbours(i) {
                let r = lat.displacement(lat.position(i), lat.position(j as usize));
                let k = bare_dipolar_coefficient_kelvin(1.3, i % 4, j as usize % 4, r);
                assert!((k - 5.0 * 1.3 / 3.0).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn ewald_table_matches_per_pair_sums_and_is_symmetric() {
        let lat = Pyrochlore::new(2).unwrap();
        let mut table = CouplingTable::zero(&lat).unwrap();
        let dip = DipolarInteraction {
            d_kelvin: 1.4,
            accuracy: 1e-10,
        };
        dip.add_to(&lat, &mut table).unwrap();
        // Table energy equals the Ewald energy of the dipoles S_i = σ_i e_a
        // (scaled by D r_nn³), including the self-image constant (derived).
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(1);
        let sigma: Vec<i8> = (0..lat.spin_count())
            .map(|_| if rng.gen::<bool>() { 1 } else { -1 })
            .collect();
        let pos: Vec<[f64; 3]> = (0..lat.spin_count()).map(|i| lat.position(i)).collect();
        let mom: Vec<[f64; 3]> = (0..lat.spin_count())
            .map(|i| easy_axis(i % 4).map(|c| c * sigma[i] as f64))
            .collect();
        let direct = dipolar_energy(&pos, &mom, 2.0, 1e-10).unwrap()
            * 1.4
            * NEAREST_NEIGHBOUR_DISTANCE.powi(3);
        let e = table.direct_energy_kelvin(&sigma);
        assert!(
            (e - direct).abs() < 1e-8 * direct.abs().max(1.0),
            "{e} {direct}"
        );
        for (i, j) in [(0, 1), (3, 100), (77, 12), (5, 5 + 64)] {
            assert!((table.coupling_kelvin(i, j) - table.coupling_kelvin(j, i)).abs() < 1e-12);
        }
    }

    #[test]
    fn bad_parameters_are_errors() {
        assert!(EwaldParameters::choose(0.0, 1e-8).is_err());
        assert!(EwaldParameters::choose(1.0, 0.0).is_err());
        assert!(EwaldParameters::choose(1.0, f64::NAN).is_err());
        assert!(coulomb_energy(&[[0.0; 3]], &[1.0], 1.0, 1e-8).is_err());
    }
}
