//! The percolation toolkit through the language: threshold sweeps, clusters, chemical
//! distance, walkers and the open-hop graph of spin-ice states, their errors with line
//! and column, and interrupts that keep what was finished.

mod common;
use common::*;
use icefield_lang::workspace::{DynamicsDecl, ExecutionChoice, Table, TransverseSource};
use icefield_lang::{Interrupt, Output, Session};
use icefield_stdlib::dynamics::AcceptanceRule;
use icefield_stdlib::gating::{AttemptTimes, SlowGate};

fn table<'a>(session: &'a Session, name: &str) -> &'a Table {
    session
        .workspace()
        .table(name)
        .unwrap_or_else(|| panic!("no table {name}"))
}

fn values<'a>(table: &'a Table, column: &str) -> &'a [f64] {
    &table
        .column(column)
        .unwrap_or_else(|| panic!("no column {column} in {:?}", table.column_names()))
        .values
}

#[test]
fn a_bond_sweep_on_the_square_lattice_crosses_near_one_half() {
    let mut session = Session::new();
    let out = ok(
        &mut session,
        "seed 5\npc = percolation bond on square, L = [12, 24], sweeps = 120, bootstrap = 20",
    );
    let pc = table(&session, "pc");
    assert_eq!(
        pc.column_names(),
        [
            "p",
            "wrapping_L12",
            "wrapping_L24",
            "largest_L12",
            "largest_L24"
        ]
    );
    assert_eq!(pc.row_count(), 61);
    // The wrapping probability rises with p (a cumulative distribution, derived).
    let w = values(pc, "wrapping_L24");
    assert!(w.windows(2).all(|x| x[1] >= x[0] - 1e-12));
    // Kesten, Commun. Math. Phys. 74, 41 (1980): p_c = 1/2 exactly; two small sizes and
    // 120 sweeps give a few hundredths.
    let estimate = table(&session, "pc_pc");
    let p_c = values(estimate, "p_c")[0];
    assert!((p_c - 0.5).abs() < 0.03, "{p_c}");
    assert_eq!(values(estimate, "p_c_reference")[0], 0.5);
    assert!(out
        .streams
        .concat()
        .contains("crossing of the wrapping probabilities"));
    assert!(out.progress > 0);
    assert_eq!(out.displays.len(), 1, "the wrapping figure");
}

#[test]
fn cluster_sizes_account_for_every_site() {
    // In bond percolation every site belongs to exactly one cluster, so Σ_s s·n_s = 1
    // with n_s per site (derived).
    let mut session = Session::new();
    ok(
        &mut session,
        "seed 2\nsizes = percolation clusters on square at p = 0.5, L = 24, realisations = 4, sweeps = 10",
    );
    let sizes = table(&session, "sizes");
    let total: f64 = values(sizes, "s")
        .iter()
        .zip(values(sizes, "n_s"))
        .map(|(s, n)| s * n)
        .sum();
    assert!((total - 1.0).abs() < 1e-12, "{total}");
    let stats = table(&session, "sizes_stats");
    let largest = values(stats, "largest_cluster_fraction")[0];
    assert!(largest > 0.0 && largest <= 1.0);
    assert!(values(stats, "correlation_length")[0] > 0.0);
}

#[test]
fn growth_on_the_full_square_lattice_is_the_exact_ball() {
    // At p = 1 the sites within ℓ hops of a square-lattice site number 2ℓ² + 2ℓ + 1
    // while the ball fits in the box (derived), so the exponent tends to 2.
    let mut session = Session::new();
    ok(
        &mut session,
        "grow = percolation growth on square at p = 1, L = 64, realisations = 2, seeds = 3, max_distance = 20",
    );
    let grow = table(&session, "grow");
    for (l, n) in values(grow, "l").iter().zip(values(grow, "N")) {
        assert_eq!(*n, 2.0 * l * l + 2.0 * l + 1.0, "ℓ = {l}");
    }
    let d_l = values(table(&session, "grow_fit"), "d_l")[0];
    assert!((d_l - 2.0).abs() < 0.05, "{d_l}");
}

#[test]
fn walkers_on_a_full_lattice_diffuse_with_three_per_step() {
    // p = 1 on the diamond lattice: every step moves by a (±1,±1,±1) vector in units of
    // a/4, so ⟨r²⟩ = 3t (derived); 300 walkers give a few percent.
    let mut session = Session::new();
    ok(
        &mut session,
        "seed 4\nwalk = percolation walkers on diamond at p = 1, L = 8, steps = 400, walkers = 300, sample_every = 10",
    );
    let walk = table(&session, "walk");
    let t = *values(walk, "t").last().unwrap();
    assert_eq!(t, 400.0);
    for column in ["msd_cluster", "msd_full"] {
        let msd = *values(walk, column).last().unwrap();
        // s.d. of the mean r² ≈ 3t·√(2/3)/√300 (Gaussian limit).
        assert!(
            (msd / (3.0 * t) - 1.0).abs() < 4.0 * (2.0f64 / 3.0).sqrt() / 300f64.sqrt(),
            "{column}: {msd}"
        );
    }
    let psd = table(&session, "walk_psd");
    assert!(values(psd, "f").iter().all(|f| *f > 0.0));
    assert!(values(psd, "psd_full").iter().all(|s| *s > 0.0));
}

#[test]
fn errors_point_at_the_offending_word() {
    let mut session = Session::new();
    let error = fails(
        &mut session,
        "seed 1\npc = percolation bond on hexagonal, L = [4, 8]",
    );
    assert_eq!(error.kind, "NameError");
    let d = &error.diagnostics[0];
    assert_eq!((d.line, d.column), (2, 26), "{}", d.rendered);
    assert!(d.message.contains("diamond"), "{}", d.message);

    let error = fails(
        &mut session,
        "x = percolation clusters on diamond at p = 1.5, L = 8",
    );
    assert_eq!(error.kind, "ValueError");
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (1, 44)
    );
    assert!(error.message.contains("[0, 1]"), "{}", error.message);

    let error = fails(
        &mut session,
        "\nx = percolation growth on square at 0.5, L = 8.5",
    );
    assert_eq!(error.kind, "ValueError");
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (2, 46)
    );
    assert!(error.message.contains("whole number"), "{}", error.message);

    let error = fails(&mut session, "percolation bond on diamond, L = [8]");
    assert_eq!(error.kind, "ValueError");
    let error = fails(&mut session, "percolation drift on diamond");
    assert_eq!(error.kind, "NameError");
    assert_eq!(error.diagnostics[0].column, 13);
    let error = fails(
        &mut session,
        "percolation walkers on diamond at p = 0.4, stepz = 10",
    );
    assert_eq!(
        error.diagnostics[0].help.as_deref(),
        Some("did you mean `steps`?")
    );
    // Nothing ran, nothing was stored.
    assert!(session.workspace().values.is_empty());
}

fn declare_dynamics(session: &mut Session, times: AttemptTimes, description: &str) {
    session.workspace_mut().model.dynamics = Some(DynamicsDecl {
        acceptance: AcceptanceRule::Metropolis,
        attempt_times: times,
        rates_description: description.to_string(),
        execution: ExecutionChoice::Auto,
        transverse: TransverseSource::Neighbours,
        rate_law: None,
    });
}

#[test]
fn open_hops_needs_a_dynamics_rule() {
    let mut session = Session::new();
    let error = fails(
        &mut session,
        &format!("{TINY_MODEL}open = percolation open_hops at 0.3 K"),
    );
    assert_eq!(error.kind, "NameError");
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (4, 8)
    );
    assert!(error.diagnostics[0]
        .help
        .as_deref()
        .unwrap()
        .contains("dynamics"));
    let error = fails(&mut Session::new(), "open = percolation open_hops at 0.3 K");
    assert!(error.message.contains("no lattice"), "{}", error.message);
}

#[test]
fn uniform_rates_open_every_hop() {
    // All classes equally fast: every bond is open (exact), and a single charge has
    // exactly three bonds that carry it onward (derived), so exits per bond = 3/4.
    let mut session = Session::new();
    declare_dynamics(
        &mut session,
        AttemptTimes::uniform(1e-6).unwrap(),
        "uniform",
    );
    ok(
        &mut session,
        "lattice pyrochlore L = 2\ncouplings nearest J_eff = 1.8 K\nseed 3\n\
         open = percolation open_hops at [0.5, 5] K, states = 3, equilibrate = 20, sample_every = 5",
    );
    let open = table(&session, "open");
    assert_eq!(open.row_count(), 6);
    assert!(values(open, "open_fraction").iter().all(|f| *f == 1.0));
    assert!(values(open, "fresh_pair_exit_fraction")
        .iter()
        .all(|f| *f == 0.75));
    for f in values(open, "monopole_exit_fraction") {
        assert!(f.is_nan() || *f == 0.75, "{f}");
    }
    assert!(values(open, "distance_from_p_c")
        .iter()
        .all(|d| (d - (1.0 - 0.3880)).abs() < 1e-12));
}

#[test]
fn gated_rates_close_no_bond_of_a_defect_free_ice_state() {
    // No spin of an ice background has h⊥ = 0 (derived, physics-reference §5), so under
    // the bimodal frozen rule a state without charges has every bond open, and a state
    // with charges has some closed; at high temperature many are closed.
    let mut session = Session::new();
    declare_dynamics(
        &mut session,
        AttemptTimes::bimodal(1e-6, SlowGate::Frozen).unwrap(),
        "bimodal, slow class frozen",
    );
    ok(
        &mut session,
        "lattice pyrochlore L = 2\ncouplings nearest J_eff = 1.8 K\nseed 8\n\
         open = percolation open_hops at [0.4, 20] K, states = 4, equilibrate = 200, sample_every = 5, loops = 2",
    );
    let open = table(&session, "open");
    let density = values(open, "monopole_density");
    let fraction = values(open, "open_fraction");
    for (d, f) in density.iter().zip(fraction) {
        if *d == 0.0 {
            assert_eq!(*f, 1.0);
        }
    }
    // The 20 K rows are close to random states: a good share of spins is in class 0
    // (10 of the 64 neighbour patterns, derived in stdlib::gating).
    let hot: Vec<f64> = open
        .column("T")
        .unwrap()
        .values
        .iter()
        .zip(fraction)
        .filter(|(t, _)| **t == 20.0)
        .map(|(_, f)| *f)
        .collect();
    assert!(hot.iter().all(|f| *f < 0.97), "{hot:?}");
}

#[test]
fn an_interrupt_keeps_the_sizes_finished() {
    // The interrupt is raised at the first progress report, so the run stops after its
    // first chunk of sweeps; the partial tables are stored.
    let mut session = Session::new();
    let interrupt = Interrupt::new();
    let raise = interrupt.clone();
    let result = session.execute(
        "pc = percolation bond on square, L = [8, 16], sweeps = 100",
        &interrupt,
        &mut |output| {
            if let Output::Progress(_) = output {
                raise.request();
            }
        },
    );
    let error = result.unwrap_err();
    assert_eq!(error.kind, "Interrupted");
    assert!(
        error.message.contains("kept 1 of 2 sizes"),
        "{}",
        error.message
    );
    let pc = table(&session, "pc");
    assert_eq!(pc.column_names(), ["p", "wrapping_L8", "largest_L8"]);
    assert!(pc.provenance.as_ref().unwrap().interrupted);
    assert!(values(table(&session, "pc_pc"), "p_c")[0].is_nan());
}
