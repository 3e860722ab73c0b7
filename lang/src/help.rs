//! Short plain-text help for every keyword, measure, option, unit and workspace value,
//! shown by `Session::inspect` (Shift-Tab in a notebook).

use crate::display::{header, provenance_line};
use crate::measures::MEASURES;
use crate::syntax::planned;
use crate::workspace::{Value, Workspace};

/// Help for statement keywords and connecting words.
pub const KEYWORD_HELP: &[(&str, &str)] = &[
    ("lattice", "lattice KIND L = N\n  Declares the lattice: `pyrochlore` (16 L³ spins, L×L×L periodic conventional cubic cells).\n  Example: lattice pyrochlore L = 4"),
    ("couplings", "couplings nearest J_eff = E | J1 = E [, convention = vector|ising] [, D = E]\n  Declares the nearest-neighbour spin-ice model H = J_eff Σ⟨ij⟩ σiσj.\n  J_eff is the σσ coefficient; J1 is read in the vector convention (J_nn = −J1/3) unless\n  convention = ising; D adds the nearest-neighbour part of the dipolar sum, 5D/3.\n  Example: couplings nearest J_eff = 1.8 K\ncouplings exchange J1 = E [, J2 = E, J3 = E, J3' = E, convention = vector|ising]\ncouplings dipolar D = E | moment = M µB, r_nn = R Å\n  A general model: exchange shells and the Ewald-summed dipolar term (conducting boundary).\n  `exchange` and `dipolar` statements add up; `nearest` starts over.\n  Example: couplings dipolar moment = 10 µB, r_nn = 3.54 Å"),
    ("field", "field B = MAGNITUDE along [h, k, l], moment = M µB\n  A Zeeman term −μ Σ S·B (μ in µB, B in T). Later scans run on the coupling-table engine and\n  record `magnetisation_along`, the magnetisation per spin along the field direction.\n  Example: field B = 0.5 T along [1, 1, 1], moment = 10 µB"),
    ("seed", "seed N\n  Seeds every random stream of later runs (a whole number). The same seed gives the same numbers.\n  Example: seed 20261201"),
    ("measure", "measure NAME, NAME, ...\n  Chooses what later scans record (default: every measure). See `show measures`.\n  Example: measure energy, specific_heat, monopole_density"),
    ("scan", "NAME = scan T from A to B in N steps [, sweeps = S, equilibrate = E, sample_every = K, spacing = linear|log, start = random|ice|all_in_all_out]\nNAME = scan T at [T1, T2, ...] K [, ...]\n  Equilibrium scan of the declared model; stores a table NAME with T and one column per measure.\n  acceptance = metropolis|heat_bath chooses the single-flip rule, loops = N adds N ice-manifold\n  loop moves per sweep (needed below about 0.5 J_eff). With `measure entropy` the scan must reach\n  a temperature well above the couplings (about 10 J_eff or more).\n  Example: thermo = scan T from 0.3 K to 8 K in 30 steps, sweeps = 4000, equilibrate = 1000, spacing = log"),
    ("table", "table NAME [, columns = [A, B]]\n  Shows a table: values with error bars, units in the header.\n  Example: table thermo"),
    ("show", "show NAME | model | measures | workspace\n  Shows a table or figure, the model declaration, the active measures, or every named value."),
    ("plot", "[NAME =] plot TABLE.Y [, TABLE.Y2] against X [, xscale = log, yscale = log, title = \"...\", style = line|points|both, errors = on|off, width = PX, height = PX]\n  Draws Y against X with error bars from the table; NAME stores the figure.\n  Example: plot thermo.specific_heat against T, xscale = log"),
    ("column", "column TABLE.NEW = EXPRESSION [unit \"U\"]\n  Adds a derived column computed row by row (rhai arithmetic and functions of the row's columns);\n  error bars propagate to first order.\n  Example: column thermo.c_molar = molar(specific_heat) unit \"J/(mol K)\""),
    ("rhai", "rhai { ... }\n  rhai code: `fn` definitions persist across cells; other statements run now with every table\n  visible as a map of arrays (thermo.T, thermo.energy); print() writes to the cell output."),
    ("export", "export TABLE to \"FILE.csv\"\n  Writes a table as CSV with the unit in every header (errors as NAME_error columns)."),
    ("from", "scan T from A to B in N steps: the first temperature of the ladder."),
    ("to", "scan T from A to B in N steps: the last temperature; also `export TABLE to \"FILE.csv\"`."),
    ("in", "scan T from A to B in N steps: N temperatures, both ends included."),
    ("steps", "scan T from A to B in N steps: N temperatures, both ends included."),
    ("at", "scan T at [T1, T2, ...] K: the temperatures exactly as listed."),
    ("against", "plot Y against X: X is a column of the same table (usually T)."),
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
    ("acceptance", "acceptance = metropolis | heat_bath (scan): single-flip acceptance min(1, e^{−ΔE/T}) or 1/(1 + e^{ΔE/T})."),
    ("loops", "loops (scan): ice-manifold loop moves attempted after every sweep (Barkema & Newman 1998), accepted on the full energy change. Default 0."),
    ("J1", "J1 (couplings nearest, exchange): nearest-neighbour exchange, read in the vector convention J1 S_i·S_j (σσ coefficient −J1/3) unless `convention = ising`."),
    ("convention", "convention = vector | ising: how J1 is read (vector: coefficient of S_i·S_j; ising: coefficient of σiσj)."),
    ("D", "D (couplings nearest, dipolar): dipolar strength μ0μ²/(4π k_B r_nn³), an energy (K); `couplings dipolar` sums it in full by Ewald summation, `couplings nearest` keeps its nearest-neighbour part D_nn = 5D/3."),
    ("B", "B (field): magnetic field in T or mT, `0.5 T along [1, 1, 1]` or `[0, 0, 0.5] T`."),
    ("moment", "moment (field, couplings dipolar): the magnetic moment per spin, in µB."),
    ("sweeps", "sweeps (scan): measurement sweeps per temperature (one sweep = N flip attempts). Default 2000."),
    ("equilibrate", "equilibrate (scan): sweeps discarded before measuring, per temperature. Default 500."),
    ("sample_every", "sample_every (scan): sweeps between samples. Default 1."),
    ("spacing", "spacing = linear | log (scan): temperatures evenly spaced in T or in ln T."),
    ("start", "start = random | ice | all_in_all_out (scan): the initial configuration at each temperature."),
    ("columns", "columns = [A, B] (table, show): the columns to show, in this order."),
    ("xscale", "xscale = linear | log (plot): the horizontal axis scale."),
    ("yscale", "yscale = linear | log (plot): the vertical axis scale."),
    ("title", "title = \"...\" (plot): the figure title."),
    ("style", "style = line | points | both (plot): how series are drawn. Default both."),
    ("errors", "errors = on | off (plot): draw the table's error bars. Default on."),
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
    ("square_ice", "square_ice: two-dimensional six-vertex ice (planned)."),
    ("nearest", "nearest: the nearest-neighbour spin-ice model H = J_eff Σ⟨ij⟩ σiσj."),
    ("exchange", "exchange: J1, J2, J3, J3' exchange shells, in the vector or Ising convention."),
    ("dipolar", "dipolar: long-range dipolar sum by Ewald summation with conducting boundary."),
    ("metropolis", "metropolis: accept a flip with probability min(1, e^{−ΔE/T})."),
    ("heat_bath", "heat_bath: accept a flip with probability 1/(1 + e^{ΔE/T})."),
    ("linear", "linear: evenly spaced / linear axis."),
    ("log", "log: evenly spaced in the logarithm / logarithmic axis."),
    ("random", "random: independent random pseudospins (an infinite-temperature state)."),
    ("ice", "ice: a two-in–two-out state, every tetrahedron neutral."),
    ("all_in_all_out", "all_in_all_out: every tetrahedron all-in or all-out (maximum energy for J_eff > 0)."),
    ("vector", "vector: J1 multiplies S_i·S_j of the local-axis spins; σσ coefficient −J1/3."),
    ("ising", "ising: the exchange constants multiply σiσj directly."),
    ("T", "T: temperature (the scan variable and the first column of a scan table, in K). As a unit after a number, T is tesla."),
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
                crate::units::Dimension::Dimensionless => "pure number",
            }
        ));
    }
    if let Some(p) = planned(word) {
        return Some(p);
    }
    None
}
