//! Equilibrium runs through the language beyond the plain scan: equilibration
//! diagnostics, parallel tempering, annealing, square ice, the molar specific heat and
//! the memory refusal of coupling tables.

mod common;
use common::*;
use icefield_lang::workspace::Table;
use icefield_lang::Session;
use icefield_stdlib::couplings::CouplingTable;
use icefield_stdlib::exchange::{CouplingConvention, ExchangeCouplings};
use icefield_stdlib::lattice::Pyrochlore;

fn table<'a>(session: &'a Session, name: &str) -> &'a Table {
    session.workspace().table(name).expect("table stored")
}

fn column<'a>(table: &'a Table, name: &str) -> &'a icefield_lang::workspace::Column {
    table
        .column(name)
        .unwrap_or_else(|| panic!("no column {name}: {:?}", table.column_names()))
}

/// Exact ⟨E⟩/N of L = 1 nearest-neighbour ice (16 spins) by enumerating its 2^16 states
/// (exact), with the energy of each state from stdlib's coupling table.
fn exact_energy_per_spin(j_eff_kelvin: f64, temperature_kelvin: f64) -> f64 {
    let lat = Pyrochlore::new(1).unwrap();
    let mut table = CouplingTable::zero(&lat).unwrap();
    ExchangeCouplings::nearest_neighbour(j_eff_kelvin, CouplingConvention::IsingPseudospins)
        .add_to(&lat, &mut table)
        .unwrap();
    let energies: Vec<f64> = (0..1u32 << 16)
        .map(|bits| {
            let sigma: Vec<i8> = (0..16)
                .map(|b| if bits >> b & 1 == 1 { 1 } else { -1 })
                .collect();
            table.direct_energy_kelvin(&sigma)
        })
        .collect();
    let lowest = energies.iter().copied().fold(f64::INFINITY, f64::min);
    let (mut z, mut ez) = (0.0, 0.0);
    for e in energies {
        let w = (-(e - lowest) / temperature_kelvin).exp();
        z += w;
        ez += w * e;
    }
    ez / z / 16.0
}

fn summary_text(collected: &Collected) -> String {
    collected.streams.join("")
}

#[test]
fn every_scan_table_carries_tau_int_and_drift_and_short_runs_are_flagged() {
    let mut session = Session::new();
    // 20 sweeps are always fewer than 50 τ_int (τ_int ≥ ½ sample by definition).
    let out = ok(
        &mut session,
        &format!("{TINY_MODEL}short = scan T at [1, 2] K, sweeps = 20, equilibrate = 10"),
    );
    let short = table(&session, "short");
    assert_eq!(column(short, "tau_int_energy").unit, "sweeps");
    assert_eq!(column(short, "drift_sigma").unit, "");
    let text = summary_text(&out);
    assert!(
        text.contains("warning: the run looks too short at T = 1, 2 K"),
        "{text}"
    );
    // The drift column is a number at every temperature (the drift check itself is tested
    // against a ramp and a stationary AR(1) series in stdlib::scan).
    assert!(column(short, "drift_sigma")
        .values
        .iter()
        .all(|d| d.is_finite()));
}

#[test]
fn tau_int_of_infinite_temperature_heat_bath_is_the_derived_value() {
    // Heat bath at T ≫ J: every visited spin is redrawn at random, so a bond product
    // survives t sweeps only if neither spin was visited, ρ(t) = q^{2t} with
    // q = (1 − 1/N)^N, and τ_int = ½ + q²/(1 − q²) (derived; τ_int convention of Sokal
    // (1997)). N = 128: q = 0.36647, τ_int = 0.6551 sweeps.
    let mut session = Session::new();
    ok(
        &mut session,
        "lattice pyrochlore L = 2\ncouplings nearest J_eff = 1 K\nseed 5\n\
         hot = scan T at [1000000] K, sweeps = 40000, equilibrate = 100, acceptance = heat_bath",
    );
    let n = 128.0f64;
    let q: f64 = (1.0 - 1.0 / n).powf(n);
    let expected = 0.5 + q * q / (1.0 - q * q);
    let tau = column(table(&session, "hot"), "tau_int_energy").values[0];
    assert!((tau - expected).abs() < 0.05, "τ_int {tau} vs {expected}");
}

#[test]
fn parallel_tempering_samples_every_temperature_and_reports_swaps() {
    let mut session = Session::new();
    let out = ok(
        &mut session,
        "lattice pyrochlore L = 1\ncouplings nearest J_eff = 1 K\nseed 21\n\
         pt = scan T at [0.6, 0.9, 1.4, 2.2] K, sweeps = 20000, equilibrate = 500, tempering = on",
    );
    let pt = table(&session, "pt");
    let energy = column(pt, "energy");
    for (row, &t) in [0.6, 0.9, 1.4, 2.2].iter().enumerate() {
        let exact = exact_energy_per_spin(1.0, t);
        let (mean, error) = (energy.values[row], energy.errors.as_ref().unwrap()[row]);
        // Exact enumeration; 5 blocking errors.
        assert!(
            (mean - exact).abs() < 5.0 * error,
            "T = {t}: {mean} ± {error} vs {exact}"
        );
    }
    let swaps = &column(pt, "exchange_acceptance").values;
    for &rate in &swaps[..3] {
        assert!(rate > 0.05 && rate <= 1.0, "{swaps:?}");
    }
    assert!(
        swaps[3].is_nan(),
        "the highest temperature has no upper partner"
    );
    let provenance = pt.provenance.as_ref().unwrap();
    assert!(
        provenance.source.contains("parallel-tempering"),
        "{}",
        provenance.source
    );
    assert!(
        !summary_text(&out).contains("rarely swap"),
        "{}",
        summary_text(&out)
    );
    // A descending or shuffled ladder keeps the order it was written in.
    ok(
        &mut session,
        "pt2 = scan T at [2.2, 0.6, 1.4] K, sweeps = 200, equilibrate = 20, tempering = on",
    );
    assert_eq!(
        column(table(&session, "pt2"), "T").values,
        vec![2.2, 0.6, 1.4]
    );
}

#[test]
fn anneal_carries_one_chain_through_the_temperatures() {
    let mut session = Session::new();
    ok(
        &mut session,
        "lattice pyrochlore L = 1\ncouplings nearest J_eff = 1 K\nseed 8\n\
         cool = anneal T from 3 K to 0.6 K in 4 steps, sweeps = 20000, equilibrate = 200",
    );
    let cool = table(&session, "cool");
    let t = &column(cool, "T").values;
    let expected_t = [3.0, 2.2, 1.4, 0.6];
    for (a, b) in t.iter().zip(expected_t) {
        assert!((a - b).abs() < 1e-12, "{t:?}");
    }
    let energy = column(cool, "energy");
    for (row, &t) in expected_t.iter().enumerate() {
        let exact = exact_energy_per_spin(1.0, t);
        let (mean, error) = (energy.values[row], energy.errors.as_ref().unwrap()[row]);
        // Exact enumeration; 5 blocking errors.
        assert!(
            (mean - exact).abs() < 5.0 * error,
            "T = {t}: {mean} ± {error} vs {exact}"
        );
    }
    let provenance = cool.provenance.as_ref().unwrap();
    assert!(
        provenance.source.contains("anneal"),
        "{}",
        provenance.source
    );
    // Unnamed, it is stored as `last_anneal`.
    ok(
        &mut session,
        "anneal T at [2, 1] K, sweeps = 40, equilibrate = 0",
    );
    assert_eq!(table(&session, "last_anneal").row_count(), 2);
}

#[test]
fn anneal_and_tempering_errors_have_positions() {
    let mut session = Session::new();
    ok(&mut session, TINY_MODEL);
    let error = fails(&mut session, "anneal T from 3 K to 0.6 K");
    assert_eq!(error.kind, "SyntaxError");
    assert_eq!(error.diagnostics[0].line, 1);
    assert_eq!(error.diagnostics[0].column, 10);
    let error = fails(
        &mut session,
        "anneal T from 3 K to 0.6 K in 4 steps, tempering = on",
    );
    assert_eq!(error.kind, "ValueError");
    assert_eq!(error.diagnostics[0].column, 40);
    let error = fails(&mut session, "anneal T from 3 K to -1 K in 4 steps");
    assert_eq!(error.kind, "ValueError");
    let error = fails(&mut session, "scan T at [1, 2] K, tempering = maybe");
    assert_eq!(error.kind, "NameError");
    assert_eq!(error.diagnostics[0].column, 33);
}

#[test]
fn molar_specific_heat_is_r_times_the_per_spin_value() {
    let mut session = Session::new();
    ok(
        &mut session,
        &format!(
            "{TINY_MODEL}measure specific_heat, specific_heat_molar\n\
             c = scan T at [1, 3] K, sweeps = 400"
        ),
    );
    let c = table(&session, "c");
    let molar = column(c, "specific_heat_molar");
    assert_eq!(molar.unit, "J/(mol K)");
    // R = N_A k_B = 8.314462618 J/(mol K), exact in the 2019 SI (CODATA 2018).
    for (m, per_spin) in molar.values.iter().zip(&column(c, "specific_heat").values) {
        assert!((m - 8.314462618 * per_spin).abs() < 1e-12 * m.abs().max(1.0));
    }
}

#[test]
fn square_ice_entropy_is_liebs_value() {
    // Lieb, Phys. Rev. 162, 162 (1967), exact: S = ½ ln (4/3)^{3/2} = 0.215762 per spin;
    // within 0.003 on an L = 32 torus (finite-size excess of order ln N / N).
    let mut session = Session::new();
    ok(
        &mut session,
        "lattice square_ice L = 32\ncouplings nearest J_eff = 1 K\nseed 7\n\
         measure energy, specific_heat, entropy\n\
         s = scan T from 20 K to 0.12 K in 40 steps, spacing = log, sweeps = 4000, equilibrate = 500",
    );
    let s = table(&session, "s");
    let entropy = column(s, "entropy");
    let last = *entropy.values.last().unwrap();
    let lieb = 0.75 * (4.0f64 / 3.0).ln();
    assert!((last - lieb).abs() < 0.003, "S = {last} vs {lieb}");
    assert!(s
        .provenance
        .as_ref()
        .unwrap()
        .lattice
        .contains("square ice"));
}

#[test]
fn square_ice_refuses_what_it_cannot_record() {
    let mut session = Session::new();
    let error = fails(
        &mut session,
        "lattice square_ice L = 8\ncouplings nearest J_eff = 1 K\nmeasure energy, magnetisation\n\
         scan T at [1, 2] K",
    );
    assert_eq!(error.kind, "ValueError");
    assert!(error.message.contains("magnetisation"), "{}", error.message);
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (4, 1)
    );
    let error = fails(
        &mut session,
        "lattice square_ice L = 8\ncouplings nearest J_eff = 1 K\nscan T at [1, 2] K, loops = 4",
    );
    assert_eq!(error.kind, "ValueError");
    assert_eq!(error.diagnostics[0].column, 21);
    let error = fails(&mut session, "lattice square_ice L = 2");
    assert_eq!(error.kind, "ValueError");
    assert_eq!(error.diagnostics[0].column, 24);
    // Without a `measure` statement the default set is cut to what square ice records.
    ok(
        &mut session,
        "lattice square_ice L = 8\ncouplings nearest J_eff = 1 K\nsq = scan T at [1, 2] K, sweeps = 100",
    );
    let names = table(&session, "sq").column_names();
    assert!(names.iter().any(|n| n == "specific_heat"), "{names:?}");
    assert!(!names.iter().any(|n| n == "magnetisation"), "{names:?}");
}

#[test]
fn a_coupling_table_too_large_is_refused_at_check_time() {
    let mut session = Session::new();
    // L = 200: N = 1.28e8 spins, 40 bytes per spin of table and fields = 5.1 GB, above the
    // 4 GiB budget (stdlib::couplings estimate, derived).
    let error = fails(
        &mut session,
        "lattice pyrochlore L = 200\ncouplings dipolar D = 1.41 K\nscan T at [1, 2] K",
    );
    assert_eq!(error.kind, "ValueError");
    assert!(
        error.message.contains("GiB") && error.message.contains("limit"),
        "{}",
        error.message
    );
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (3, 1)
    );
    // Tempering keeps one sampler per temperature: 200 replicas of L = 60 do not fit either.
    let error = fails(
        &mut session,
        "lattice pyrochlore L = 60\ncouplings nearest J_eff = 1 K\n\
         scan T from 0.5 K to 5 K in 200 steps, tempering = on",
    );
    assert_eq!(error.kind, "ValueError");
    assert!(
        error.message.contains("200 tempering replicas"),
        "{}",
        error.message
    );
    // The nearest-neighbour engine needs no table.
    assert!(session
        .prepare("lattice pyrochlore L = 200\ncouplings nearest J_eff = 1 K\nscan T at [1, 2] K")
        .is_ok());
}

#[test]
fn structure_factor_of_uncorrelated_spins_is_two_thirds_in_every_channel_sum() {
    // At T ≫ J the pseudospins are uncorrelated, so S(Q) = (1/N) Σ_i |m_i⊥|² at every Q,
    // and Σ_a e_a e_aᵀ = (4/3) 1 over the four ⟨111⟩ axes gives ⟨|m⊥|²⟩ = 1 − 1/3 = 2/3 μ²
    // per spin (derived; physics-reference §4). The channels add up, total = SF + NSF
    // (Moon, Riste & Koehler, Phys. Rev. 181, 920 (1969)).
    let mut session = Session::new();
    let out = ok(
        &mut session,
        "lattice pyrochlore L = 2\ncouplings nearest J_eff = 1 K\nseed 4\n\
         cut = structure_factor along [0, 0, l] through [0, 0, 2] at 1000000 K, range = 2, \
         points = 11, polarisation = [1, -1, 0], samples = 400, sweeps_between = 5",
    );
    assert_eq!(out.displays.len(), 1, "the cut is shown as a table");
    let cut = table(&session, "cut");
    let l = &column(cut, "l").values;
    assert!(
        (l[0] - 0.0).abs() < 1e-12 && (l[10] - 4.0).abs() < 1e-12,
        "{l:?}"
    );
    let total = &column(cut, "total").values;
    // At Q = 0 every direction is normal to Q, so S = ⟨|m|²⟩ = 1 μ² (derived).
    assert!((total[0] - 1.0).abs() < 0.25, "S(0) = {}", total[0]);
    // Away from Q = 0, 2/3. Tolerance 10 %: one configuration's S(Q) fluctuates by about
    // its mean, 400 configurations give about 5 % per point, and the points of an L = 2
    // lattice are strongly correlated (the Bragg points l = 2, 4 share the sublattice sums)
    // (estimate, derived).
    let mean = total[1..].iter().sum::<f64>() / (total.len() - 1) as f64;
    assert!((mean - 2.0 / 3.0).abs() < 0.067, "⟨S⟩ = {mean}");
    let sf = &column(cut, "sf").values;
    let nsf = &column(cut, "nsf").values;
    for i in 0..total.len() {
        assert!((sf[i] + nsf[i] - total[i]).abs() < 1e-9 * total[i].max(1.0));
    }
    assert_eq!(column(cut, "total").unit, "μ²");
}

#[test]
fn a_structure_factor_plane_is_a_table_and_a_heat_map() {
    let mut session = Session::new();
    let out = ok(
        &mut session,
        "lattice pyrochlore L = 1\ncouplings nearest J_eff = 1 K\nseed 4\n\
         sq = structure_factor on plane [h, h, l] at 0.5 K, range = 2, points = 11, \
         polarisation = [1, -1, 0], form_factor = \"Ho3+\", a = 10 Å, samples = 4, loops = 2",
    );
    let sq = table(&session, "sq");
    assert_eq!(sq.row_count(), 121);
    let names = sq.column_names();
    assert_eq!(names, vec!["h", "l", "total", "sf", "nsf"]);
    match session.workspace().get("sq_map") {
        Some(icefield_lang::workspace::Value::Figure(f)) => {
            assert!(f.svg.contains("<svg"), "an SVG heat map");
            assert_eq!(f.x_unit, "r.l.u.");
        }
        other => panic!("no heat map: {other:?}"),
    }
    assert!(out.streams.join("").contains("sq_map"));
}

#[test]
fn structure_factor_errors_are_clear_and_placed() {
    let mut session = Session::new();
    ok(&mut session, TINY_MODEL);
    let error = fails(&mut session, "structure_factor on plane [h, h, h] at 0.3 K");
    assert_eq!(error.kind, "ValueError");
    assert!(error.message.contains("collinear"), "{}", error.message);
    assert_eq!(error.diagnostics[0].column, 27);
    let error = fails(&mut session, "structure_factor on plane [0, 0, 0] at 0.3 K");
    assert!(error.message.contains("not a plane"), "{}", error.message);
    let error = fails(
        &mut session,
        "structure_factor on plane [h, h, l] at 0.3 K, form_factor = \"Hx3+\", a = 10 Å",
    );
    assert_eq!(error.kind, "NameError");
    assert!(error.message.contains("Ho3+"), "{}", error.message);
    assert!(
        error.diagnostics[0].rendered.contains("did you mean"),
        "{}",
        error.diagnostics[0].rendered
    );
    let error = fails(
        &mut session,
        "structure_factor on plane [h, h, l] at 0.3 K, form_factor = \"Ho3+\"",
    );
    assert_eq!(error.kind, "ValueError");
    assert!(
        error.message.contains("lattice constant"),
        "{}",
        error.message
    );
    let error = fails(
        &mut session,
        "structure_factor on plane [h, h, l] at 0.3 K, polarisation = [0, 0, 0]",
    );
    assert_eq!(error.kind, "ValueError");
    let error = fails(&mut session, "structure_factor along [0, 0, l] at 0.3 K");
    assert_eq!(error.kind, "SyntaxError");
    let error = fails(&mut session, "structure_factor on plane [h, h, l]");
    assert_eq!(error.kind, "SyntaxError");
}
