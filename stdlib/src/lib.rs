//! # icefield-stdlib — the simulation core of icefield
//!
//! Plain Rust numerics for pyrochlore spin ice, usable without the language
//! or the kernel. One module per concept:
//!
//! * Geometry: [`lattice`] (pyrochlore, tetrahedra, the diamond graph of their
//!   centres), [`square_ice`] (the 2D six-vertex geometry, for exact checks).
//! * Hamiltonians: [`hamiltonian`] (nearest-neighbour `J_eff`, charges),
//!   [`exchange`] (J1, J2, J3, J3′ and Zeeman), [`ewald`] (dipolar sums with
//!   conducting boundary), [`couplings`] (the translation-invariant table all
//!   of them fill).
//! * Equilibrium sampling: [`metropolis`] (the fast nearest-neighbour
//!   engine), [`engine`] (local-field caches for any coupling table;
//!   Metropolis and heat-bath), [`loops`] (ice-manifold loop moves),
//!   [`tempering`] (replica exchange, annealing, equilibration diagnostics),
//!   [`scan`] (parallel temperature scans).
//! * Dynamics in physical time: [`gating`] (transverse-field classes and
//!   attempt-time tables), [`dynamics`] (attempt-based and rejection-free
//!   kinetics, protocols), [`monopoles`] (identities, displacements,
//!   reachable sites).
//! * Analysis: [`observe`] (estimators, blocking errors, autocorrelation
//!   times), [`entropy`] (thermodynamic integration), [`structure_factor`]
//!   (neutron S(Q) with polarisation channels and form factors),
//!   [`spectra`] (FFT autocorrelation, Welch PSD, dynamic susceptibility),
//!   [`fit`] (least-squares fits with standard errors), [`percolation`]
//!   (Newman–Ziff sweeps, crossings, chemical distance, walkers).
//! * Figures: [`figure`] (line plots), [`fit_figure`] (log–log plots with
//!   fitted lines), [`heatmap`] (S(Q) planes with a colour bar).
//! * Plumbing: [`rng`] (seeded splittable streams), [`control`]
//!   (interrupt and progress), [`mod@bench`] (benchmark workloads).
//!
//! ## Invariants
//! * Knows nothing of the icefield language or the Jupyter kernel: it takes
//!   and returns plain values (`f64` with the unit in the name: kelvin,
//!   tesla, bohr magnetons, seconds; k_B = 1) and serde-serialisable structs.
//! * Reproducible: every random number comes from
//!   `RngStreams::new(seed).stream(i)`; parallel results never depend on the
//!   thread count.
//! * User-reachable paths return errors instead of panicking; long runs poll
//!   an [`control::Interrupt`] and return what they finished.
//! * Memory is estimated before large tables are allocated, and refused past
//!   a stated limit.
//! * Conventions follow the project's physics reference: positions in units
//!   of the cubic constant `a`, easy axes `e_a` pointing out of up
//!   tetrahedra, `Q_t = ±Σσ/2`.
//!
//! ## Deliberately absent
//! Units and their conversion (the language layer owns them); files and any
//! other I/O (figures are returned as SVG strings); GPU code of any kind.

pub mod bench;
pub mod control;
pub mod couplings;
pub mod dynamics;
pub mod engine;
pub mod entropy;
pub mod ewald;
pub mod exchange;
pub mod figure;
pub mod fit;
pub mod fit_figure;
pub mod gating;
pub mod hamiltonian;
pub mod heatmap;
pub mod lattice;
pub mod loops;
pub mod metropolis;
pub mod monopoles;
pub mod observe;
pub mod percolation;
pub mod rng;
pub mod scan;
pub mod spectra;
pub mod square_ice;
pub mod structure_factor;
pub mod tempering;
