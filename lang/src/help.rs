//! Short plain-text help for every keyword, measure, option, unit and workspace value,
//! shown by `Session::inspect` (Shift-Tab in a notebook).

use crate::display::{header, provenance_line};
use crate::measures::{DIAGNOSTIC_COLUMNS, EXCHANGE_COLUMN, MEASURES};
use crate::syntax::planned;
use crate::workspace::{Value, Workspace};

/// Help for statement keywords and connecting words.
pub const KEYWORD_HELP: &[(&str, &str)] = &[
    ("lattice", "lattice KIND L = N\n  Declares the lattice: `pyrochlore` (16 L³ spins, L×L×L periodic conventional cubic cells) or\n  `square_ice` (2D six-vertex ice, L×L vertices, 2L² spins; H = J Σ q², J from `couplings nearest J_eff`).\n  Example: lattice pyrochlore L = 4"),
    ("couplings", "couplings nearest J_eff = E | J1 = E [, convention = vector|ising] [, D = E]\n  Declares the nearest-neighbour spin-ice model H = J_eff Σ⟨ij⟩ σiσj.\n  J_eff is the σσ coefficient; J1 is read in the vector convention (J_nn = −J1/3) unless\n  convention = ising; D adds the nearest-neighbour part of the dipolar sum, 5D/3.\n  Example: couplings nearest J_eff = 1.8 K\ncouplings exchange J1 = E [, J2 = E, J3 = E, J3' = E, convention = vector|ising]\ncouplings dipolar D = E | moment = M µB, r_nn = R Å\n  A general model: exchange shells and the Ewald-summed dipolar term (conducting boundary).\n  `exchange` and `dipolar` statements add up; `nearest` starts over.\n  Example: couplings dipolar moment = 10 µB, r_nn = 3.54 Å"),
    ("field", "field B = MAGNITUDE along [h, k, l], moment = M µB\n  A Zeeman term −μ Σ S·B (μ in µB, B in T). Later scans run on the coupling-table engine and\n  record `magnetisation_along`, the magnetisation per spin along the field direction.\n  Example: field B = 0.5 T along [1, 1, 1], moment = 10 µB"),
    ("seed", "seed N\n  Seeds every random stream of later runs (a whole number). The same seed gives the same numbers.\n  Example: seed 20261201"),
    ("measure", "measure NAME, NAME, ...\n  Chooses what later scans record (default: every measure). See `show measures`.\n  Example: measure energy, specific_heat, monopole_density"),
    ("scan", "NAME = scan T from A to B in N steps [, sweeps = S, equilibrate = E, sample_every = K, spacing = linear|log, start = random|ice|all_in_all_out]\nNAME = scan T at [T1, T2, ...] K [, ...]\n  Equilibrium scan of the declared model; stores a table NAME with T and one column per measure.\n  acceptance = metropolis|heat_bath chooses the single-flip rule, loops = N adds N ice-manifold\n  loop moves per sweep (needed below about 0.5 J_eff). With `measure entropy` the scan must reach\n  a temperature well above the couplings (about 10 J_eff or more).\n  Example: thermo = scan T from 0.3 K to 8 K in 30 steps, sweeps = 4000, equilibrate = 1000, spacing = log"),
    ("anneal", "NAME = anneal T from A to B in N steps [, sweeps = S, equilibrate = E, ...]\nNAME = anneal T at [T1, T2, ...] K [, ...]\n  Like `scan`, but one chain carries its state from each temperature to the next, in the order\n  written (coupling-table engine); at each temperature `equilibrate` sweeps are discarded and\n  `sweeps` measured. Takes the options of `scan` except `tempering`.\n  Example: cool = anneal T from 5 K to 0.2 K in 40 steps, sweeps = 2000"),
    ("structure_factor", "NAME = structure_factor on plane [h, h, l] at T [, range = R, points = N, polarisation = [x, y, z], form_factor = \"Ho3+\", a = A Å, samples = S, sweeps_between = K, equilibrate = E, loops = N]\nNAME = structure_factor along [0, 0, l] through [0, 0, 2] at T [, ...]\n  Neutron S(Q) in μ² per spin (r.l.u. of the cubic cell) averaged over configurations sampled at T:\n  columns total (and sf, nsf with a polarisation axis). A plane is drawn as a heat map stored as NAME_map.\n  Example: sq = structure_factor on plane [h, h, l] at 0.3 K, range = 4, points = 81, polarisation = [1, -1, 0]"),
    ("table", "table NAME [, columns = [A, B]]\n  Shows a table: values with error bars, units in the header.\n  Example: table thermo"),
    ("show", "show NAME | model | measures | workspace\n  Shows a table or figure, the model declaration, the active measures, or every named value."),
    ("plot", "[NAME =] plot TABLE.Y [, TABLE.Y2] against X [, xscale = log, yscale = log, title = \"...\", style = line|points|both, errors = on|off, width = PX, height = PX]\n  Draws Y against X with error bars from the table; NAME stores the figure.\n  Example: plot thermo.specific_heat against T, xscale = log"),
    ("column", "column TABLE.NEW = EXPRESSION [unit \"U\"]\n  Adds a derived column computed row by row (rhai arithmetic and functions of the row's columns);\n  error bars propagate to first order.\n  Example: column thermo.c_molar = molar(specific_heat) unit \"J/(mol K)\""),
    ("rhai", "rhai { ... }\n  rhai code: `fn` definitions persist across cells; other statements run now with every table\n  visible as a map of arrays (thermo.T, thermo.energy); print() writes to the cell output."),
    ("export", "export TABLE to \"FILE.csv\"\n  Writes a table as CSV with the unit in every header (errors as NAME_error columns).\nexport TABLE to \"FILE.csv\" | \"FILE.json\" [, format = csv|json]\n  Writes a table as CSV (provenance as # lines, the unit of every column in brackets, errors as\n  NAME_error columns) or as JSON (units, values, errors, provenance, icefield version), floats\n  to full precision; `import` reads the CSV back exactly."),
    ("spectrum", "[NAME =] spectrum TABLE.Y [against t] [, segment = N, overlap = 0.5, window = hann|hamming|rectangular, detrend = constant|linear|none]\n  One-sided power spectral density by Welch's method, normalised so that ∫ psd df = var(Y) (Parseval).\n  Needs a uniform time grid. Stores NAME (f [Hz], psd [unit²/Hz]) and the log–log figure NAME_figure.\n  Example: spec = spectrum noise.M, segment = 4096"),
    ("autocorrelation", "[NAME =] autocorrelation TABLE.Y [against t] [, max_lag = TIME, normalisation = biased|unbiased]\n  Normalised autocorrelation C(lag) by FFT, and the integrated relaxation time τ_int (Madras–Sokal window)\n  in the one-row table NAME_tau. Default max_lag: 20 τ_int.\n  Example: acf = autocorrelation noise.M, max_lag = 2 ms"),
    ("susceptibility", "[NAME =] susceptibility TABLE.Y at TEMPERATURE [against t] [from F1 to F2] [, points = 60, max_lag = TIME]\n  χ'(f), χ''(f) from the fluctuation–dissipation theorem, χ0 = var(Y)/T; τ = 1/(2π f_peak) of χ''\n  in NAME_tau. Stores NAME (f, chi_real, chi_imag) and NAME_figure.\n  Example: chi = susceptibility noise.M at 0.4 K"),
    ("fit", "[NAME =] fit TABLE.Y [against X] with power_law|exp|stretched_exp|noise_form|arrhenius [over X from A to B] [, errors = on|off]\n  Least-squares fit (Levenberg–Marquardt); stores a one-row table NAME (default last_fit) with each\n  parameter and PARAMETER_error, χ²/dof, and the figure NAME_figure (data and fitted curve).\n  power_law: Y = A X^−b;  exp: Y = A e^{−X/tau};  stretched_exp: Y = A e^{−(X/tau)^beta};\n  noise_form: Y = A tau/(1 + (2πX tau)^b) (X in Hz);  arrhenius: Y = tau_infinity e^{barrier/X} (X in K).\n  The y column's error bars are used as σ unless errors = off.\n  Example: fit spec.psd with power_law over f from 10 Hz to 1 kHz"),
    ("with", "fit TABLE.Y with MODEL: the model to fit (power_law, exp, stretched_exp, noise_form, arrhenius)."),
    ("over", "fit TABLE.Y with MODEL over X from A to B: fit only the points with A ≤ X ≤ B (units of X)."),
    ("monopoles", "NAME = monopoles for DURATION at T [, sample_every = DT, start = random|ice|pair, separation = K, equilibrate = S, loops = L]\n  Kinetics of the declared dynamics rule with monopole tracking; stores NAME with t [s], msd [bond²]\n  (mean-square displacement over monopoles and time origins, in diamond bonds squared), distinct_sites,\n  monopoles, hops, and NAME_gates with the hops by gate class.\n  Example: walk = monopoles for 10 ms at 0.3 K, sample_every = 10 µs"),
    ("reachable", "NAME = reachable within N hops at T [, samples = S, mode = path|static|both, open_ratio = R, start = ice|random, separation = K, equilibrate = E, loops = L, decorrelate = D]\n  Diamond sites a monopole can reach within n = 0..N hops through the rule's open gate classes,\n  averaged over samples: sites_path (each hop flips its spin) and sites_static (snapshot gates).\n  Example: reach = reachable within 20 hops at 0.3 K, samples = 50, mode = both"),
    ("cluster", "NAME = cluster within N hops at T [, mode = path|static, width = PX, height = PX, ...]\n  The picture of one reachable cluster (projected 3D, SVG), stored as a figure.\n  Example: pic = cluster within 12 hops at 0.3 K"),
    ("within", "reachable within N hops / cluster within N hops: the most hops of the search."),
    ("from", "scan T from A to B in N steps: the first temperature of the ladder.\nscan T from A to B in N steps: the first temperature of the ladder; quench B from B0 along [..]: the field before t = 0; step T from T0: the temperature before t = 0."),
    ("to", "scan T from A to B in N steps: the last temperature; also `export TABLE to \"FILE.csv\"`.\nscan T from A to B in N steps: the last temperature; quench ... to 0 T; step T ... to T1: after t = 0; also `export TABLE to \"FILE.csv\"`."),
    ("in", "scan T from A to B in N steps: N temperatures, both ends included."),
    ("steps", "scan T from A to B in N steps: N temperatures, both ends included."),
    ("against", "plot Y against X: X is a column of the same table (usually T); also the axis of spectrum, autocorrelation, susceptibility and fit.\nplot Y against X: X is a column of each plotted table (usually T); also `calibrate SIM.TAU to LAB.TAU against T`."),
    ("dynamics", "dynamics single_flip [, acceptance = metropolis|glauber] , attempt_time = τ0\n  | rates = gated, fast = τ [, slow = τ | frozen | ratio = R] | rates = law, law = FN\n  [, execution = auto|attempts|rejection_free]\n  The rule of physical-time runs: each spin attempts a flip every τ (per gate class of its\n  transverse field h⊥ for `gated` and `law`); FN is a rhai function of |h⊥|/|g| returning seconds,\n  evaluated once per class. Part of the model (see `show model`).\n  Example: dynamics single_flip, acceptance = metropolis, attempt_time = 1 µs"),
    ("evolve", "NAME = evolve for D at T [, sample_every = Δt, equilibrate = N, start = random|ice|all_in_all_out, axis = [h, k, l]]\n  Physical-time run with the declared dynamics rule; stores a table with t, M, Mx, My, Mz,\n  monopole_density, double_charge_density, energy on a uniform time grid. An interrupt keeps the samples taken.\n  Example: noise = evolve for 10 ms at 0.4 K, sample_every = 1 µs"),
    ("quench", "NAME = quench B from B0 along [h, k, l] to 0 T at T for D [, prepare = τ, moment = M µB, sample_every = Δt, ...]\n  Holds the field B0 for `prepare` (default: the duration), switches it off at t = 0 and records the decay.\n  Example: kick = quench B from 0.5 T along [0, 0, 1] to 0 T at 0.3 K for 1 ms, sample_every = 1 µs, prepare = 100 µs, moment = 10 µB"),
    ("step", "NAME = step T from T0 to T1 for D [, prepare = τ, sample_every = Δt, ...]\n  Equilibrates at T0, steps the temperature to T1 at t = 0 and records.\n  Example: drop = step T from 2 K to 0.5 K for 10 ms, sample_every = 10 µs"),
    ("for", "evolve for D, quench ... for D, step ... for D: how long the series is recorded (a time)."),
    ("at", "scan T at [T1, T2, ...] K: the temperatures exactly as listed; evolve ... at T, quench ... at T: the temperature of the run.\nscan T at [T1, T2, ...] K: the temperatures exactly as listed."),
    ("import", "NAME = import \"FILE\" [, format = csv|whitespace] [, X_error = COLUMN]\n  Reads a measured table: # comment lines, a header with every unit in brackets\n  (`T [K], tau [s], err [s]`, `[]` for a pure number), rows of numbers. `X_error` columns (or the\n  column named by `X_error = COLUMN`) become error bars of X. Measured tables plot as points.\n  Example: lab = import \"lab/tau.csv\", tau_error = err"),
    ("calibrate", "NAME = calibrate SIM.TAU to LAB.TAU against T [, tau0 = 1 µs] [, range = [a, b] K]\n  Fits the attempt time τ0 mapping simulated τ (in units of τ0, or in s with the stated tau0) onto\n  measured τ by least squares in ln τ, interpolating the simulation at the measured T (no\n  extrapolation). Stores NAME (tau0 ± error), NAME_residuals and the figure NAME_plot.\n  Example: cal = calibrate sim.tau to lab.tau against T"),
    ("unit", "column TABLE.NEW = EXPRESSION unit \"U\": the unit shown in headers and axis labels."),
    ("along", "field B = 0.5 T along [1, 1, 1]: the direction of a vector quantity."),
    ("percolation", "[NAME =] percolation bond|site on diamond|simple_cubic|square [from P1 to P2], L = [L1, L2, ...] [, sweeps = S, points = K, bootstrap = B]\n  Newman–Ziff sweeps at several sizes: table NAME of p, the wrapping probability and largest-cluster\n  fraction per L, and NAME_pc with the crossing estimate of p_c ± bootstrap error.\n[NAME =] percolation clusters on LATTICE at p = P [, L = N, occupy = bond|site, realisations = R, sweeps = S]\n  Cluster-size distribution n_s (NAME), largest-cluster fraction and correlation length (NAME_stats).\n[NAME =] percolation growth on LATTICE at p = P [, L = N, realisations = R, seeds = K, max_distance = M, band = [A, B]]\n  Chemical-distance growth N(ℓ) from random seeds and its exponent d_ℓ (NAME_fit).\n[NAME =] percolation walkers on LATTICE at p = P [, L = N, steps = S, walkers = W, sample_every = K]\n  Random walkers on the largest cluster and on the full lattice: MSD (NAME) and PSD of x(t) (NAME_psd).\n[NAME =] percolation open_hops at T [, states = K, equilibrate = E, sample_every = S, loops = N, open_within = F]\n  The open hop directions of equilibrated states of the declared model under its dynamics rule,\n  and how far their open fraction sits from the diamond bond p_c = 0.3880.\n  Example: pc = percolation bond on diamond, L = [8, 16, 32], sweeps = 200"),
];

/// Help for options.
pub const OPTION_HELP: &[(&str, &str)] = &[
    ("L", "L (lattice): conventional cubic cells per side; the pyrochlore system has N = 16 L³ spins."),
    ("J_eff", "J_eff (couplings nearest): the σσ coefficient of H = J_eff Σ⟨ij⟩ σiσj, an energy (K, mK, meV). J_eff > 0 gives the ice rule."),
    ("J2", "J2 (couplings exchange): second-neighbour exchange (distance √3 r_nn), in the chosen convention; needs L ≥ 2."),
    ("J3", "J3 (couplings exchange): third-neighbour exchange at 2 r_nn along a straight chain through a common neighbour; needs L ≥ 2."),
    ("J3'", "J3' (couplings exchange): third-neighbour exchange at 2 r_nn across a hexagon; needs L ≥ 2."),
    ("r_nn", "r_nn (couplings dipolar): nearest-neighbour distance (Å, nm, pm); with `moment` gives D = μ0μ²/(4π k_B r_nn³)."),
    ("acceptance", "acceptance = metropolis | heat_bath (scan), metropolis | glauber (dynamics): single-flip acceptance min(1, e^{−ΔE/T}) or 1/(1 + e^{ΔE/T})."),
    ("attempt_time", "attempt_time (dynamics): τ0, the attempt time of every spin with uniform rates (a time: s, ms, µs, ns); required. One sweep of N attempts is τ0."),
    ("rates", "rates = uniform | gated | law (dynamics): one attempt time for all, the bimodal preset by transverse-field class, or a rhai rate law."),
    ("fast", "fast (dynamics, rates = gated): attempt time of spins with h⊥ ≠ 0."),
    ("slow", "slow (dynamics, rates = gated): attempt time of spins with h⊥ = 0 (≥ fast), or `frozen`."),
    ("ratio", "ratio (dynamics, rates = gated): τ_slow/τ_fast, a number ≥ 1. Default 10⁴."),
    ("law", "law = FN (dynamics): a rhai function of |h⊥|/|g| (0, 2, 2√3, 4 for the four gate classes) returning the attempt time in seconds; evaluated once per class."),
    ("execution", "execution = auto | attempts | rejection_free (dynamics): random-site attempts or the Bortz–Kalos–Lebowitz n-fold way; auto picks rejection-free for the nearest-neighbour model and says so."),
    ("transverse", "transverse = neighbours (dynamics): h⊥ from the six nearest neighbours. `dipolar` is planned."),
    ("prepare", "prepare (quench, step): time before t = 0 in the field (quench; default the duration) or at the initial temperature (step; default 0)."),
    ("axis", "axis = [h, k, l] (evolve, quench, step): the direction the column M is projected on (default: the field direction, else [0, 0, 1])."),
    ("range", "range (structure_factor): half-width of the Q range along each axis, in r.l.u. Default 4.\nrange = [a, b] K (calibrate): only measured points with T in [a, b] enter the fit."),
    ("points", "points (structure_factor): Q points per axis (2 to 1001). Default 81.\npoints (susceptibility): frequencies, evenly spaced in log f. Default 60."),
    ("polarisation", "polarisation = [x, y, z] (structure_factor): neutron polarisation axis; adds the spin-flip `sf` and non-spin-flip `nsf` channels."),
    ("form_factor", "form_factor = \"Ho3+\" | \"Dy3+\" | \"Tb3+\" (structure_factor): dipole-approximation magnetic form factor ⟨j0⟩² (International Tables Vol. C, 4.4.5); needs `a`."),
    ("a", "a (structure_factor): cubic lattice constant (Å), turning r.l.u. into Å⁻¹ for the form factor."),
    ("samples", "samples (structure_factor): configurations averaged. Default 20.\nsamples (reachable): clusters averaged, each from a freshly placed pair. Default 50."),
    ("sweeps_between", "sweeps_between (structure_factor): sweeps between two configurations. Default 50."),
    ("tempering", "tempering = on | off (scan): parallel tempering (replica exchange) over the temperatures: one replica each, neighbours try to swap after every sweep; the table gets `exchange_acceptance` per pair. Default off."),
    ("loops", "loops (scan): ice-manifold loop moves attempted after every sweep (Barkema & Newman 1998), accepted on the full energy change. Default 0."),
    ("J1", "J1 (couplings nearest, exchange): nearest-neighbour exchange, read in the vector convention J1 S_i·S_j (σσ coefficient −J1/3) unless `convention = ising`."),
    ("convention", "convention = vector | ising: how J1 is read (vector: coefficient of S_i·S_j; ising: coefficient of σiσj)."),
    ("D", "D (couplings nearest, dipolar): dipolar strength μ0μ²/(4π k_B r_nn³), an energy (K); `couplings dipolar` sums it in full by Ewald summation, `couplings nearest` keeps its nearest-neighbour part D_nn = 5D/3."),
    ("B", "B (field): magnetic field in T or mT, `0.5 T along [1, 1, 1]` or `[0, 0, 0.5] T`."),
    ("moment", "moment (field, couplings dipolar, quench): the magnetic moment per spin, in µB."),
    ("sweeps", "sweeps (scan): measurement sweeps per temperature (one sweep = N flip attempts). Default 2000."),
    ("equilibrate", "equilibrate (scan): sweeps discarded before measuring, per temperature; (evolve, quench, step): Metropolis sweeps at the starting temperature first. Default 500."),
    ("sample_every", "sample_every (scan): sweeps between samples, default 1; (evolve, quench, step): the time between samples, default duration/1000."),
    ("spacing", "spacing = linear | log (scan): temperatures evenly spaced in T or in ln T."),
    ("start", "start = random | ice | all_in_all_out (scan): the initial configuration at each temperature."),
    ("columns", "columns = [A, B] (table, show): the columns to show, in this order."),
    ("segment", "segment (spectrum): samples per Welch segment (also the FFT length). Default: the largest power of two giving 8 segments, at most 4096."),
    ("overlap", "overlap (spectrum): overlap of consecutive segments as a fraction of the segment, from 0 to below 1. Default 0.5."),
    ("window", "window = hann | hamming | rectangular (spectrum): the taper applied to each segment. Default hann."),
    ("detrend", "detrend = constant | linear | none (spectrum): the trend removed from each segment. Default constant."),
    ("max_lag", "max_lag (autocorrelation, susceptibility): the largest lag, a time (s, ms, µs). Default 20 τ_int."),
    ("normalisation", "normalisation = biased | unbiased (autocorrelation): divide the lag-t sum by n or by n − t. Default biased."),
    ("separation", "separation (monopoles with start = pair, reachable, cluster): hops between the two monopoles of a placed pair, a string of flipped spins through neutral tetrahedra. Default 6."),
    ("mode", "mode = path | static | both (reachable, cluster): path-dependent search (each hop flips its spin and changes the next gates) or the static-snapshot approximation."),
    ("open_ratio", "open_ratio (reachable, cluster): a gate class is open if its attempt time is at most this many times the fastest. Default 10."),
    ("decorrelate", "decorrelate (reachable): sweeps, with their loop moves, between two samples. Default 10."),
    ("xscale", "xscale = linear | log (plot): the horizontal axis scale."),
    ("yscale", "yscale = linear | log (plot): the vertical axis scale."),
    ("title", "title = \"...\" (plot): the figure title."),
    ("style", "style = line | points | both (plot): how series are drawn. Default both.\nstyle = line | points | both (plot): how series are drawn. Default: measured (imported) tables as points, simulated ones beside them as lines, both otherwise."),
    ("errors", "errors = on | off (plot): draw the table's error bars; (fit): use them as σ. Default on.\nerrors = on | off (plot): draw the table's error bars. Default on."),
    ("format", "format (export, import): csv | json for export (default from the extension); csv | whitespace for import (default detected from the header)."),
    ("tau0", "tau0 (calibrate): the attempt time the simulation used when its τ is given in seconds, e.g. tau0 = 1 µs."),
    ("width", "width (plot): picture width in pixels (160 to 4000). Default 640."),
    ("height", "height (plot): picture height in pixels (160 to 4000). Default 400."),
    ("p", "p (percolation): the occupation probability of bonds or sites, in [0, 1]; also written `at P`."),
    ("occupy", "occupy = bond | site (percolation clusters, growth, walkers): what is occupied at random. Default bond."),
    ("realisations", "realisations (percolation clusters, growth): independent random occupations averaged over."),
    ("seeds", "seeds (percolation growth): start sites per realisation of the breadth-first growth."),
    ("max_distance", "max_distance (percolation growth): the largest chemical distance ℓ followed. Default 40."),
    ("band", "band = [A, B] (percolation growth): the ℓ range of the power-law fit N(ℓ) ∝ ℓ^d_ℓ (1 + c/ℓ)."),
    ("walkers", "walkers (percolation walkers): random walkers on the cluster and as many on the full lattice. Default 200."),
    ("points", "points (percolation bond, site): rows of the table, p evenly spaced over the window. Default 61."),
    ("bootstrap", "bootstrap (percolation bond, site): bootstrap resamples of the sweeps for the error of p_c. Default 100."),
    ("states", "states (percolation open_hops): equilibrated states examined per temperature. Default 10."),
    ("open_within", "open_within (percolation open_hops): a gate class is open when its attempt time is at most this factor above the fastest. Default 10."),
];

/// Help for option values and kinds.
pub const WORD_HELP: &[(&str, &str)] = &[
    ("pyrochlore", "pyrochlore: FCC Bravais lattice with a four-site basis; corner-sharing tetrahedra; local ⟨111⟩ Ising axes. N = 16 L³ spins."),
    ("square_ice", "square_ice: two-dimensional six-vertex ice, L×L vertices with 2L² spins on the bonds, H = J Σ_v q_v² (J = J_eff); records energy, specific_heat(_molar), entropy. Lieb's exact residual entropy is ½ ln(4/3)^{3/2} = 0.2158 per spin."),
    ("nearest", "nearest: the nearest-neighbour spin-ice model H = J_eff Σ⟨ij⟩ σiσj."),
    ("exchange", "exchange: J1, J2, J3, J3' exchange shells, in the vector or Ising convention."),
    ("dipolar", "dipolar: long-range dipolar sum by Ewald summation with conducting boundary."),
    ("metropolis", "metropolis: accept a flip with probability min(1, e^{−ΔE/T})."),
    ("heat_bath", "heat_bath: accept a flip with probability 1/(1 + e^{ΔE/T})."),
    ("glauber", "glauber: accept a flip with probability 1/(1 + e^{ΔE/T}) (Glauber 1963), the heat-bath rule of physical-time dynamics."),
    ("single_flip", "single_flip: one spin flips at a time, each attempting as a Poisson process."),
    ("uniform", "uniform: every spin attempts with the same attempt time τ0."),
    ("gated", "gated: attempt time `fast` for spins with a transverse field h⊥ ≠ 0, `slow` (or frozen) for h⊥ = 0."),
    ("frozen", "frozen (slow = frozen): spins with h⊥ = 0 never attempt."),
    ("auto", "auto (execution): rejection-free for the nearest-neighbour model; the run says which it used."),
    ("attempts", "attempts (execution): random-site attempts, τ_min/N of physical time each."),
    ("rejection_free", "rejection_free (execution): the n-fold way (Bortz, Kalos & Lebowitz 1975); exact, fast at low temperature."),
    ("neighbours", "neighbours (transverse): h⊥ from the six nearest neighbours, four classes |h⊥|/|g| = 0, 2, 2√3, 4."),
    ("linear", "linear: evenly spaced / linear axis."),
    ("log", "log: evenly spaced in the logarithm / logarithmic axis."),
    ("random", "random: independent random pseudospins (an infinite-temperature state)."),
    ("ice", "ice: a two-in–two-out state, every tetrahedron neutral."),
    ("pair", "pair (monopoles start): the ice state with one ± monopole pair placed `separation` hops apart."),
    ("path", "path (reachable mode): each hop flips its spin, which changes the gates of the next hops."),
    ("static", "static (reachable mode): the gates of the snapshot, directions ignored (bond percolation)."),
    ("both", "both (reachable mode): path-dependent and static counts side by side."),
    ("all_in_all_out", "all_in_all_out: every tetrahedron all-in or all-out (maximum energy for J_eff > 0)."),
    ("vector", "vector: J1 multiplies S_i·S_j of the local-axis spins; σσ coefficient −J1/3."),
    ("ising", "ising: the exchange constants multiply σiσj directly."),
    ("T", "T: temperature (the scan variable and the first column of a scan table, in K). As a unit after a number, T is tesla."),
    ("power_law", "power_law (fit): Y = A X^−b, fitted as a straight line in log–log; parameters A and b."),
    ("exp", "exp (fit): Y = A e^{−X/tau}; X a time."),
    ("stretched_exp", "stretched_exp (fit): Y = A e^{−(X/tau)^beta} (Kohlrausch–Williams–Watts); X a time."),
    ("noise_form", "noise_form (fit): S = A tau/(1 + (ωtau)^b), ω = 2πf; Lorentzian for b = 2; X a frequency."),
    ("arrhenius", "arrhenius (fit): tau = tau_infinity e^{barrier/T}; X a temperature, barrier in K."),
    ("hann", "hann (spectrum window): w = ½ − ½ cos(2πn/N), periodic."),
    ("hamming", "hamming (spectrum window): w = 0.54 − 0.46 cos(2πn/N), periodic."),
    ("rectangular", "rectangular (spectrum window): w = 1."),
    ("model", "show model: the declared lattice, couplings, seed and measures."),
    ("workspace", "show workspace: every named table and figure."),
    ("measures", "show measures: the measures the next scan records."),
    ("diamond", "diamond (percolation): the diamond lattice, 8 L³ sites, coordination 4 — the lattice of tetrahedron centres where monopoles hop. Bond p_c = 0.3880, site p_c = 0.4301 (van der Marck 1997, memory)."),
    ("simple_cubic", "simple_cubic (percolation): L³ sites, coordination 6. Bond p_c = 0.248812 (Lorenz & Ziff 1998), site p_c = 0.311608 (Deng & Blöte 2005)."),
    ("square", "square (percolation): L² sites, coordination 4. Bond p_c = 1/2 (Kesten 1980, exact), site p_c = 0.592746 (Newman & Ziff 2000)."),
    ("bond", "bond (percolation): bonds occupied at random; every site present."),
    ("site", "site (percolation): sites occupied at random; a bond is usable between two occupied sites."),
    ("clusters", "percolation clusters: the cluster-size distribution, largest-cluster fraction and correlation length at one p."),
    ("growth", "percolation growth: the chemical-distance growth N(ℓ) ∝ ℓ^d_ℓ from random seeds."),
    ("open_hops", "percolation open_hops: which hops a monopole could make in equilibrated states under the dynamics rule (open gate classes), against the diamond bond p_c."),
];

fn lookup(table: &[(&str, &'static str)], word: &str) -> Option<String> {
    table
        .iter()
        .find(|(k, _)| *k == word)
        .map(|(_, v)| v.to_string())
}

/// Help for a table, its columns and provenance.
pub fn table_help(workspace: &Workspace, name: &str) -> Option<String> {
    match workspace.get(name)? {
        Value::Table(table) => {
            let mut text = format!("{name}: table, {} rows\n", table.row_count());
            for c in &table.columns {
                text.push_str(&format!(
                    "  {}{}{}\n",
                    header(&c.name, &c.unit),
                    if c.errors.is_some() { " ± error" } else { "" },
                    c.derived_from
                        .as_ref()
                        .map(|e| format!("  (derived: {e})"))
                        .unwrap_or_default()
                ));
            }
            let provenance = provenance_line(table);
            if !provenance.is_empty() {
                text.push_str(&format!("from: {provenance}\n"));
            }
            Some(text)
        }
        Value::Figure(f) => Some(format!(
            "{name}: figure, {} against {} ({} series)\n",
            header(&f.y_label, &f.y_unit),
            header(&f.x_label, &f.x_unit),
            f.series.len()
        )),
    }
}

/// Help for `table.column`.
pub fn column_help(workspace: &Workspace, table: &str, column: &str) -> Option<String> {
    let t = workspace.table(table)?;
    let c = t.column(column)?;
    let mut text = format!(
        "{table}.{}: {} values",
        header(&c.name, &c.unit),
        c.values.len()
    );
    if c.errors.is_some() {
        text.push_str(" with error bars");
    }
    text.push('\n');
    if let Some(m) = MEASURES.iter().find(|m| m.name == column) {
        text.push_str(m.help);
        text.push('\n');
    }
    if let Some((_, _, help)) = DIAGNOSTIC_COLUMNS
        .iter()
        .chain([&EXCHANGE_COLUMN])
        .find(|(name, _, _)| *name == column)
    {
        text.push_str(help);
        text.push('\n');
    }
    if let Some(e) = &c.derived_from {
        text.push_str(&format!("derived: {e}\n"));
    }
    Some(text)
}

/// Help for any word of the language (not workspace values).
pub fn word_help(word: &str) -> Option<String> {
    if let Some(h) = lookup(KEYWORD_HELP, word) {
        return Some(h);
    }
    if let Some(m) = MEASURES.iter().find(|m| m.name == word) {
        return Some(format!("measure {}: {}", header(m.name, m.unit), m.help));
    }
    if let Some(h) = lookup(OPTION_HELP, word) {
        return Some(h);
    }
    if let Some(h) = lookup(WORD_HELP, word) {
        return Some(h);
    }
    if let Some(u) = crate::units::lookup(word) {
        return Some(format!(
            "unit {}: {} ({})",
            u.symbol,
            u.description,
            match u.dimension {
                crate::units::Dimension::Energy => "energy/temperature, converted to K",
                crate::units::Dimension::MagneticField => "magnetic field, converted to T",
                crate::units::Dimension::Time => "time, converted to s",
                crate::units::Dimension::Length => "length, converted to Å",
                crate::units::Dimension::Moment => "moment, in µB",
                crate::units::Dimension::Frequency => "frequency, converted to Hz",
                crate::units::Dimension::Dimensionless => "pure number",
            }
        ));
    }
    if let Some(p) = planned(word) {
        return Some(p);
    }
    None
}
