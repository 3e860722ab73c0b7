//! Helpers shared by the physics tests.
#![allow(dead_code)]

use icefield_stdlib::lattice::{dot, easy_axis, Pyrochlore};

/// Exact canonical averages of the nearest-neighbour model on the L = 1
/// lattice (16 spins, 2^16 states) by enumeration. Energies come from the
/// neighbour table's pair sum (not from the library's Hamiltonian code).
#[derive(Debug, Clone, Copy)]
pub struct ExactAverages {
    pub energy_per_spin: f64,
    pub specific_heat_per_spin: f64,
    pub magnetisation_per_spin: f64,
    pub susceptibility_per_spin: f64,
    pub single_charge_density: f64,
    pub double_charge_density: f64,
    pub monopole_density_per_spin: f64,
    pub nn_correlation: f64,
}

pub fn exact_l1(j_eff: f64, temperature: f64) -> ExactAverages {
    let lat = Pyrochlore::new(1).expect("L = 1");
    let n = lat.spin_count();
    assert_eq!(n, 16);
    let mut pairs = Vec::new();
    for i in 0..n {
        for &j in lat.neighbours(i) {
            if (j as usize) > i {
                pairs.push((i, j as usize));
            }
        }
    }
    assert_eq!(pairs.len(), 48);
    let axes: Vec<[f64; 3]> = (0..n).map(|i| easy_axis(lat.sublattice(i))).collect();
    let tets: Vec<[u32; 4]> = (0..lat.tetrahedron_count())
        .map(|t| *lat.spins_of(t))
        .collect();
    let mut states: Vec<(f64, [f64; 3], u32, u32)> = Vec::with_capacity(1 << n);
    let mut e_min = f64::INFINITY;
    for code in 0u32..(1 << n) {
        let s = |i: usize| if code >> i & 1 == 1 { 1i32 } else { -1 };
        let bonds: i32 = pairs.iter().map(|&(i, j)| s(i) * s(j)).sum();
        let e = j_eff * bonds as f64;
        let mut m = [0.0; 3];
        for (i, axis) in axes.iter().enumerate() {
            for k in 0..3 {
                m[k] += s(i) as f64 * axis[k];
            }
        }
        let (mut single, mut double) = (0, 0);
        for t in &tets {
            match t.iter().map(|&i| s(i as usize)).sum::<i32>().abs() {
                2 => single += 1,
                4 => double += 1,
                _ => {}
            }
        }
        e_min = e_min.min(e);
        states.push((e, m, single, double));
    }
    let mut z = 0.0;
    let mut acc = [0.0f64; 12];
    for &(e, m, single, double) in &states {
        let w = (-(e - e_min) / temperature).exp();
        z += w;
        let de = e - e_min;
        let m2 = dot(m, m);
        let terms = [
            de,
            de * de,
            m2.sqrt(),
            m[0],
            m[1],
            m[2],
            m2,
            single as f64,
            double as f64,
            e / j_eff.abs().max(1e-300),
            0.0,
            0.0,
        ];
        for (a, t) in acc.iter_mut().zip(terms) {
            *a += w * t;
        }
    }
    let avg: Vec<f64> = acc.iter().map(|a| a / z).collect();
    let nf = n as f64;
    let tets_f = tets.len() as f64;
    let var_e = avg[1] - avg[0] * avg[0];
    let mean_m2 = avg[3] * avg[3] + avg[4] * avg[4] + avg[5] * avg[5];
    ExactAverages {
        energy_per_spin: (avg[0] + e_min) / nf,
        specific_heat_per_spin: var_e / (nf * temperature * temperature),
        magnetisation_per_spin: avg[2] / nf,
        susceptibility_per_spin: (avg[6] - mean_m2) / (3.0 * nf * temperature),
        single_charge_density: avg[7] / tets_f,
        double_charge_density: avg[8] / tets_f,
        monopole_density_per_spin: (avg[7] + 2.0 * avg[8]) / nf,
        nn_correlation: avg[9] / pairs.len() as f64,
    }
}
