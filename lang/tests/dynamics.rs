//! Physical-time kinetics through the language: the `dynamics` rule, `evolve`, `quench`
//! and `step`, their tables, rate laws, errors with positions, and interrupts.

mod common;
use common::*;
use icefield_lang::workspace::Table;
use icefield_lang::{CellError, Interrupt, Output, Session};

/// Free spins: J_eff = 0, no field, so every flip costs ΔE = 0.
const FREE_SPINS: &str = "lattice pyrochlore L = 2\ncouplings nearest J_eff = 0 K\nseed 31\n";

fn table<'a>(session: &'a Session, name: &str) -> &'a Table {
    session.workspace().table(name).expect("table stored")
}

fn column<'a>(table: &'a Table, name: &str) -> &'a [f64] {
    &table
        .column(name)
        .unwrap_or_else(|| panic!("no column {name}"))
        .values
}

/// Lag-1 sample autocorrelation r1 = Σ (x_t − x̄)(x_{t+1} − x̄) / Σ (x_t − x̄)².
fn lag_one_autocorrelation(x: &[f64]) -> f64 {
    let mean = x.iter().sum::<f64>() / x.len() as f64;
    let numerator: f64 = x.windows(2).map(|w| (w[0] - mean) * (w[1] - mean)).sum();
    let denominator: f64 = x.iter().map(|v| (v - mean) * (v - mean)).sum();
    numerator / denominator
}

/// One standard error of r1 for a series whose autocorrelation is ρ^k: (1 − ρ²)/n
/// (Bartlett, J. R. Stat. Soc. Suppl. 8, 27 (1946), memory).
fn lag_one_error(rho: f64, samples: usize) -> f64 {
    ((1.0 - rho * rho) / samples as f64).sqrt()
}

/// Checks the lag-1 autocorrelation of M from `table` against `expected`.
fn assert_lag_one(table: &Table, expected: f64) {
    let m = column(table, "M");
    let rho = lag_one_autocorrelation(m);
    let sigma = lag_one_error(expected, m.len());
    assert!(
        (rho - expected).abs() < 5.0 * sigma,
        "lag-1 autocorrelation {rho} vs exact {expected} ± {sigma}"
    );
}

fn position(code: &str, error: &CellError, needle: &str) -> (usize, usize) {
    let _ = code;
    let d = &error.diagnostics[0];
    assert!(
        d.rendered.contains(needle),
        "caret text `{needle}` not in\n{}",
        d.rendered
    );
    (d.line, d.column)
}

/// Line and 1-based column (code points) of the first `needle` in `code`.
fn where_in(code: &str, needle: &str) -> (usize, usize) {
    let offset = code.find(needle).expect("needle in code");
    let before = &code[..offset];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map(|i| i + 1).unwrap_or(0);
    (line, code[line_start..offset].chars().count() + 1)
}

#[test]
fn free_spins_under_metropolis_decorrelate_as_exp_minus_two_t_over_tau0() {
    // ΔE = 0: Metropolis accepts every attempt, so each spin flips at rate 1/τ0 and
    // ⟨σ(0)σ(t)⟩ = e^{−2t/τ0}; M is a sum of independent spins, so its autocorrelation
    // is the same (exact; Glauber, J. Math. Phys. 4, 294 (1963)). Δt = τ0/2: e^{−1}.
    let mut session = Session::new();
    let out = ok(
        &mut session,
        &format!(
            "{FREE_SPINS}dynamics single_flip, acceptance = metropolis, attempt_time = 1 µs\n\
             noise = evolve for 10 ms at 1 K, sample_every = 500 ns, equilibrate = 0"
        ),
    );
    let noise = table(&session, "noise");
    assert_eq!(noise.row_count(), 20_001);
    let names: Vec<String> = noise.column_names();
    assert_eq!(
        names,
        [
            "t",
            "M",
            "Mx",
            "My",
            "Mz",
            "monopole_density",
            "double_charge_density",
            "energy"
        ]
    );
    assert_eq!(noise.column("t").unwrap().unit, "s");
    assert_eq!(noise.column("M").unwrap().unit, "μ");
    let t = column(noise, "t");
    assert_eq!(t[0], 0.0);
    assert!((t[1] - 5e-7).abs() < 1e-15, "{}", t[1]);
    assert!((t[20_000] - 1e-2).abs() < 1e-12, "{}", t[20_000]);
    // Without a field the axis is [0, 0, 1]: M is Mz.
    assert_eq!(column(noise, "M"), column(noise, "Mz"));
    assert_lag_one(noise, (-1.0f64).exp());
    // Free spins accept every attempt, so `execution = auto` picks attempts, and says why.
    let summary = out.streams.join("");
    assert!(summary.contains("attempt-based"), "{summary}");
    assert!(summary.contains("100.0 % of attempts"), "{summary}");
    let provenance = noise.provenance.as_ref().unwrap();
    let kinetics = provenance.kinetics.as_ref().unwrap();
    assert!(kinetics.execution.contains("auto"), "{kinetics:?}");
    assert!(kinetics.dynamics.contains("Metropolis"), "{kinetics:?}");
    assert_eq!(kinetics.temperature_kelvin, 1.0);
    assert!(!provenance.interrupted);
}

#[test]
fn free_spins_under_glauber_decorrelate_as_exp_minus_t_over_tau0() {
    // ΔE = 0: Glauber accepts with 1/(1 + e^0) = 1/2, so each spin flips at rate 1/(2τ0)
    // and the autocorrelation is e^{−t/τ0} (exact; Glauber, J. Math. Phys. 4, 294 (1963)).
    // Run with the attempt-based execution, so both executions are tested.
    let mut session = Session::new();
    ok(
        &mut session,
        &format!(
            "{FREE_SPINS}dynamics single_flip, acceptance = glauber, attempt_time = 1 µs, execution = attempts\n\
             noise = evolve for 10 ms at 1 K, sample_every = 500 ns, equilibrate = 0"
        ),
    );
    let noise = table(&session, "noise");
    assert_lag_one(noise, (-0.5f64).exp());
    let kinetics = noise.provenance.as_ref().unwrap().kinetics.clone().unwrap();
    assert_eq!(kinetics.execution, "attempt-based");
}

#[test]
fn a_quench_from_a_001_field_starts_magnetised_and_decays() {
    // Free spins (J_eff = 0) held in B = 1 T along [001] with μ = 1 µB at T = 1 K: each
    // spin is a two-level system with Zeeman energy ∓μB(e_a·ẑ), e_a·ẑ = ±1/√3, so
    // ⟨M⟩/N = (1/√3) tanh(μB/(√3 k_B T)) (two-level paramagnet, common practice; μ_B/k_B
    // = 0.67171381 K/T, CODATA 2018). After the field is switched off every flip costs
    // ΔE = 0, so M(t) = M(0) e^{−2t/τ0} under Metropolis (Glauber, J. Math. Phys. 4, 294
    // (1963)). The spins are independent, so the spread of M/N at time t is
    // sqrt((1/3)(1 − m(t)²·3)/N) with m(t) the expected M/N (derived).
    let mut session = Session::new();
    ok(
        &mut session,
        "lattice pyrochlore L = 8\ncouplings nearest J_eff = 0 K\nseed 5\n\
         dynamics single_flip, acceptance = metropolis, attempt_time = 1 µs\n\
         kick = quench B from 1 T along [0, 0, 1] to 0 T at 1 K for 2 µs, sample_every = 50 ns, \
         prepare = 20 µs, moment = 1 µB, equilibrate = 0",
    );
    let kick = table(&session, "kick");
    let spins = 16.0 * 512.0;
    let m: Vec<f64> = column(kick, "M").iter().map(|v| v / spins).collect();
    let t = column(kick, "t");
    assert_eq!(m.len(), 41);
    let c = 1.0 / 3f64.sqrt();
    let m0 = c * (0.671_713_81 * c / 1.0).tanh();
    for (index, &time) in t
        .iter()
        .enumerate()
        .filter(|(i, _)| [0, 5, 10, 20].contains(i))
    {
        let expected = m0 * (-2.0 * time / 1e-6).exp();
        let sigma = ((1.0 / 3.0) * (1.0 - 3.0 * expected * expected) / spins).sqrt();
        assert!(
            (m[index] - expected).abs() < 5.0 * sigma,
            "t = {time}: M/N = {} vs {expected} ± {sigma}",
            m[index]
        );
    }
    assert!(m[0] > 0.15, "{}", m[0]);
    let late: f64 = m[30..].iter().sum::<f64>() / m[30..].len() as f64;
    assert!(late < m[0] / 5.0, "{late} vs {}", m[0]);
}

#[test]
fn a_temperature_step_records_after_the_step() {
    // Ice at J_eff = 1 K stepped from 5 K to 0.5 K: the monopole density falls from its
    // hot value; at 5 K = 5 J_eff the density is well above its T → 0 value of zero
    // (common practice; the equilibrium curve is in physics-reference §3).
    let mut session = Session::new();
    ok(
        &mut session,
        "lattice pyrochlore L = 2\ncouplings nearest J_eff = 1 K\nseed 3\n\
         dynamics single_flip, attempt_time = 1 µs\n\
         drop = step T from 5 K to 0.5 K for 200 µs, sample_every = 1 µs, equilibrate = 200",
    );
    let drop = table(&session, "drop");
    assert_eq!(drop.row_count(), 201);
    let density = column(drop, "monopole_density");
    let early = density[0];
    let late: f64 = density[150..].iter().sum::<f64>() / 51.0;
    assert!(early > 0.15, "{early}");
    assert!(late < early / 2.0, "{late} vs {early}");
    let kinetics = drop.provenance.as_ref().unwrap().kinetics.clone().unwrap();
    assert_eq!(kinetics.temperature_kelvin, 0.5);
}

#[test]
fn a_rate_law_is_evaluated_once_per_gate_class_and_used() {
    let mut session = Session::new();
    let out = ok(
        &mut session,
        &format!(
            "{FREE_SPINS}rhai {{ fn tau_of_h(h) {{ 1e-6 * (1.0 + h * h) }} }}\n\
             dynamics single_flip, rates = law, law = tau_of_h"
        ),
    );
    let decl = session.workspace().model.dynamics.clone().unwrap();
    // The classes have |h⊥|/|g| = 0, 2, 2√3, 4 (derived, physics-reference §5), so
    // 1 + h² = 1, 5, 13, 17.
    let expected = [1e-6, 5e-6, 13e-6, 17e-6];
    for (got, want) in decl.attempt_times.attempt_time_seconds.iter().zip(expected) {
        assert!((got - want).abs() < 1e-12 * want, "{got} vs {want}");
    }
    assert_eq!(decl.rate_law.as_deref(), Some("tau_of_h"));
    let text = out.streams.join("");
    assert!(text.contains("gate class"), "{text}");
    assert!(text.contains("13 µs") && text.contains("17 µs"), "{text}");
    // `show model` names the rule.
    let shown = ok(&mut session, "show model").streams.join("");
    assert!(shown.contains("rate law `tau_of_h`"), "{shown}");

    // A constant law must be what the run uses: free spins with τ = 2 µs sampled every
    // 1 µs decorrelate as e^{−2·1/2} under Metropolis (exact, as above). Declared and run
    // in one cell.
    ok(
        &mut session,
        "rhai { fn two_us(h) { 2e-6 } }\n\
         dynamics single_flip, rates = law, law = two_us\n\
         slow = evolve for 10 ms at 1 K, sample_every = 1 µs, equilibrate = 0",
    );
    assert_lag_one(table(&session, "slow"), (-1.0f64).exp());
}

#[test]
fn the_gated_preset_builds_its_table() {
    // The bimodal preset (physics-reference §5): `fast` for h⊥ ≠ 0 (classes 1–3), `slow`
    // for h⊥ = 0 (class 0), by default 10⁴ × fast.
    let mut session = Session::new();
    for (rule, slow) in [
        ("rates = gated, fast = 1 µs, slow = 10 ms", 1e-2),
        ("rates = gated, fast = 1 µs, ratio = 100", 1e-4),
        ("rates = gated, fast = 1 µs", 1e-2),
        ("rates = gated, fast = 1 µs, slow = frozen", f64::INFINITY),
    ] {
        let out = ok(&mut session, &format!("dynamics single_flip, {rule}"));
        let times = session
            .workspace()
            .model
            .dynamics
            .clone()
            .unwrap()
            .attempt_times
            .attempt_time_seconds;
        assert!(
            (times[0] - slow).abs() <= 1e-12 * slow || times[0] == slow,
            "{rule}: {times:?}"
        );
        assert!(
            times[1..].iter().all(|t| (t - 1e-6).abs() < 1e-18),
            "{times:?}"
        );
        assert!(out.streams.join("").contains("gate class"));
    }
}

#[test]
fn errors_point_at_the_offending_text() {
    let mut session = Session::new();
    let cases: &[(&str, &str, &str, &str)] = &[
        (
            "dynamics single_flip, attempt_time = 1",
            "UnitError",
            "1",
            "time unit",
        ),
        (
            "dynamics single_flip, acceptance = metropolys, attempt_time = 1 µs",
            "NameError",
            "metropolys",
            "metropolis",
        ),
        (
            "dynamics single_flip, rates = law, law = tau_of_hh",
            "NameError",
            "tau_of_hh",
            "unknown rate-law function",
        ),
        (
            "dynamics single_flip, attempt_time = 1 µs\nnoise = evolve for 1 s at 1 K, sample_every = 1 ns",
            "ValueError",
            "1 ns",
            "samples",
        ),
        (
            "dynamics single_flip, attempt_time = 1 µs\nkick = quench B from 0.5 T along [0, 0, 1] to 0.1 T at 1 K for 1 ms, moment = 1 µB",
            "NotImplementedError",
            "0.1 T",
            "switches the field off",
        ),
        (
            "dynamics single_flip, attempt_time = 1 µs\nnoise = evolve for 1 ms at 1 K, sample_every = 1 µs, start = hot",
            "NameError",
            "hot",
            "start",
        ),
        (
            "dynamics single_flip, attempt_time = 1 µs\nnoise = evolve for 1 ms, sample_every = 1 µs",
            "ValueError",
            "evolve",
            "needs `at`",
        ),
    ];
    for (statement, kind, needle, phrase) in cases {
        let code = format!("{TINY_MODEL}{statement}");
        let error = fails(&mut session, &code);
        assert_eq!(
            error.kind,
            *kind,
            "{code}\n{}",
            error.traceback_lines().join("\n")
        );
        assert!(
            error.diagnostics[0].message.contains(phrase)
                || error.diagnostics[0]
                    .help
                    .as_deref()
                    .is_some_and(|h| h.contains(phrase)),
            "{code}: {:?}",
            error.diagnostics[0]
        );
        let (line, column) = where_in(&code[code.find(statement).unwrap()..], needle);
        assert_eq!(
            position(&code, &error, needle),
            (line + 3, column),
            "{code}\n{}",
            error.diagnostics[0].rendered
        );
        // A failing cell commits nothing.
        assert!(session.workspace().model.dynamics.is_none());
        assert!(session.workspace().model.lattice.is_none());
    }
}

#[test]
fn a_run_without_a_dynamics_rule_is_refused_with_help() {
    let mut session = Session::new();
    let code = format!("{TINY_MODEL}noise = evolve for 1 ms at 1 K, sample_every = 1 µs");
    let error = fails(&mut session, &code);
    assert_eq!(error.kind, "NameError");
    assert!(
        error.message.contains("no dynamics rule"),
        "{}",
        error.message
    );
    assert!(error.diagnostics[0]
        .help
        .as_deref()
        .unwrap()
        .contains("dynamics single_flip"));
    assert_eq!(
        (error.diagnostics[0].line, error.diagnostics[0].column),
        (4, 9)
    );
}

#[test]
fn exchange_and_dipolar_models_run_in_physical_time() {
    // Free spins through the two other engines, against the exact e^{−2t/τ0} of
    // Metropolis free spins (Glauber, J. Math. Phys. 4, 294 (1963)): `couplings
    // exchange J1 = 0 K` runs the exchange-shell engine; `transverse = dipolar` with a
    // rate law runs the local-field engine with the law applied to the dipolar h⊥ (a
    // constant law, so the exact result still holds). Δt = τ0/2: e^{−1}.
    let mut session = Session::new();
    let out = ok(
        &mut session,
        "lattice pyrochlore L = 2\ncouplings exchange J1 = 0 K\n\
         dynamics single_flip, attempt_time = 1 µs, execution = rejection_free\n\
         shells = evolve for 5 ms at 1 K, sample_every = 500 ns, equilibrate = 0",
    );
    assert_lag_one(table(&session, "shells"), (-1.0f64).exp());
    let summary = out.streams.join("");
    assert!(summary.contains("n-fold way"), "{summary}");
    let out = ok(
        &mut session,
        "rhai { fn one_us(h) { 1e-6 } }\n\
         dynamics single_flip, rates = law, law = one_us, transverse = dipolar, \
         execution = rejection_free\n\
         whatif = evolve for 2 ms at 1 K, sample_every = 500 ns, equilibrate = 0",
    );
    assert_lag_one(table(&session, "whatif"), (-1.0f64).exp());
    let summary = out.streams.join("");
    assert!(summary.contains("thinning"), "{summary}");
    assert!(summary.contains("dipolar sum"), "{summary}");

    // The dipolar model itself: both engines' bookkeeping, provenance and the choice
    // of `execution = auto` reach the table.
    ok(
        &mut session,
        "lattice pyrochlore L = 2\ncouplings exchange J1 = 3.72 K\ncouplings dipolar D = 1.41 K\n\
         dynamics single_flip, attempt_time = 1 µs, execution = auto\n\
         dip = evolve for 200 µs at 2 K, sample_every = 1 µs",
    );
    let dip = table(&session, "dip");
    assert_eq!(dip.row_count(), 201);
    let provenance = dip.provenance.as_ref().unwrap();
    let kinetics = provenance.kinetics.as_ref().unwrap();
    assert!(kinetics.execution.contains("auto"), "{kinetics:?}");
    assert!(kinetics.flips > 1000, "{kinetics:?}");
}

#[test]
fn an_interrupt_keeps_the_partial_series() {
    let mut session = Session::new();
    ok(
        &mut session,
        &format!("{FREE_SPINS}dynamics single_flip, attempt_time = 1 µs"),
    );
    // 10⁹ sweeps: the run cannot finish, so the interrupt (requested from another thread
    // while it runs) always lands inside the recording.
    let interrupt = Interrupt::new();
    let trigger = interrupt.clone();
    let stopper = std::thread::spawn(move || {
        std::thread::sleep(std::time::Duration::from_millis(500));
        trigger.request();
    });
    let mut labels = Vec::new();
    let result = session.execute(
        "noise = evolve for 1000 s at 1 K, sample_every = 100 ms, equilibrate = 0",
        &interrupt,
        &mut |output| {
            if let Output::Progress(p) = output {
                labels.push(p.label);
            }
        },
    );
    stopper.join().unwrap();
    let error = result.expect_err("interrupted");
    assert_eq!(error.kind, "Interrupted");
    assert!(error.message.contains("kept"), "{}", error.message);
    let noise = table(&session, "noise");
    let rows = noise.row_count();
    assert!((1..10_001).contains(&rows), "{rows}");
    let provenance = noise.provenance.as_ref().unwrap();
    assert!(provenance.interrupted);
    let kinetics = provenance.kinetics.as_ref().unwrap();
    assert_eq!(kinetics.samples_requested, 10_001);
    // Every column holds the samples taken, on the uniform grid from 0.
    for c in &noise.columns {
        assert_eq!(c.values.len(), rows, "{}", c.name);
    }
    let t = column(noise, "t");
    assert_eq!(t[0], 0.0);
    assert!((t[rows - 1] - (rows - 1) as f64 * 0.1).abs() < 1e-9);
    // One progress identity, with the changing detail after the separator.
    assert!(labels.len() >= 2, "{labels:?}");
    assert!(
        labels.iter().all(|l| l.starts_with("noise: evolve — ")),
        "{labels:?}"
    );
    assert!(labels.iter().any(|l| l.contains("t = ")), "{labels:?}");
}

#[test]
fn completion_and_help_know_the_dynamics_words() {
    let session = Session::new();
    let code = "dynamics single_flip, acceptance = ";
    let matches = session.complete(code, code.chars().count()).matches;
    assert!(matches.contains(&"glauber".to_string()), "{matches:?}");
    assert!(!matches.contains(&"heat_bath".to_string()), "{matches:?}");
    let code = "dynamics single_flip, ex";
    let matches = session.complete(code, code.chars().count()).matches;
    assert_eq!(matches, ["execution"]);
    let code = "noise = ev";
    let matches = session.complete(code, code.chars().count()).matches;
    assert!(matches.contains(&"evolve".to_string()), "{matches:?}");
    let help = session.inspect("evolve", 2).expect("help for evolve");
    assert!(help.contains("sample_every"), "{help}");
    let help = session
        .inspect("dynamics single_flip, law = f", 24)
        .unwrap();
    assert!(help.contains("once per class"), "{help}");
}

#[test]
fn transverse_dipolar_with_uniform_rates_says_it_changes_nothing() {
    // lang/src/run/dynamics.rs pushes this note for `transverse = dipolar` with
    // uniform rates (every spin attempts every τ0 whatever its h⊥, physics-reference
    // §5, derived), then shadows `notes` with a fresh vector, so the note is lost.
    let mut session = Session::new();
    let out = ok(
        &mut session,
        "lattice pyrochlore L = 1\ncouplings nearest J_eff = 1.1 K\n\
         dynamics single_flip, attempt_time = 1 µs, transverse = dipolar\n\
         same = evolve for 20 µs at 2 K, sample_every = 1 µs, equilibrate = 0",
    );
    let summary = out.streams.join("");
    assert!(summary.contains("changes nothing"), "{summary}");
}
