//! The monopole commands through the language: `monopoles` (tracking through the
//! kinetics), `reachable` (reachable diamond sites, path-dependent and static) and
//! `cluster` (the picture of one reachable cluster). The dynamics rule is set directly in
//! the workspace, as the `dynamics` statement will.

mod common;
use common::*;
use icefield_lang::workspace::{DynamicsDecl, ExecutionChoice, Table, TransverseSource, Value};
use icefield_lang::{Interrupt, Session};
use icefield_stdlib::dynamics::AcceptanceRule;
use icefield_stdlib::gating::{AttemptTimes, SlowGate};

/// τ0 of the rules below (s).
const TAU0: f64 = 1e-6;

fn rule(acceptance: AcceptanceRule, attempt_times: AttemptTimes, text: &str) -> DynamicsDecl {
    DynamicsDecl {
        acceptance,
        attempt_times,
        rates_description: text.into(),
        execution: ExecutionChoice::Auto,
        transverse: TransverseSource::Neighbours,
        rate_law: None,
    }
}

fn uniform(acceptance: AcceptanceRule) -> DynamicsDecl {
    rule(
        acceptance,
        AttemptTimes::uniform(TAU0).unwrap(),
        "uniform, τ0 = 1 µs",
    )
}

/// A session with the nearest-neighbour model on L = 4 and `dynamics`.
fn session(dynamics: DynamicsDecl) -> Session {
    let mut session = Session::new();
    ok(
        &mut session,
        "lattice pyrochlore L = 4\ncouplings nearest J_eff = 1.1 K\nseed 3",
    );
    session.workspace_mut().model.dynamics = Some(dynamics);
    session
}

fn table<'a>(session: &'a Session, name: &str) -> &'a Table {
    session.workspace().table(name).expect("table stored")
}

fn values<'a>(table: &'a Table, column: &str) -> &'a [f64] {
    &table
        .column(column)
        .unwrap_or_else(|| panic!("no column {column}"))
        .values
}

fn errors<'a>(table: &'a Table, column: &str) -> &'a [f64] {
    table
        .column(column)
        .and_then(|c| c.errors.as_deref())
        .unwrap_or_else(|| panic!("no errors on {column}"))
}

/// Hop rate per monopole (hops per τ0) and its Poisson error, and the mean-square
/// displacement at the first lag (bond²), from `replicas` runs of an isolated pair at a
/// temperature far below the pair cost 4 J_eff = 4.4 K, so that no pair is created.
fn isolated_pair(acceptance: AcceptanceRule, replicas: u64) -> (f64, f64, f64, f64) {
    let mut session = session(uniform(acceptance));
    let intervals = 25.0;
    let dt_tau0 = 0.01;
    let (mut hops, mut exposure_tau0) = (0.0, 0.0);
    let mut msd_first_lag = 0.0;
    for r in 0..replicas {
        ok(
            &mut session,
            &format!(
                "seed {}\nw = monopoles for 0.25 µs at 0.05 K, sample_every = 0.01 µs, start = pair, \
                 separation = 6, equilibrate = 0",
                100 + r
            ),
        );
        let w = table(&session, "w");
        let counts = values(w, "monopoles");
        assert_eq!(counts.len(), intervals as usize + 1);
        assert_eq!(counts[0], 2.0, "one isolated pair at t = 0");
        hops += values(w, "hops").last().unwrap();
        exposure_tau0 += counts[..intervals as usize].iter().sum::<f64>() * dt_tau0;
        let msd = values(w, "msd");
        assert_eq!(msd[0], 0.0);
        msd_first_lag += msd[1];
        // Hops by gate class add up to the hops.
        let gates = table(&session, "w_gates");
        assert_eq!(
            values(gates, "hops").iter().sum::<f64>(),
            *values(w, "hops").last().unwrap()
        );
    }
    // Nearly every (monopole, origin) pair contributes 0 or one hop of 1 bond², so the
    // estimate is a count over 2 × 25 pairs per replica: Poisson error √(msd / pairs).
    let msd = msd_first_lag / replicas as f64;
    let msd_error = (msd / (replicas as f64 * 2.0 * intervals)).sqrt();
    (
        hops / exposure_tau0,
        hops.sqrt() / exposure_tau0,
        msd,
        msd_error,
    )
}

#[test]
fn an_isolated_monopole_hops_three_times_per_attempt_time() {
    // Physics-reference §9, "isolated monopole, nn model, uniform rates, short times:
    // 3 hops per τ0" (derived): a single charge has three majority spins whose flip costs
    // ΔE = 0, each attempting once per τ0 and accepted with min(1, e^0) = 1; every other
    // flip creates charge at a cost ≥ 4 J_eff (never accepted at 0.05 K). Poisson counting
    // error, 3σ.
    let (rate, error, msd, msd_error) = isolated_pair(AcceptanceRule::Metropolis, 160);
    eprintln!("Metropolis: {rate} ± {error} hops per τ0; msd(0.01 τ0) = {msd} ± {msd_error} bond²");
    assert!(
        (rate - 3.0).abs() < 3.0 * error,
        "Metropolis: {rate} ± {error} hops per τ0"
    );
    // Short-time limit of the mean-square displacement (derived): in a lag δt ≪ τ0 a
    // monopole hops once with probability ≈ 3 δt/τ0 and a hop moves it one diamond bond, so
    // msd(δt) ≈ 3 δt/τ0 bond² = 0.03 bond² at δt = 0.01 τ0; two hops in one lag (probability
    // ≈ (0.03)²/2, at most 8/3 bond² each) shift it by at most 0.0013.
    assert!(
        (msd - 0.03).abs() < 3.0 * msd_error + 0.0013,
        "msd at the first lag {msd} ± {msd_error} bond²"
    );
    // Glauber accepts a ΔE = 0 flip with 1/(1 + e^0) = ½: 1.5 hops per τ0 (derived).
    let (rate, error, _, _) = isolated_pair(AcceptanceRule::Glauber, 160);
    eprintln!("Glauber: {rate} ± {error} hops per τ0");
    assert!(
        (rate - 1.5).abs() < 3.0 * error,
        "Glauber: {rate} ± {error} hops per τ0"
    );
}

#[test]
fn static_counts_with_every_gate_open_are_the_diamond_crystal_ball() {
    // With uniform rates every gate class is open, so the static snapshot reaches every
    // diamond site within n bonds: the crystal ball sequence of the diamond net 1, 5, 17,
    // 41, 83, 147 (OEIS A007904; shells 4, 12, 24, 42, 64 are OEIS A008253; Conway &
    // Sloane, Proc. R. Soc. A 453, 2369 (1997)), exact for every sample. On L = 4 (16
    // bonds across the box) no shell wraps before 5 hops.
    let mut session = session(uniform(AcceptanceRule::Metropolis));
    ok(
        &mut session,
        "r = reachable within 5 hops at 0.3 K, samples = 6, mode = both",
    );
    let r = table(&session, "r");
    assert_eq!(values(r, "n"), &[0.0, 1.0, 2.0, 3.0, 4.0, 5.0]);
    assert_eq!(
        values(r, "sites_static"),
        &[1.0, 5.0, 17.0, 41.0, 83.0, 147.0]
    );
    assert!(errors(r, "sites_static").iter().all(|&e| e == 0.0));
    // Path-dependent: a +1 monopole can leave only through the spins pointing out of its
    // tetrahedron, its three majority spins, so exactly 1 + 3 sites within one hop; and
    // with every gate open each path hop is also a static bond, so the path count never
    // exceeds the static one (derived).
    let path = values(r, "sites_path");
    assert_eq!(path[0], 1.0);
    assert_eq!(path[1], 4.0);
    assert_eq!(errors(r, "sites_path")[1], 0.0);
    // Two hops (derived): each of the two fresh neighbours, entered on a spin that the hop
    // flips to point out, offers its two other out spins; the string's previous
    // tetrahedron, with the string's last spin flipped back, offers two as well (the
    // string spin before it and its other out spin); distance-2 sites of the diamond are
    // all distinct, so 1 + 3 + 2·2 + 2 = 10 for every sample.
    assert_eq!(path[2], 10.0);
    assert_eq!(errors(r, "sites_path")[2], 0.0);
    for (p, s) in path.iter().zip(values(r, "sites_static")) {
        assert!(p <= s, "path {p} > static {s}");
    }
    assert!(
        path[5] < 147.0,
        "the direction rule removes sites: {path:?}"
    );
    let provenance = r.provenance.as_ref().unwrap();
    assert!(
        provenance.source.contains("path-dependent"),
        "{}",
        provenance.source
    );
    assert!(
        provenance.source.contains("static-snapshot"),
        "{}",
        provenance.source
    );
}

#[test]
fn closing_the_h_perp_zero_class_can_only_remove_reachable_sites() {
    // The same seed gives the same states and pairs whatever the rule (the rule enters only
    // through the open classes), and with fewer open classes each search explores a subset
    // of the states of the all-open one, so every count can only fall (derived). Of the
    // three hop spins of a monopole about one third have h⊥ = 0 (physics-reference §5,
    // derived), so the bimodal rule must close some of them: the mean one-hop count falls
    // below 1 + 3.
    let query = "r = reachable within 6 hops at 0.3 K, samples = 40, mode = both";
    let mut open = session(uniform(AcceptanceRule::Metropolis));
    ok(&mut open, query);
    let gated_rule = rule(
        AcceptanceRule::Metropolis,
        AttemptTimes::bimodal(TAU0, SlowGate::Ratio(1e4)).unwrap(),
        "bimodal, slow/fast = 10⁴",
    );
    let mut gated = session(gated_rule);
    ok(&mut gated, query);
    let (a, b) = (table(&open, "r"), table(&gated, "r"));
    for column in ["sites_path", "sites_static"] {
        for (g, o) in values(b, column).iter().zip(values(a, column)) {
            assert!(g <= o, "{column}: gated {g} > open {o}");
        }
    }
    let one_hop = values(b, "sites_path")[1];
    let error = errors(b, "sites_path")[1];
    eprintln!(
        "gated: path {:?}, static {:?}; open: path {:?}",
        values(b, "sites_path"),
        values(b, "sites_static"),
        values(a, "sites_path")
    );
    assert!(
        one_hop < 4.0 - 3.0 * error.max(1e-3),
        "one-hop count with gates {one_hop} ± {error}"
    );
    assert!(b.provenance.as_ref().unwrap().source.contains("[1, 2, 3]"));
}

#[test]
fn a_cluster_is_drawn_and_stored_as_a_figure() {
    let mut session = session(uniform(AcceptanceRule::Metropolis));
    let collected = ok(
        &mut session,
        "pic = cluster within 4 hops at 0.3 K, mode = path",
    );
    let Some(Value::Figure(figure)) = session.workspace().get("pic") else {
        panic!("figure stored");
    };
    assert!(figure.svg.starts_with("<svg") && figure.svg.contains("<circle"));
    assert!(figure.svg.contains("path-dependent"));
    let y = &figure.series[0].y;
    assert_eq!(y.len(), 5);
    // One start site and its three onward spins (derived, as above).
    assert_eq!((y[0], y[1]), (1.0, 4.0));
    assert!(y.windows(2).all(|w| w[0] <= w[1]));
    assert!(collected.displays.iter().any(|d| d.svg.is_some()));
}

#[test]
fn tracking_tables_have_their_columns_and_can_be_plotted_in_the_same_cell() {
    let mut session = session(uniform(AcceptanceRule::Metropolis));
    ok(
        &mut session,
        "walk = monopoles for 20 µs at 1.5 K, sample_every = 1 µs, equilibrate = 50\n\
         plot walk.msd against t",
    );
    let walk = table(&session, "walk");
    assert_eq!(
        walk.column_names(),
        ["t", "msd", "distinct_sites", "monopoles", "hops"]
    );
    assert_eq!(walk.column("msd").unwrap().unit, "bond²");
    let t = values(walk, "t");
    assert_eq!(t.len(), 21);
    assert!((t[20] - 20e-6).abs() < 1e-15);
    // Hops only accumulate; a monopole has visited at least its own site.
    assert!(values(walk, "hops").windows(2).all(|w| w[0] <= w[1]));
    assert!(values(walk, "distinct_sites")
        .iter()
        .all(|&d| d.is_nan() || d >= 1.0));
    let gates = table(&session, "walk_gates");
    assert_eq!(values(gates, "gate_class"), &[0.0, 1.0, 2.0, 3.0]);
    let share: f64 = values(gates, "share").iter().sum();
    assert!((share - 1.0).abs() < 1e-12, "shares add up to one: {share}");
    let provenance = walk.provenance.as_ref().unwrap();
    assert!(
        provenance.source.contains("rejection-free"),
        "{}",
        provenance.source
    );
    assert!(!provenance.interrupted);
}

#[test]
fn an_interrupted_tracking_run_keeps_its_samples() {
    let mut session = session(uniform(AcceptanceRule::Metropolis));
    let interrupt = Interrupt::new();
    let stopper = interrupt.clone();
    let handle = std::thread::spawn(move || {
        std::thread::sleep(std::time::Duration::from_millis(700));
        stopper.request();
    });
    // 10 s of kinetics at 2 K on 1024 spins: far too long to finish before the interrupt.
    let (collected, result) = run_with(
        &mut session,
        "long = monopoles for 10 s at 2 K, sample_every = 2 ms, equilibrate = 0",
        &interrupt,
    );
    handle.join().unwrap();
    let error = result.expect_err("interrupted");
    assert_eq!(error.kind, "Interrupted");
    assert!(error.message.contains("kept"), "{}", error.message);
    let long = table(&session, "long");
    let rows = long.row_count();
    assert!((1..5_001).contains(&rows), "{rows} rows");
    assert!(long.provenance.as_ref().unwrap().interrupted);
    assert!(session.workspace().table("long_gates").is_some());
    assert!(collected.progress >= 1, "progress was reported");
}

#[test]
fn bad_monopole_statements_are_clear_errors_with_positions() {
    // No dynamics rule: the error names the statement that would declare one.
    let mut bare = Session::new();
    ok(
        &mut bare,
        "lattice pyrochlore L = 2\ncouplings nearest J_eff = 1.1 K",
    );
    let error = fails(&mut bare, "w = monopoles for 1 µs at 0.3 K");
    assert_eq!(error.kind, "NameError");
    let d = &error.diagnostics[0];
    assert_eq!((d.line, d.column), (1, 5));
    assert!(d.message.contains("dynamics"), "{}", d.message);
    assert_eq!(
        d.help.as_deref(),
        Some("declare a dynamics rule first: dynamics single_flip, attempt_time = 1 µs")
    );
    assert!(bare.workspace().get("w").is_none());

    let mut session = session(uniform(AcceptanceRule::Metropolis));
    // A duration without its unit.
    let error = fails(&mut session, "w = monopoles for 10 at 0.3 K");
    assert_eq!(error.kind, "UnitError");
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (1, 19)
    );
    assert!(error.diagnostics[0].message.contains("time unit"));
    // Hops must be whole.
    let error = fails(&mut session, "\nreachable within 2.5 hops at 0.3 K");
    assert_eq!(error.kind, "ValueError");
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (2, 18)
    );
    assert!(error.diagnostics[0].message.contains("whole number"));
    // An unknown mode, with a suggestion.
    let error = fails(
        &mut session,
        "reachable within 3 hops at 0.3 K, mode = paths",
    );
    assert_eq!(error.kind, "NameError");
    assert_eq!(error.diagnostics[0].column, 42);
    assert!(error.diagnostics[0]
        .message
        .contains("unknown mode `paths`"));
    assert!(error.diagnostics[0]
        .help
        .as_deref()
        .unwrap()
        .contains("path"));
    // Missing phrase words and a wrong unit for hops.
    let error = fails(&mut session, "reachable at 0.3 K");
    assert!(
        error.diagnostics[0].message.contains("within"),
        "{}",
        error.message
    );
    let error = fails(&mut session, "reachable within 3 K at 0.3 K");
    assert_eq!(error.kind, "UnitError");
    // `separation` belongs to a placed pair.
    let error = fails(&mut session, "monopoles for 1 µs at 0.3 K, separation = 4");
    assert!(error.message.contains("start = pair"), "{}", error.message);
    // Too many samples for the tracker.
    let error = fails(
        &mut session,
        "monopoles for 1 s at 0.3 K, sample_every = 1 µs",
    );
    assert_eq!(error.kind, "ValueError");
    // Nothing of the failed cells was stored.
    assert!(session.workspace().get("w").is_none());
}

#[test]
fn monopoles_run_on_exchange_and_dipolar_models() {
    // Exchange shells: J1 = −3.3 K in the vector convention is the σσ coefficient
    // +1.1 K, the nearest-neighbour model of the test above on the exchange-shell engine,
    // so an isolated monopole must again hop 3 times per τ0 under Metropolis (derived, as
    // above; Poisson error, 3σ).
    let mut session = session(uniform(AcceptanceRule::Metropolis));
    ok(&mut session, "couplings exchange J1 = -3.3 K");
    let (mut hops, mut exposure_tau0) = (0.0, 0.0);
    for r in 0..60 {
        ok(
            &mut session,
            &format!(
                "seed {}\nw = monopoles for 0.25 µs at 0.05 K, sample_every = 0.01 µs, \
                 start = pair, separation = 6, equilibrate = 0",
                300 + r
            ),
        );
        let w = table(&session, "w");
        let counts = values(w, "monopoles");
        assert_eq!(counts[0], 2.0, "one isolated pair at t = 0");
        hops += values(w, "hops").last().unwrap();
        exposure_tau0 += counts[..25].iter().sum::<f64>() * 0.01;
    }
    let (rate, error) = (hops / exposure_tau0, hops.sqrt() / exposure_tau0);
    eprintln!("exchange engine: {rate} ± {error} hops per τ0");
    assert!(
        (rate - 3.0).abs() < 3.0 * error,
        "{rate} ± {error} hops per τ0"
    );

    // The dipolar model on the local-field engine, with and without the transverse
    // what-if: monopoles are tracked and hop (at 1.5 K the ice rules are weak).
    ok(
        &mut session,
        "couplings exchange J1 = 3.72 K\ncouplings dipolar D = 1.41 K",
    );
    ok(
        &mut session,
        "d = monopoles for 20 µs at 1.5 K, sample_every = 1 µs, equilibrate = 20",
    );
    let d = table(&session, "d");
    assert!(*values(d, "hops").last().unwrap() > 0.0);
    let mut what_if = session_with_transverse();
    ok(
        &mut what_if,
        "couplings exchange J1 = 3.72 K\ncouplings dipolar D = 1.41 K\n\
         g = monopoles for 20 µs at 1.5 K, sample_every = 1 µs, equilibrate = 20",
    );
    let g = table(&what_if, "g");
    assert!(g
        .provenance
        .as_ref()
        .unwrap()
        .source
        .contains("dipolar sum"));
    // `reachable` judges open spins by the six-neighbour classes: the what-if is refused.
    let error = fails(&mut what_if, "reachable within 3 hops at 0.3 K");
    assert_eq!(error.kind, "NotImplementedError");
}

fn session_with_transverse() -> Session {
    let mut decl = uniform(AcceptanceRule::Metropolis);
    decl.transverse = TransverseSource::Dipolar;
    session(decl)
}
