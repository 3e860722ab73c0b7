//! Environment-gated attempt rates: the transverse field on a spin from its
//! six nearest neighbours, its four magnitude classes, and attempt-time
//! tables by class (physics-reference §5).
//!
//! Spin flips in spin ice at low temperature proceed by quantum tunnelling
//! through a transverse field set by the neighbours (PRB 100, 155120 (2019);
//! Science 378, 1218 (2022); both from memory). Here the transverse field on
//! spin `i` is the part of its six neighbours' moments normal to the easy axis
//! `e_i`:
//!
//! `h⊥_i = Σ_{j ∈ nn(i)} σ_j (e_j − (e_j·e_i) e_i) = Σ_a (σ^A_a + σ^B_a) g_a`,
//!
//! where `A`, `B` are the two tetrahedra of `i`, `σ^A_a`, `σ^B_a` are the
//! pseudospins of `i`'s partners of sublattice `a` in them (inversion images
//! through site `i`, so the nearest-neighbour dipolar field they produce has
//! the same form), and `g_a = e_a + e_i/3` (derived from `e_a·e_i = −1/3`).
//! The three `g_a` have equal length `|g| = √8/3` and sum to zero (because
//! `Σ_a e_a = 0`), so they sit at 120°. With `m_a = (σ^A_a + σ^B_a)/2 ∈
//! {−1, 0, 1}`:
//!
//! `|h⊥|² / (4|g|²) = ½ Σ_{a<b} (m_a − m_b)² ∈ {0, 1, 3, 4}` (derived),
//!
//! so `|h⊥|/|g| ∈ {0, 2, 2√3, 4}`: four classes ([`GATE_CLASS_MAGNITUDES`]).
//! Class 0 (`h⊥ = 0`) is the gated ("closed") class. Over the 64 neighbour
//! patterns the classes hold 10, 36, 12 and 6 patterns (derived; tested).
//!
//! A flip of spin `j` changes the gate class of its six neighbours only (the
//! class of `j` itself depends on its neighbours, not on `σ_j`), which is how
//! [`GateClasses::after_flip`] keeps the per-spin table up to date in O(1).

use crate::lattice::Pyrochlore;
use serde::{Deserialize, Serialize};
use std::fmt;

/// Number of |h⊥| classes.
pub const GATE_CLASS_COUNT: usize = 4;

/// The gated class `h⊥ = 0`.
pub const CLOSED_GATE_CLASS: u8 = 0;

/// `|h⊥|` of each class in units of `|g|`, the transverse component of one
/// neighbour's easy axis (`|g| = √8/3` in units of the moment): 0, 2, 2√3, 4
/// (derived, see the module documentation).
pub const GATE_CLASS_MAGNITUDES: [f64; GATE_CLASS_COUNT] = [0.0, 2.0, 3.464_101_615_137_754_6, 4.0];

/// Gate class by base-3 key `Σ_a (m_a + 1) 3^a` of the partner-pair sums.
const CLASS_BY_KEY: [u8; 27] = build_class_table();

const fn build_class_table() -> [u8; 27] {
    let mut table = [0u8; 27];
    let mut key = 0;
    while key < 27 {
        let m = [
            (key % 3) as i32 - 1,
            ((key / 3) % 3) as i32 - 1,
            (key / 9) as i32 - 1,
        ];
        let d = ((m[0] - m[1]) * (m[0] - m[1])
            + (m[0] - m[2]) * (m[0] - m[2])
            + (m[1] - m[2]) * (m[1] - m[2]))
            / 2;
        table[key] = match d {
            0 => 0,
            1 => 1,
            3 => 2,
            _ => 3,
        };
        key += 1;
    }
    table
}

/// Gate class of a spin whose partner pairs have `m_a = (σ^A_a + σ^B_a)/2`.
///
/// # Panics
/// If an entry is outside −1..=1 (a programming error).
pub fn gate_class_of_pair_sums(m: [i8; 3]) -> u8 {
    let key: usize = m
        .iter()
        .enumerate()
        .map(|(k, &v)| {
            assert!((-1..=1).contains(&v), "pair sum out of range");
            (v + 1) as usize * [1, 3, 9][k]
        })
        .sum();
    CLASS_BY_KEY[key]
}

/// Gate class of `spin` in configuration `sigma`.
///
/// Uses the neighbour order of [`Pyrochlore::neighbours`]: entries `k` and
/// `k + 3` are the partners of the same sublattice in the up and down
/// tetrahedron (tested below).
#[inline]
pub fn gate_class(lat: &Pyrochlore, sigma: &[i8], spin: usize) -> u8 {
    let nb = lat.neighbours(spin);
    let mut key = 0usize;
    let mut weight = 1usize;
    for k in 0..3 {
        // (σA + σB)/2 + 1 = (σA + σB + 2)/2 ∈ {0, 1, 2}.
        let pair = sigma[nb[k] as usize] + sigma[nb[k + 3] as usize];
        key += ((pair + 2) / 2) as usize * weight;
        weight *= 3;
    }
    CLASS_BY_KEY[key]
}

/// Base-3 key `Σ_k (m_k + 1) 3^k` of `spin` (index of [`class_of_key`]),
/// with `k` the position of the partner pair in the neighbour order.
#[inline]
pub(crate) fn gate_key(lat: &Pyrochlore, sigma: &[i8], spin: usize) -> u8 {
    let nb = lat.neighbours(spin);
    let p = |k: usize| ((sigma[nb[k] as usize] + sigma[nb[k + 3] as usize] + 2) / 2) as u8;
    p(0) + 3 * p(1) + 9 * p(2)
}

/// Gate class of a base-3 key (`key < 27`).
#[inline(always)]
pub(crate) fn class_of_key(key: u8) -> u8 {
    CLASS_BY_KEY[key as usize % 27]
}

/// `KEY_WEIGHT[4b + a]`: weight `3^k` in the key of a spin of sublattice `b`
/// of its partner pair of sublattice `a ≠ b`. The partners are listed in
/// sublattice order of the other three sublattices, so `k = a − [a > b]`
/// (derived from the order of [`Pyrochlore::neighbours`]). When a partner
/// of sublattice `a` goes from `σ = s` to `−s`, the pair sum changes by
/// `−2s` and the key by `−s·KEY_WEIGHT[4b + a]`: an O(1) update of the
/// neighbour's class without re-reading its six neighbours.
pub(crate) const KEY_WEIGHT: [i8; 16] = build_key_weights();

const fn build_key_weights() -> [i8; 16] {
    let mut w = [0i8; 16];
    let mut b = 0;
    while b < 4 {
        let mut a = 0;
        while a < 4 {
            if a != b {
                let k = if a > b { a - 1 } else { a };
                w[4 * b + a] = [1, 3, 9][k];
            }
            a += 1;
        }
        b += 1;
    }
    w
}

/// The transverse-field vector `h⊥_i = Σ_j σ_j (e_j − (e_j·e_i) e_i)` over
/// the six neighbours, in units of the moment (for checks and displays; the
/// engines use the class).
pub fn transverse_field(lat: &Pyrochlore, sigma: &[i8], spin: usize) -> [f64; 3] {
    let ei = crate::lattice::easy_axis(lat.sublattice(spin));
    let mut h = [0.0; 3];
    for &j in lat.neighbours(spin) {
        let ej = crate::lattice::easy_axis(lat.sublattice(j as usize));
        let along = crate::lattice::dot(ej, ei);
        for c in 0..3 {
            h[c] += sigma[j as usize] as f64 * (ej[c] - along * ei[c]);
        }
    }
    h
}

/// Per-spin gate classes, kept up to date flip by flip.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct GateClasses {
    class: Vec<u8>,
}

impl GateClasses {
    /// Classes of every spin of `sigma` (one ±1 entry per spin of `lat`).
    pub fn new(lat: &Pyrochlore, sigma: &[i8]) -> Self {
        Self {
            class: (0..lat.spin_count())
                .map(|i| gate_class(lat, sigma, i))
                .collect(),
        }
    }

    /// Update after `spin` flipped (`sigma` is the configuration after the
    /// flip): only its six neighbours change class.
    pub fn after_flip(&mut self, lat: &Pyrochlore, sigma: &[i8], spin: usize) {
        for &j in lat.neighbours(spin) {
            self.class[j as usize] = gate_class(lat, sigma, j as usize);
        }
    }

    /// Class of `spin`.
    pub fn class(&self, spin: usize) -> u8 {
        self.class[spin]
    }

    /// All classes, indexed by spin.
    pub fn as_slice(&self) -> &[u8] {
        &self.class
    }

    pub(crate) fn as_mut_slice(&mut self) -> &mut [u8] {
        &mut self.class
    }

    /// Number of spins in each class.
    pub fn histogram(&self) -> [u64; GATE_CLASS_COUNT] {
        let mut h = [0u64; GATE_CLASS_COUNT];
        for &c in &self.class {
            h[c as usize] += 1;
        }
        h
    }
}

/// What happens to the gated (`h⊥ = 0`) class in the bimodal preset.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub enum SlowGate {
    /// Attempt time multiplied by this ratio (≥ 1); the published preset is
    /// about 10⁴ (Science 378, 1218 (2022), memory).
    Ratio(f64),
    /// Never attempts.
    Frozen,
}

/// The published slow/fast ratio of the bimodal preset, τ_slow/τ_fast ≈ 10⁴
/// (Science 378, 1218 (2022), memory).
pub const DEFAULT_SLOW_RATIO: f64 = 1.0e4;

/// Why an attempt-time table was refused.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum GatingError {
    /// A class got a time that is not positive (or NaN). `f64::INFINITY` is
    /// allowed and means frozen.
    InvalidAttemptTime {
        /// Class 0..4.
        class: usize,
        /// `|h⊥|/|g|` of the class.
        magnitude: f64,
        /// The offending value (s).
        attempt_time_seconds: f64,
    },
    /// Every class is frozen: nothing could ever move.
    AllFrozen,
    /// A bimodal ratio below 1 or not finite.
    InvalidRatio(f64),
    /// A continuous rate law with fewer than two grid points, a grid end
    /// that is not a positive finite number, or a step threshold that is not
    /// a finite number ≥ 0.
    InvalidTransverseGrid {
        /// Grid points given.
        points: usize,
        /// The grid end `x_max` (or the step threshold).
        x_max: f64,
    },
    /// A continuous rate law gave a time that is not positive (or NaN).
    InvalidLawValue {
        /// `x = |h⊥|/unit` where it happened.
        x: f64,
        /// The offending value (s).
        attempt_time_seconds: f64,
    },
}

impl fmt::Display for GatingError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            GatingError::InvalidAttemptTime {
                class,
                magnitude,
                attempt_time_seconds,
            } => write!(
                f,
                "the attempt time of gate class {class} (|h⊥| = {magnitude:.4} g) is \
                 {attempt_time_seconds} s; it must be a positive number of seconds \
                 (or infinite for a frozen class)"
            ),
            GatingError::AllFrozen => {
                write!(f, "every gate class is frozen, so no spin could ever flip")
            }
            GatingError::InvalidRatio(r) => write!(
                f,
                "the slow/fast ratio must be a finite number ≥ 1 (got {r})"
            ),
            GatingError::InvalidTransverseGrid { points, x_max } => write!(
                f,
                "a continuous rate law needs at least 2 grid points over 0 ≤ x ≤ x_max with \
                 x_max a positive finite number (got {points} points, x_max = {x_max})"
            ),
            GatingError::InvalidLawValue {
                x,
                attempt_time_seconds,
            } => write!(
                f,
                "the rate law gives {attempt_time_seconds} s at |h⊥| = {x:.4} (one neighbour's \
                 field); an attempt time must be a positive number of seconds (or infinite)"
            ),
        }
    }
}

impl std::error::Error for GatingError {}

/// Attempt time (s) per gate class; `f64::INFINITY` means frozen.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct AttemptTimes {
    /// Indexed by class 0..4 (class 0 is `h⊥ = 0`).
    pub attempt_time_seconds: [f64; GATE_CLASS_COUNT],
}

impl AttemptTimes {
    /// The same attempt time τ0 for every spin (ungated kinetics of
    /// Jaubert & Holdsworth, Nat. Phys. 5, 258 (2009)).
    pub fn uniform(attempt_time_seconds: f64) -> Result<Self, GatingError> {
        Self::from_table([attempt_time_seconds; GATE_CLASS_COUNT])
    }

    /// From an explicit table (validated).
    pub fn from_table(attempt_time_seconds: [f64; GATE_CLASS_COUNT]) -> Result<Self, GatingError> {
        let times = Self {
            attempt_time_seconds,
        };
        times.validate()?;
        Ok(times)
    }

    /// From a rate law `|h⊥|/|g| ↦ attempt time (s)`, evaluated once per
    /// class at [`GATE_CLASS_MAGNITUDES`].
    pub fn from_rate_law(law: impl Fn(f64) -> f64) -> Result<Self, GatingError> {
        Self::from_table(GATE_CLASS_MAGNITUDES.map(law))
    }

    /// The bimodal preset: open classes attempt every `fast_seconds`, the
    /// `h⊥ = 0` class `ratio` times slower or never.
    pub fn bimodal(fast_seconds: f64, slow: SlowGate) -> Result<Self, GatingError> {
        let slow_time = match slow {
            SlowGate::Frozen => f64::INFINITY,
            SlowGate::Ratio(r) => {
                if !r.is_finite() || r < 1.0 {
                    return Err(GatingError::InvalidRatio(r));
                }
                fast_seconds * r
            }
        };
        Self::from_table([slow_time, fast_seconds, fast_seconds, fast_seconds])
    }

    /// Check every entry (positive or +∞) and that some class can move.
    pub fn validate(&self) -> Result<(), GatingError> {
        for (class, &t) in self.attempt_time_seconds.iter().enumerate() {
            if t.is_nan() || t <= 0.0 {
                return Err(GatingError::InvalidAttemptTime {
                    class,
                    magnitude: GATE_CLASS_MAGNITUDES[class],
                    attempt_time_seconds: t,
                });
            }
        }
        if self.attempt_time_seconds.iter().all(|t| t.is_infinite()) {
            return Err(GatingError::AllFrozen);
        }
        Ok(())
    }

    /// Attempt rates (1/s) per class, 0 for frozen classes.
    pub fn rates_per_second(&self) -> [f64; GATE_CLASS_COUNT] {
        self.attempt_time_seconds.map(|t| 1.0 / t)
    }

    /// Shortest attempt time (s) over the classes.
    pub fn shortest_seconds(&self) -> f64 {
        self.attempt_time_seconds
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min)
    }

    /// Whether every class has the same attempt time.
    pub fn is_uniform(&self) -> bool {
        let t = self.attempt_time_seconds;
        t.iter().all(|&x| x == t[0])
    }
}

/// Attempt time as a function of a continuous transverse-field magnitude,
/// for the what-if in which `h⊥` comes from the full dipolar sum instead of
/// the six-neighbour classes (physics-reference §5).
///
/// The argument `x` is `|h⊥|` in units of the transverse field one nearest
/// neighbour's dipole alone produces (so a lone neighbour gives `x = 1`, as a
/// lone neighbour gives `|h⊥|/|g| = 1` in the six-neighbour classes).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum TransverseRateLaw {
    /// A law tabulated at `x = k·x_max/(n−1)`, `k = 0..n`, interpolated
    /// linearly in the rate `1/τ`; beyond `x_max` the last value holds.
    Table {
        /// Largest tabulated `x`.
        x_max: f64,
        /// Attempt time (s) at each grid point (`+∞` = frozen).
        attempt_time_seconds: Vec<f64>,
    },
    /// The bimodal preset on a continuous `x`: below `threshold` the spin is
    /// slow (or frozen), above it fast. `threshold = 1` sits half-way between
    /// the closed class (0) and the smallest open class (2) of the
    /// six-neighbour classification.
    Step {
        /// `x` below which the spin is slow.
        threshold: f64,
        /// Attempt time (s) above the threshold.
        fast_seconds: f64,
        /// Attempt time (s) below it (`+∞` = frozen).
        slow_seconds: f64,
    },
}

/// Where the bimodal step of [`TransverseRateLaw::bimodal`] sits.
pub const CONTINUOUS_GATE_THRESHOLD: f64 = 1.0;

impl TransverseRateLaw {
    /// Tabulate `law` (x ↦ attempt time in s) on `points ≥ 2` grid points over `[0, x_max]`.
    pub fn from_rate_law(
        law: impl Fn(f64) -> f64,
        x_max: f64,
        points: usize,
    ) -> Result<Self, GatingError> {
        let points = points.max(2);
        let times: Vec<f64> = (0..points)
            .map(|k| law(x_max * k as f64 / (points - 1) as f64))
            .collect();
        let table = TransverseRateLaw::Table {
            x_max,
            attempt_time_seconds: times,
        };
        table.validate()?;
        Ok(table)
    }

    /// The bimodal preset with the step at [`CONTINUOUS_GATE_THRESHOLD`].
    pub fn bimodal(fast_seconds: f64, slow: SlowGate) -> Result<Self, GatingError> {
        let classes = AttemptTimes::bimodal(fast_seconds, slow)?;
        Ok(TransverseRateLaw::Step {
            threshold: CONTINUOUS_GATE_THRESHOLD,
            fast_seconds,
            slow_seconds: classes.attempt_time_seconds[0],
        })
    }

    /// `self` if [`Self::validate`] accepts it.
    pub fn validate_into(self) -> Result<Self, GatingError> {
        self.validate()?;
        Ok(self)
    }

    /// Check every attempt time (positive or +∞) and that something can move.
    pub fn validate(&self) -> Result<(), GatingError> {
        let check = |t: f64, x: f64| {
            if t.is_nan() || t <= 0.0 {
                Err(GatingError::InvalidLawValue {
                    x,
                    attempt_time_seconds: t,
                })
            } else {
                Ok(())
            }
        };
        match self {
            TransverseRateLaw::Table {
                x_max,
                attempt_time_seconds,
            } => {
                if attempt_time_seconds.len() < 2 || !(x_max.is_finite() && *x_max > 0.0) {
                    return Err(GatingError::InvalidTransverseGrid {
                        points: attempt_time_seconds.len(),
                        x_max: *x_max,
                    });
                }
                let n = attempt_time_seconds.len();
                for (k, &t) in attempt_time_seconds.iter().enumerate() {
                    check(t, x_max * k as f64 / (n - 1) as f64)?;
                }
                if attempt_time_seconds.iter().all(|t| t.is_infinite()) {
                    return Err(GatingError::AllFrozen);
                }
            }
            TransverseRateLaw::Step {
                fast_seconds,
                slow_seconds,
                threshold,
            } => {
                if !(threshold.is_finite() && *threshold >= 0.0) {
                    return Err(GatingError::InvalidTransverseGrid {
                        points: 2,
                        x_max: *threshold,
                    });
                }
                check(*fast_seconds, *threshold)?;
                check(*slow_seconds, 0.0)?;
                if fast_seconds.is_infinite() {
                    return Err(GatingError::AllFrozen);
                }
            }
        }
        Ok(())
    }

    /// Attempt rate (1/s) at `x ≥ 0`.
    #[inline]
    pub fn rate_per_second(&self, x: f64) -> f64 {
        match self {
            TransverseRateLaw::Table {
                x_max,
                attempt_time_seconds,
            } => {
                let n = attempt_time_seconds.len();
                let u = (x / x_max * (n - 1) as f64).clamp(0.0, (n - 1) as f64);
                let k = (u as usize).min(n - 2);
                let f = u - k as f64;
                let (r0, r1) = (
                    1.0 / attempt_time_seconds[k],
                    1.0 / attempt_time_seconds[k + 1],
                );
                r0 + f * (r1 - r0)
            }
            TransverseRateLaw::Step {
                threshold,
                fast_seconds,
                slow_seconds,
            } => {
                if x < *threshold {
                    1.0 / slow_seconds
                } else {
                    1.0 / fast_seconds
                }
            }
        }
    }

    /// Largest attempt rate (1/s) anywhere.
    pub fn fastest_rate_per_second(&self) -> f64 {
        match self {
            TransverseRateLaw::Table {
                attempt_time_seconds,
                ..
            } => attempt_time_seconds
                .iter()
                .map(|t| 1.0 / t)
                .fold(0.0, f64::max),
            TransverseRateLaw::Step {
                fast_seconds,
                slow_seconds,
                ..
            } => (1.0 / fast_seconds).max(1.0 / slow_seconds),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::lattice::{dot, easy_axis};
    use crate::metropolis::{initial_configuration, Start};
    use crate::rng::RngStreams;

    fn norm(v: [f64; 3]) -> f64 {
        dot(v, v).sqrt()
    }

    #[test]
    fn paired_neighbours_are_inversion_images_of_the_same_sublattice() {
        // Premise of the h⊥ formula (physics-reference §5, derived):
        // neighbours k and k+3 share a sublattice and r_A + r_B = 2 r_i.
        let lat = Pyrochlore::new(2).unwrap();
        for i in 0..lat.spin_count() {
            let nb = lat.neighbours(i);
            let ri = lat.position(i);
            for k in 0..3 {
                let (a, b) = (nb[k] as usize, nb[k + 3] as usize);
                assert_eq!(lat.sublattice(a), lat.sublattice(b));
                let da = lat.displacement(ri, lat.position(a));
                let db = lat.displacement(ri, lat.position(b));
                for c in 0..3 {
                    assert!((da[c] + db[c]).abs() < 1e-12);
                }
            }
        }
    }

    #[test]
    fn key_weights_update_keys_like_recomputation() {
        // Flipping one neighbour changes the key by −s·3^k (derived, see
        // KEY_WEIGHT); checked against recomputation for every spin and
        // every neighbour of a random state.
        let lat = Pyrochlore::new(2).unwrap();
        let mut rng = RngStreams::new(17).stream(0);
        let mut sigma = initial_configuration(&lat, Start::Random, &mut rng);
        for i in 0..lat.spin_count() {
            let before: Vec<u8> = lat
                .neighbours(i)
                .iter()
                .map(|&j| gate_key(&lat, &sigma, j as usize))
                .collect();
            let s = sigma[i];
            sigma[i] = -s;
            for (k, &j) in lat.neighbours(i).iter().enumerate() {
                let j = j as usize;
                let w = KEY_WEIGHT[4 * (j % 4) + i % 4];
                let updated = (before[k] as i8 - s * w) as u8;
                assert_eq!(updated, gate_key(&lat, &sigma, j));
                assert_eq!(class_of_key(updated), gate_class(&lat, &sigma, j));
            }
        }
    }

    #[test]
    fn exhaustive_64_patterns_give_four_classes_with_derived_counts() {
        // Every one of the 64 neighbour patterns on a real site, with h⊥ from
        // the easy-axis vectors: exactly four magnitudes {0, 2, 2√3, 4}·|g|,
        // holding 10, 36, 12, 6 patterns (derived, module documentation).
        let lat = Pyrochlore::new(1).unwrap();
        let g = 8f64.sqrt() / 3.0;
        for spin in 0..4 {
            let mut counts = [0usize; 4];
            let mut distinct: Vec<f64> = Vec::new();
            for pattern in 0..64u32 {
                let mut sigma = vec![1i8; lat.spin_count()];
                for (k, &j) in lat.neighbours(spin).iter().enumerate() {
                    sigma[j as usize] = if pattern >> k & 1 == 1 { 1 } else { -1 };
                }
                let magnitude = norm(transverse_field(&lat, &sigma, spin)) / g;
                if !distinct.iter().any(|&d| (d - magnitude).abs() < 1e-9) {
                    distinct.push(magnitude);
                }
                let class = gate_class(&lat, &sigma, spin) as usize;
                assert!(
                    (GATE_CLASS_MAGNITUDES[class] - magnitude).abs() < 1e-9,
                    "class {class} vs |h|/g = {magnitude}"
                );
                counts[class] += 1;
            }
            distinct.sort_by(f64::total_cmp);
            assert_eq!(distinct.len(), 4, "{distinct:?}");
            assert_eq!(counts, [10, 36, 12, 6]);
        }
    }

    #[test]
    fn g_vectors_have_equal_length_at_120_degrees() {
        // g_a = e_a + e_i/3 (derived from e_a·e_i = −1/3, physics-reference §1).
        for i in 0..4 {
            let ei = easy_axis(i);
            let gs: Vec<[f64; 3]> = (0..4)
                .filter(|&a| a != i)
                .map(|a| {
                    let e = easy_axis(a);
                    [e[0] + ei[0] / 3.0, e[1] + ei[1] / 3.0, e[2] + ei[2] / 3.0]
                })
                .collect();
            for a in 0..3 {
                assert!((norm(gs[a]) - 8f64.sqrt() / 3.0).abs() < 1e-12);
                assert!(dot(gs[a], ei).abs() < 1e-12);
                for b in a + 1..3 {
                    let cos = dot(gs[a], gs[b]) / (8.0 / 9.0);
                    assert!((cos + 0.5).abs() < 1e-12);
                }
            }
        }
    }

    #[test]
    fn no_spin_of_an_ice_state_is_gated() {
        // Ice rule ⇒ Σ_a m_a = −σ_i = ±1, never 3m (derived, physics-reference §5).
        // Checked on the ordered ice state and on disordered ice states made by
        // loop moves (Barkema & Newman, PRE 57, 1155 (1998)).
        let lat = Pyrochlore::new(3).unwrap();
        let mut rng = RngStreams::new(1).stream(0);
        for loops in [0, 5, 200] {
            let sigma = test_support::random_ice_state(&lat, &mut rng, loops);
            for t in 0..lat.tetrahedron_count() {
                assert_eq!(crate::hamiltonian::charge(&lat, &sigma, t), 0);
            }
            let gates = GateClasses::new(&lat, &sigma);
            assert_eq!(gates.histogram()[0], 0);
        }
        // A random (non-ice) state does have gated spins, so the check can fail.
        let random = initial_configuration(&lat, Start::Random, &mut rng);
        assert!(GateClasses::new(&lat, &random).histogram()[0] > 0);
    }

    #[test]
    fn incremental_classes_match_recomputation() {
        let lat = Pyrochlore::new(2).unwrap();
        let mut rng = RngStreams::new(4).stream(0);
        let mut sigma = initial_configuration(&lat, Start::Random, &mut rng);
        let mut gates = GateClasses::new(&lat, &sigma);
        for step in 0..2000usize {
            let spin = (step * 7919 + 13) % lat.spin_count();
            sigma[spin] = -sigma[spin];
            gates.after_flip(&lat, &sigma, spin);
        }
        assert_eq!(gates, GateClasses::new(&lat, &sigma));
        for i in 0..lat.spin_count() {
            assert_eq!(class_of_key(gate_key(&lat, &sigma, i)), gates.class(i));
        }
    }

    #[test]
    fn attempt_time_tables() {
        let law = AttemptTimes::from_rate_law(|h| 1e-3 / (1.0 + h * h)).unwrap();
        assert_eq!(law.attempt_time_seconds[0], 1e-3);
        assert!((law.attempt_time_seconds[3] - 1e-3 / 17.0).abs() < 1e-18);
        let bimodal = AttemptTimes::bimodal(2e-6, SlowGate::Ratio(DEFAULT_SLOW_RATIO)).unwrap();
        assert_eq!(bimodal.attempt_time_seconds, [2e-2, 2e-6, 2e-6, 2e-6]);
        let frozen = AttemptTimes::bimodal(1.0, SlowGate::Frozen).unwrap();
        assert_eq!(frozen.rates_per_second()[0], 0.0);
        assert_eq!(frozen.shortest_seconds(), 1.0);
        assert!(AttemptTimes::uniform(1.0).unwrap().is_uniform());
        assert!(matches!(
            AttemptTimes::from_rate_law(|h| h - 1.0),
            Err(GatingError::InvalidAttemptTime { class: 0, .. })
        ));
        assert_eq!(
            AttemptTimes::from_table([f64::INFINITY; 4]),
            Err(GatingError::AllFrozen)
        );
        assert!(AttemptTimes::bimodal(1.0, SlowGate::Ratio(0.5)).is_err());
        assert!(AttemptTimes::uniform(f64::NAN).is_err());
        assert!(GatingError::AllFrozen.to_string().contains("frozen"));
    }

    #[test]
    fn continuous_rate_laws_interpolate_clamp_and_step() {
        // Linear interpolation in the rate between grid points, the last
        // value beyond x_max, and the bimodal step at x = 1 (definitions of
        // TransverseRateLaw; derived).
        let law = TransverseRateLaw::from_rate_law(|x| 1.0 / (1.0 + x), 4.0, 5).unwrap();
        for x in [0.0, 0.5, 1.0, 2.25, 4.0] {
            let r = law.rate_per_second(x);
            assert!((r - (1.0 + x)).abs() < 1e-12, "x = {x}: {r}");
        }
        assert!((law.rate_per_second(9.0) - 5.0).abs() < 1e-12);
        assert!((law.fastest_rate_per_second() - 5.0).abs() < 1e-12);
        let step = TransverseRateLaw::bimodal(2.0, SlowGate::Ratio(100.0)).unwrap();
        assert_eq!(step.rate_per_second(0.99), 1.0 / 200.0);
        assert_eq!(step.rate_per_second(1.0), 0.5);
        assert_eq!(step.fastest_rate_per_second(), 0.5);
        let frozen = TransverseRateLaw::bimodal(2.0, SlowGate::Frozen).unwrap();
        assert_eq!(frozen.rate_per_second(0.2), 0.0);
        // Refused: a non-positive time anywhere on the grid, a bad grid.
        assert!(TransverseRateLaw::from_rate_law(|x| 1.0 - x, 4.0, 9).is_err());
        assert!(TransverseRateLaw::from_rate_law(|_| 1.0, 0.0, 9).is_err());
        assert!(TransverseRateLaw::from_rate_law(|_| f64::INFINITY, 4.0, 9).is_err());
    }
}

/// Helpers shared by the tests of the dynamics modules.
#[cfg(test)]
pub(crate) mod test_support {
    use crate::lattice::Pyrochlore;
    use crate::rng::SpinRng;
    use rand::Rng;

    /// A disordered two-in–two-out state: the ordered ice state followed by
    /// `loops` random closed loop flips (Barkema & Newman, PRE 57, 1155
    /// (1998)): walk from tetrahedron to tetrahedron leaving on an "out"
    /// spin until the walk bites its tail, then flip the closed part.
    pub(crate) fn random_ice_state(lat: &Pyrochlore, rng: &mut SpinRng, loops: usize) -> Vec<i8> {
        let mut sigma: Vec<i8> = (0..lat.spin_count())
            .map(|i| if i % 4 < 2 { 1 } else { -1 })
            .collect();
        let tets = lat.tetrahedron_count();
        let mut visited_at = vec![usize::MAX; tets];
        let mut path_tets: Vec<usize> = Vec::new();
        let mut path_spins: Vec<usize> = Vec::new();
        for _ in 0..loops {
            path_tets.clear();
            path_spins.clear();
            let mut t = rng.gen_range(0..tets);
            loop {
                if visited_at[t] != usize::MAX {
                    for &s in &path_spins[visited_at[t]..] {
                        sigma[s] = -sigma[s];
                    }
                    break;
                }
                visited_at[t] = path_tets.len();
                path_tets.push(t);
                let out_sign = if lat.is_up(t) { 1 } else { -1 };
                let outs: Vec<usize> = lat
                    .spins_of(t)
                    .iter()
                    .map(|&s| s as usize)
                    .filter(|&s| sigma[s] == out_sign)
                    .collect();
                let s = outs[rng.gen_range(0..outs.len())];
                path_spins.push(s);
                let [up, down] = lat.tetrahedra_of(s);
                t = if up as usize == t {
                    down as usize
                } else {
                    up as usize
                };
            }
            for &t in &path_tets {
                visited_at[t] = usize::MAX;
            }
        }
        sigma
    }
}
