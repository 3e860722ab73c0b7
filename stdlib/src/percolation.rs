//! Bond and site percolation: Newman–Ziff sweeps, wrapping and spanning,
//! the crossing estimate of p_c, cluster statistics, chemical distance and
//! random walks on clusters (physics-reference §7).
//!
//! * [`PercolationGraph`] is a periodic graph whose edges carry their
//!   integer displacement vector (minimum image, in any fixed length unit):
//!   the built-in square, simple-cubic and diamond lattices, the diamond
//!   graph of a [`Pyrochlore`] lattice (sites = tetrahedra, one edge per
//!   spin, so a dynamics rule can mark which hops of a spin-ice state are
//!   open), or any edge list.
//! * [`newman_ziff`] adds bonds (or sites) one at a time in random order
//!   and updates a union–find forest with path compression and union by
//!   size (Newman & Ziff, PRE 64, 016706 (2001)); every observable is
//!   recorded for every occupation number `n` in one `O(M)` sweep and
//!   turned into a function of `p` by the binomial convolution
//!   `Q(p) = Σ_n C(M,n) pⁿ (1−p)^{M−n} Q_n` (their eq. 2).
//! * Wrapping is detected as Newman & Ziff do: each site stores its
//!   displacement to its root; a bond joining two sites already in one
//!   cluster closes a loop whose net displacement is non-zero exactly when
//!   the loop winds around the torus.
//! * Spanning (built-in lattices only) uses open boundaries along x: a
//!   second union–find without the bonds that cross the x boundary, whose
//!   roots remember whether their cluster touches the x = 0 and x = max faces.
//! * The crossing of `R_L(p)` for several `L` estimates p_c (finite-size
//!   scaling; Stauffer & Aharony, Introduction to Percolation Theory (1994));
//!   its error is a bootstrap over sweeps (Efron, Ann. Stat. 7, 1 (1979)).
//! * Correlation length: `ξ² = 2 Σ' R_s² s² / Σ' s²` over clusters other
//!   than the largest, `R_s` the radius of gyration (Stauffer & Aharony eq.
//!   (35)); kept in O(1) per union from per-root sums of unwrapped positions.

use crate::control::Interrupt;
use crate::gating::{gate_class, GateClasses, GATE_CLASS_COUNT};
use crate::lattice::Pyrochlore;
use crate::rng::SpinRng;
use rand::Rng;
use serde::{Deserialize, Serialize};
use std::fmt;

/// Why a percolation computation could not be done.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum PercolationError {
    /// An argument is out of range; the message says which.
    Invalid(String),
    /// The run was interrupted before any sweep finished.
    Interrupted,
}

impl fmt::Display for PercolationError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PercolationError::Invalid(m) => f.write_str(m),
            PercolationError::Interrupted => write!(f, "interrupted before a sweep finished"),
        }
    }
}

impl std::error::Error for PercolationError {}

fn invalid<T>(message: String) -> Result<T, PercolationError> {
    Err(PercolationError::Invalid(message))
}

/// Built-in periodic lattices.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum LatticeKind {
    /// Square lattice, L × L sites, unit bonds.
    Square,
    /// Simple cubic, L³ sites, unit bonds.
    SimpleCubic,
    /// Diamond, L³ conventional cubic cells of 8 sites; displacements in
    /// units of a/4 (bond vectors (±1,±1,±1)).
    Diamond,
}

/// What is occupied at random.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum PercolationKind {
    /// Bonds occupied with probability p; all sites present.
    Bond,
    /// Sites occupied with probability p; a bond is usable between two occupied sites.
    Site,
}

/// Open-boundary information along x for spanning.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
struct SpanningFaces {
    /// Per site: bit 0 on the x = 0 face, bit 1 on the x = max face.
    face: Vec<u8>,
    /// Per edge: crosses the periodic x boundary.
    crosses: Vec<bool>,
}

/// A periodic graph for percolation.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PercolationGraph {
    /// Description, e.g. "diamond L=16".
    pub name: String,
    /// Linear size L (cells per side) used in finite-size scaling.
    pub linear_size: usize,
    site_count: usize,
    edges: Vec<[u32; 2]>,
    displacements: Vec<[i32; 3]>,
    spanning: Option<SpanningFaces>,
    adjacency_offsets: Vec<u32>,
    /// (neighbour, edge) pairs; the step from a site along edge `e` is
    /// `+d_e` if the site is `edges[e][0]`, else `−d_e`.
    adjacency: Vec<[u32; 2]>,
}

impl PercolationGraph {
    /// Graph from an edge list: `edges[e] = [a, b]` with `displacements[e]`
    /// the integer vector from `a` to `b` (minimum image, any fixed unit).
    /// A loop winds around the periodic box iff its displacements do not
    /// sum to zero, which is what wrapping detection uses. No spanning.
    pub fn from_edges(
        name: &str,
        linear_size: usize,
        site_count: usize,
        edges: Vec<[u32; 2]>,
        displacements: Vec<[i32; 3]>,
    ) -> Result<Self, PercolationError> {
        Self::build(name, linear_size, site_count, edges, displacements, None)
    }

    fn build(
        name: &str,
        linear_size: usize,
        site_count: usize,
        edges: Vec<[u32; 2]>,
        displacements: Vec<[i32; 3]>,
        spanning: Option<SpanningFaces>,
    ) -> Result<Self, PercolationError> {
        if edges.len() != displacements.len() {
            return invalid(format!(
                "{} edges but {} displacement vectors",
                edges.len(),
                displacements.len()
            ));
        }
        if site_count == 0 || site_count >= u32::MAX as usize || edges.len() >= u32::MAX as usize {
            return invalid(format!(
                "the graph must have between 1 and 2^32 − 1 sites and edges (got {site_count} sites, {} edges)",
                edges.len()
            ));
        }
        if let Some((e, pair)) = edges
            .iter()
            .enumerate()
            .find(|(_, p)| p[0] as usize >= site_count || p[1] as usize >= site_count)
        {
            return invalid(format!(
                "edge {e} joins {pair:?}, but there are only {site_count} sites"
            ));
        }
        let mut degree = vec![0u32; site_count + 1];
        for [a, b] in &edges {
            degree[*a as usize + 1] += 1;
            degree[*b as usize + 1] += 1;
        }
        for k in 1..degree.len() {
            degree[k] += degree[k - 1];
        }
        let offsets = degree;
        let mut fill = offsets.clone();
        let mut adjacency = vec![[0u32; 2]; 2 * edges.len()];
        for (e, [a, b]) in edges.iter().enumerate() {
            adjacency[fill[*a as usize] as usize] = [*b, e as u32];
            fill[*a as usize] += 1;
            adjacency[fill[*b as usize] as usize] = [*a, e as u32];
            fill[*b as usize] += 1;
        }
        Ok(Self {
            name: name.to_string(),
            linear_size,
            site_count,
            edges,
            displacements,
            spanning,
            adjacency_offsets: offsets,
            adjacency,
        })
    }

    /// A built-in periodic lattice with `linear_size` cells per side (≥ 2;
    /// refused above 2^26 sites to protect the shared machine).
    pub fn lattice(kind: LatticeKind, linear_size: usize) -> Result<Self, PercolationError> {
        let l = linear_size;
        let sites = match kind {
            LatticeKind::Square => l.checked_mul(l),
            LatticeKind::SimpleCubic => l.checked_pow(3),
            LatticeKind::Diamond => l.checked_pow(3).and_then(|v| v.checked_mul(8)),
        };
        match sites {
            Some(s) if l >= 2 && s <= 1 << 26 => {}
            _ => {
                return invalid(format!(
                    "lattice size L = {l} is outside 2..(2^26 sites) for {kind:?}"
                ))
            }
        }
        match kind {
            LatticeKind::Square | LatticeKind::SimpleCubic => {
                let dims = if kind == LatticeKind::Square { 2 } else { 3 };
                let index = |c: [usize; 3]| {
                    if dims == 2 {
                        c[0] * l + c[1]
                    } else {
                        (c[0] * l + c[1]) * l + c[2]
                    }
                };
                let count = if dims == 2 { l * l } else { l * l * l };
                let mut edges = Vec::with_capacity(dims * count);
                let mut displacements = Vec::with_capacity(dims * count);
                let mut crosses = Vec::with_capacity(dims * count);
                let mut face = vec![0u8; count];
                let zs = if dims == 2 { 1 } else { l };
                for x in 0..l {
                    for y in 0..l {
                        for z in 0..zs {
                            let here = index([x, y, z]);
                            face[here] = u8::from(x == 0) | (u8::from(x == l - 1) << 1);
                            for axis in 0..dims {
                                let mut c = [x, y, z];
                                c[axis] = (c[axis] + 1) % l;
                                let mut d = [0i32; 3];
                                d[axis] = 1;
                                edges.push([here as u32, index(c) as u32]);
                                displacements.push(d);
                                crosses.push(axis == 0 && x == l - 1);
                            }
                        }
                    }
                }
                let name = format!(
                    "{} L={l}",
                    if dims == 2 { "square" } else { "simple cubic" }
                );
                Self::build(
                    &name,
                    l,
                    count,
                    edges,
                    displacements,
                    Some(SpanningFaces { face, crosses }),
                )
            }
            LatticeKind::Diamond => {
                // Sites at FCC + {0, (1,1,1)} in quarter units; A sites
                // (first basis) bond to the B sites at r + (1,1,1),
                // r + (1,−1,−1), r + (−1,1,−1), r + (−1,−1,1) (derived:
                // each differs from r + (1,1,1) by an FCC vector).
                const FCC: [[i64; 3]; 4] = [[0, 0, 0], [0, 2, 2], [2, 0, 2], [2, 2, 0]];
                const BONDS: [[i32; 3]; 4] = [[1, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1]];
                let period = 4 * l as i64;
                let index_of = |q: [i64; 3]| -> Option<usize> {
                    let w = q.map(|v| v.rem_euclid(period));
                    let cell =
                        ((w[0] / 4) as usize * l + (w[1] / 4) as usize) * l + (w[2] / 4) as usize;
                    let r = w.map(|v| v % 4);
                    let b = (r[0] % 2 == 1) as usize;
                    let f = r.map(|v| v - b as i64);
                    let k = FCC.iter().position(|o| *o == f)?;
                    Some(cell * 8 + b * 4 + k)
                };
                let count = 8 * l * l * l;
                let mut edges = Vec::with_capacity(2 * count);
                let mut displacements = Vec::with_capacity(2 * count);
                let mut crosses = Vec::with_capacity(2 * count);
                let mut face = vec![0u8; count];
                for cx in 0..l as i64 {
                    for cy in 0..l as i64 {
                        for cz in 0..l as i64 {
                            for (k, f) in FCC.iter().enumerate() {
                                let r = [4 * cx + f[0], 4 * cy + f[1], 4 * cz + f[2]];
                                let cell = ((cx as usize * l) + cy as usize) * l + cz as usize;
                                let a = cell * 8 + k;
                                let b_here = cell * 8 + 4 + k;
                                face[a] |= u8::from(r[0] == 0);
                                // The largest x coordinate is period − 1 (B sites).
                                face[b_here] |= u8::from(r[0] + 1 == period - 1) << 1;
                                for d in BONDS {
                                    let q = [
                                        r[0] + d[0] as i64,
                                        r[1] + d[1] as i64,
                                        r[2] + d[2] as i64,
                                    ];
                                    let Some(b) = index_of(q) else {
                                        return invalid("diamond construction failed".into());
                                    };
                                    edges.push([a as u32, b as u32]);
                                    displacements.push(d);
                                    crosses.push(q[0] < 0 || q[0] >= period);
                                }
                            }
                        }
                    }
                }
                Self::build(
                    &format!("diamond L={l}"),
                    l,
                    count,
                    edges,
                    displacements,
                    Some(SpanningFaces { face, crosses }),
                )
            }
        }
    }

    /// The diamond graph of a pyrochlore lattice: site `t` = tetrahedron
    /// `t`, edge `i` = spin `i` joining its up and down tetrahedra, with
    /// displacements in units of a/4 (derived: tetrahedron centres differ by
    /// multiples of a/4). A per-spin "open" mask from a dynamics rule then
    /// is a bond realisation of this graph ([`Realisation::bonds`]).
    pub fn pyrochlore_diamond(lattice: &Pyrochlore) -> Result<Self, PercolationError> {
        let n = lattice.spin_count();
        let mut edges = Vec::with_capacity(n);
        let mut displacements = Vec::with_capacity(n);
        for spin in 0..n {
            let [up, down] = lattice.tetrahedra_of(spin);
            let d = lattice.displacement(
                lattice.tetrahedron_centre(up as usize),
                lattice.tetrahedron_centre(down as usize),
            );
            edges.push([up, down]);
            displacements.push(d.map(|v| (4.0 * v).round() as i32));
        }
        Self::from_edges(
            &format!("pyrochlore diamond L={}", lattice.cells_per_side()),
            lattice.cells_per_side(),
            lattice.tetrahedron_count(),
            edges,
            displacements,
        )
    }

    /// Sites.
    pub fn site_count(&self) -> usize {
        self.site_count
    }

    /// Edges (bonds).
    pub fn edge_count(&self) -> usize {
        self.edges.len()
    }

    /// Whether spanning along x can be computed (built-in lattices).
    pub fn has_spanning(&self) -> bool {
        self.spanning.is_some()
    }

    /// `(neighbour, edge)` pairs of `site`.
    fn incident(&self, site: usize) -> &[[u32; 2]] {
        let lo = self.adjacency_offsets[site] as usize;
        let hi = self.adjacency_offsets[site + 1] as usize;
        &self.adjacency[lo..hi]
    }

    /// Step vector from `site` along `edge`.
    fn step(&self, site: usize, edge: usize) -> [i32; 3] {
        let d = self.displacements[edge];
        if self.edges[edge][0] as usize == site {
            d
        } else {
            d.map(|v| -v)
        }
    }
}

fn add(a: [i32; 3], b: [i32; 3]) -> [i32; 3] {
    [a[0] + b[0], a[1] + b[1], a[2] + b[2]]
}

fn sub(a: [i32; 3], b: [i32; 3]) -> [i32; 3] {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2]]
}

/// Union–find forest with displacement-to-parent offsets and per-root
/// position sums (positions relative to the root).
struct Forest {
    parent: Vec<u32>,
    size: Vec<u32>,
    offset: Vec<[i32; 3]>,
    sum_r: Vec<[f64; 3]>,
    sum_r2: Vec<f64>,
}

impl Forest {
    fn new(n: usize) -> Self {
        Self {
            parent: (0..n as u32).collect(),
            size: vec![1; n],
            offset: vec![[0; 3]; n],
            sum_r: vec![[0.0; 3]; n],
            sum_r2: vec![0.0; n],
        }
    }

    fn reset(&mut self) {
        for (i, p) in self.parent.iter_mut().enumerate() {
            *p = i as u32;
        }
        self.size.fill(1);
        self.offset.fill([0; 3]);
        self.sum_r.fill([0.0; 3]);
        self.sum_r2.fill(0.0);
    }

    /// Root of `i` and the displacement from the root to `i`; compresses
    /// the path (two passes, no allocation).
    fn find(&mut self, i: usize) -> (usize, [i32; 3]) {
        let mut root = i;
        let mut total = [0; 3];
        while self.parent[root] as usize != root {
            total = add(total, self.offset[root]);
            root = self.parent[root] as usize;
        }
        let mut current = i;
        let mut remaining = total;
        while current != root {
            let next = self.parent[current] as usize;
            let own = self.offset[current];
            self.parent[current] = root as u32;
            self.offset[current] = remaining;
            remaining = sub(remaining, own);
            current = next;
        }
        (root, total)
    }

    /// `s Σr² − |Σr|²` = s² R_g² of the cluster at `root`.
    fn gyration_weight(&self, root: usize) -> f64 {
        let s = self.size[root] as f64;
        let r = self.sum_r[root];
        s * self.sum_r2[root] - (r[0] * r[0] + r[1] * r[1] + r[2] * r[2])
    }

    /// Join roots `ra` and `rb` where `pos(rb) − pos(ra) = shift`; returns the new root.
    fn union(&mut self, ra: usize, rb: usize, shift: [i32; 3]) -> usize {
        let (big, small, o) = if self.size[ra] >= self.size[rb] {
            (ra, rb, shift)
        } else {
            (rb, ra, shift.map(|v| -v))
        };
        // Positions in the small cluster, relative to `big`, are r + o.
        let s = self.size[small] as f64;
        let of = o.map(f64::from);
        let rs = self.sum_r[small];
        self.sum_r2[big] += self.sum_r2[small]
            + 2.0 * (of[0] * rs[0] + of[1] * rs[1] + of[2] * rs[2])
            + s * (of[0] * of[0] + of[1] * of[1] + of[2] * of[2]);
        for k in 0..3 {
            self.sum_r[big][k] += rs[k] + s * of[k];
        }
        self.parent[small] = big as u32;
        self.offset[small] = o;
        self.size[big] += self.size[small];
        big
    }
}

/// Plain union–find (no offsets) for spanning, with face flags per root.
struct SpanForest {
    parent: Vec<u32>,
    size: Vec<u32>,
    faces: Vec<u8>,
}

impl SpanForest {
    fn find(&mut self, mut i: usize) -> usize {
        let mut root = i;
        while self.parent[root] as usize != root {
            root = self.parent[root] as usize;
        }
        while i != root {
            let next = self.parent[i] as usize;
            self.parent[i] = root as u32;
            i = next;
        }
        root
    }

    /// Join the clusters of `a` and `b`; true if the result spans.
    fn union(&mut self, a: usize, b: usize) -> bool {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra == rb {
            return self.faces[ra] == 3;
        }
        let (big, small) = if self.size[ra] >= self.size[rb] {
            (ra, rb)
        } else {
            (rb, ra)
        };
        self.parent[small] = big as u32;
        self.size[big] += self.size[small];
        self.faces[big] |= self.faces[small];
        self.faces[big] == 3
    }
}

/// Accumulated Newman–Ziff sweeps of one graph.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct NewmanZiffRun {
    /// Graph description.
    pub graph: String,
    /// Linear size L.
    pub linear_size: usize,
    /// Bond or site.
    pub kind: PercolationKind,
    /// Sites N.
    pub sites: usize,
    /// Occupiable units M (bonds or sites).
    pub units: usize,
    /// Sweeps done.
    pub sweeps: usize,
    /// Per sweep: occupation number at which a cluster first wraps along x.
    pub first_wrap_x: Vec<u32>,
    /// Per sweep: first wrap in any direction.
    pub first_wrap_any: Vec<u32>,
    /// Per sweep: first spanning along x with open x boundaries (`u32::MAX`
    /// = never, or not available for this graph).
    pub first_span_x: Vec<u32>,
    /// Σ over sweeps of s_max/N at each n = 0..=M.
    pub largest_fraction_sum: Vec<f64>,
    /// Σ over sweeps of (s_max/N)².
    pub largest_fraction_squared_sum: Vec<f64>,
    /// Σ over sweeps of the mean cluster size Σ' s²/N (largest excluded).
    pub mean_cluster_size_sum: Vec<f64>,
    /// Σ over sweeps of ξ² (units², largest excluded).
    pub correlation_length_squared_sum: Vec<f64>,
    /// Whether the run stopped early on interrupt.
    pub interrupted: bool,
}

/// Observables at fixed occupation probability p.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct PercolationPoint {
    /// Occupation probability.
    pub p: f64,
    /// Probability that a cluster wraps along x.
    pub wrapping_x: f64,
    /// Probability that a cluster wraps in some direction.
    pub wrapping_any: f64,
    /// Probability of spanning along x with open boundaries (NaN if unavailable).
    pub spanning_x: f64,
    /// ⟨s_max⟩/N.
    pub largest_cluster_fraction: f64,
    /// Standard error of `largest_cluster_fraction` over sweeps.
    pub largest_cluster_fraction_error: f64,
    /// Mean cluster size Σ' s²/N, largest excluded.
    pub mean_cluster_size: f64,
    /// Second-moment correlation length √⟨ξ²⟩ (displacement units).
    pub correlation_length: f64,
}

/// Newman–Ziff sweeps: `sweeps` independent random orders, each from
/// `rng`. Polls `interrupt` between sweeps and keeps the finished ones.
pub fn newman_ziff(
    graph: &PercolationGraph,
    kind: PercolationKind,
    sweeps: usize,
    rng: &mut SpinRng,
    interrupt: &Interrupt,
) -> Result<NewmanZiffRun, PercolationError> {
    if sweeps == 0 {
        return invalid("at least one sweep is needed".into());
    }
    let n_sites = graph.site_count;
    let units = match kind {
        PercolationKind::Bond => graph.edges.len(),
        PercolationKind::Site => n_sites,
    };
    let mut run = NewmanZiffRun {
        graph: graph.name.clone(),
        linear_size: graph.linear_size,
        kind,
        sites: n_sites,
        units,
        sweeps: 0,
        first_wrap_x: Vec::with_capacity(sweeps),
        first_wrap_any: Vec::with_capacity(sweeps),
        first_span_x: Vec::with_capacity(sweeps),
        largest_fraction_sum: vec![0.0; units + 1],
        largest_fraction_squared_sum: vec![0.0; units + 1],
        mean_cluster_size_sum: vec![0.0; units + 1],
        correlation_length_squared_sum: vec![0.0; units + 1],
        interrupted: false,
    };
    let mut sweeper = Sweeper::new(graph, kind);
    for _ in 0..sweeps {
        if interrupt.is_requested() {
            run.interrupted = true;
            break;
        }
        sweeper.sweep(graph, rng, &mut run);
        run.sweeps += 1;
    }
    if run.sweeps == 0 {
        return Err(PercolationError::Interrupted);
    }
    Ok(run)
}

/// Reusable buffers of one sweep (allocated once per run).
struct Sweeper {
    kind: PercolationKind,
    order: Vec<u32>,
    forest: Forest,
    span: Option<SpanForest>,
    occupied: Vec<bool>,
}

impl Sweeper {
    fn new(graph: &PercolationGraph, kind: PercolationKind) -> Self {
        let units = match kind {
            PercolationKind::Bond => graph.edges.len(),
            PercolationKind::Site => graph.site_count,
        };
        Self {
            kind,
            order: (0..units as u32).collect(),
            forest: Forest::new(graph.site_count),
            span: graph.spanning.as_ref().map(|s| SpanForest {
                parent: (0..graph.site_count as u32).collect(),
                size: vec![1; graph.site_count],
                faces: s.face.clone(),
            }),
            occupied: vec![false; graph.site_count],
        }
    }

    fn sweep(&mut self, graph: &PercolationGraph, rng: &mut SpinRng, run: &mut NewmanZiffRun) {
        // Fisher–Yates shuffle (Knuth, TAOCP 2, Algorithm P).
        for i in (1..self.order.len()).rev() {
            let j = rng.gen_range(0..=i);
            self.order.swap(i, j);
        }
        self.forest.reset();
        self.occupied.fill(false);
        if let (Some(span), Some(faces)) = (self.span.as_mut(), graph.spanning.as_ref()) {
            for (i, p) in span.parent.iter_mut().enumerate() {
                *p = i as u32;
            }
            span.size.fill(1);
            span.faces.copy_from_slice(&faces.face);
        }
        let n_f = graph.site_count as f64;
        let (mut largest, mut largest_root) = match self.kind {
            PercolationKind::Bond => (1u64, 0usize),
            PercolationKind::Site => (0u64, 0usize),
        };
        // Σ s² and Σ s²R² over all clusters (singletons have R = 0).
        let mut sum_s2 = match self.kind {
            PercolationKind::Bond => n_f,
            PercolationKind::Site => 0.0,
        };
        let mut sum_gyration = 0.0;
        let mut wrap_x = u32::MAX;
        let mut wrap_any = u32::MAX;
        let mut span_x = u32::MAX;
        let record = |run: &mut NewmanZiffRun,
                      n: usize,
                      largest: u64,
                      largest_gyr: f64,
                      sum_s2: f64,
                      sum_gyration: f64| {
            let fraction = largest as f64 / n_f;
            run.largest_fraction_sum[n] += fraction;
            run.largest_fraction_squared_sum[n] += fraction * fraction;
            let rest_s2 = (sum_s2 - (largest * largest) as f64).max(0.0);
            run.mean_cluster_size_sum[n] += rest_s2 / n_f;
            if rest_s2 > 0.0 {
                run.correlation_length_squared_sum[n] +=
                    2.0 * (sum_gyration - largest_gyr).max(0.0) / rest_s2;
            }
        };
        record(run, 0, largest, 0.0, sum_s2, sum_gyration);
        for n in 1..=self.order.len() {
            let unit = self.order[n - 1] as usize;
            match self.kind {
                PercolationKind::Bond => {
                    let [a, b] = graph.edges[unit];
                    self.join(
                        graph,
                        a as usize,
                        b as usize,
                        unit,
                        n,
                        &mut largest,
                        &mut largest_root,
                        &mut sum_s2,
                        &mut sum_gyration,
                        [&mut wrap_x, &mut wrap_any, &mut span_x],
                    );
                }
                PercolationKind::Site => {
                    self.occupied[unit] = true;
                    sum_s2 += 1.0;
                    if largest == 0 {
                        largest = 1;
                        largest_root = unit;
                    }
                    let lo = graph.adjacency_offsets[unit] as usize;
                    let hi = graph.adjacency_offsets[unit + 1] as usize;
                    for k in lo..hi {
                        let [other, edge] = graph.adjacency[k];
                        if self.occupied[other as usize] {
                            let [a, b] = graph.edges[edge as usize];
                            self.join(
                                graph,
                                a as usize,
                                b as usize,
                                edge as usize,
                                n,
                                &mut largest,
                                &mut largest_root,
                                &mut sum_s2,
                                &mut sum_gyration,
                                [&mut wrap_x, &mut wrap_any, &mut span_x],
                            );
                        }
                    }
                }
            }
            let largest_gyr = self.forest.gyration_weight(largest_root);
            record(run, n, largest, largest_gyr, sum_s2, sum_gyration);
        }
        run.first_wrap_x.push(wrap_x);
        run.first_wrap_any.push(wrap_any);
        run.first_span_x.push(span_x);
    }

    /// Occupy edge `edge` = (a, b) at occupation number `n`.
    #[allow(clippy::too_many_arguments)]
    fn join(
        &mut self,
        graph: &PercolationGraph,
        a: usize,
        b: usize,
        edge: usize,
        n: usize,
        largest: &mut u64,
        largest_root: &mut usize,
        sum_s2: &mut f64,
        sum_gyration: &mut f64,
        firsts: [&mut u32; 3],
    ) {
        let [wrap_x, wrap_any, span_x] = firsts;
        if let (Some(span), Some(faces)) = (self.span.as_mut(), graph.spanning.as_ref()) {
            if !faces.crosses[edge] && span.union(a, b) && *span_x == u32::MAX {
                *span_x = n as u32;
            }
        }
        let (ra, oa) = self.forest.find(a);
        let (rb, ob) = self.forest.find(b);
        // pos(rb) − pos(ra) = oa + d − ob.
        let shift = sub(add(oa, graph.displacements[edge]), ob);
        if ra == rb {
            if shift != [0, 0, 0] {
                if *wrap_any == u32::MAX {
                    *wrap_any = n as u32;
                }
                if shift[0] != 0 && *wrap_x == u32::MAX {
                    *wrap_x = n as u32;
                }
            }
            return;
        }
        let (sa, sb) = (self.forest.size[ra] as f64, self.forest.size[rb] as f64);
        *sum_gyration -= self.forest.gyration_weight(ra) + self.forest.gyration_weight(rb);
        let root = self.forest.union(ra, rb, shift);
        *sum_gyration += self.forest.gyration_weight(root);
        *sum_s2 += 2.0 * sa * sb;
        let size = self.forest.size[root] as u64;
        if size >= *largest {
            *largest = size;
            *largest_root = root;
        }
    }
}

/// Binomial weights `C(M,n) pⁿ(1−p)^{M−n}` for n in a window around `Mp`
/// (terms below 1e-17 of the peak dropped); returns (first n, weights).
/// Built by the ratio recurrence from the mode (Newman & Ziff 2001, §II).
fn binomial_window(m: usize, p: f64) -> (usize, Vec<f64>) {
    if p <= 0.0 {
        return (0, vec![1.0]);
    }
    if p >= 1.0 {
        return (m, vec![1.0]);
    }
    let mode = ((m as f64 + 1.0) * p).floor().min(m as f64) as usize;
    let ratio = p / (1.0 - p);
    let mut up = vec![1.0];
    let mut w = 1.0;
    let mut n = mode;
    while n < m {
        w *= (m - n) as f64 / (n + 1) as f64 * ratio;
        if w < 1e-17 {
            break;
        }
        up.push(w);
        n += 1;
    }
    let mut down = Vec::new();
    w = 1.0;
    n = mode;
    while n > 0 {
        w *= n as f64 / (m - n + 1) as f64 / ratio;
        if w < 1e-17 {
            break;
        }
        down.push(w);
        n -= 1;
    }
    let first = mode - down.len();
    let mut weights: Vec<f64> = down.into_iter().rev().collect();
    weights.extend(up);
    let total: f64 = weights.iter().sum();
    weights.iter_mut().for_each(|w| *w /= total);
    (first, weights)
}

/// Fraction of sweeps whose first event is at or before each n (length M+1).
fn cumulative(firsts: &[u32], units: usize) -> Vec<f64> {
    let mut counts = vec![0.0; units + 1];
    for &f in firsts {
        if (f as usize) <= units {
            counts[f as usize] += 1.0;
        }
    }
    let total = firsts.len().max(1) as f64;
    let mut acc = 0.0;
    for c in counts.iter_mut() {
        acc += *c;
        *c = acc / total;
    }
    counts
}

fn convolve(first: usize, weights: &[f64], values: &[f64]) -> f64 {
    weights
        .iter()
        .zip(&values[first..])
        .map(|(w, v)| w * v)
        .sum()
}

impl NewmanZiffRun {
    /// Adds the sweeps of `other` (same graph and kind), so a long run can be
    /// done in chunks with progress reported in between.
    pub fn absorb(&mut self, other: NewmanZiffRun) -> Result<(), PercolationError> {
        other.check_consistent()?;
        if other.graph != self.graph || other.kind != self.kind || other.units != self.units {
            return invalid(format!(
                "cannot add sweeps of {} to a run of {}",
                other.graph, self.graph
            ));
        }
        let add = |a: &mut Vec<f64>, b: &[f64]| a.iter_mut().zip(b).for_each(|(x, y)| *x += y);
        add(&mut self.largest_fraction_sum, &other.largest_fraction_sum);
        add(
            &mut self.largest_fraction_squared_sum,
            &other.largest_fraction_squared_sum,
        );
        add(
            &mut self.mean_cluster_size_sum,
            &other.mean_cluster_size_sum,
        );
        add(
            &mut self.correlation_length_squared_sum,
            &other.correlation_length_squared_sum,
        );
        self.first_wrap_x.extend(other.first_wrap_x);
        self.first_wrap_any.extend(other.first_wrap_any);
        self.first_span_x.extend(other.first_span_x);
        self.sweeps += other.sweeps;
        self.interrupted |= other.interrupted;
        Ok(())
    }

    /// Refuse a run whose arrays do not fit together (e.g. edited JSON).
    fn check_consistent(&self) -> Result<(), PercolationError> {
        let m = self.units + 1;
        let per_n = [
            &self.largest_fraction_sum,
            &self.largest_fraction_squared_sum,
            &self.mean_cluster_size_sum,
            &self.correlation_length_squared_sum,
        ];
        let per_sweep = [&self.first_wrap_x, &self.first_wrap_any, &self.first_span_x];
        if self.sweeps == 0
            || per_n.iter().any(|v| v.len() != m)
            || per_sweep.iter().any(|v| v.len() != self.sweeps)
        {
            return invalid(format!(
                "the run of {} is inconsistent: {} sweeps, {} units",
                self.graph, self.sweeps, self.units
            ));
        }
        Ok(())
    }

    /// Observables at occupation probability `p` (binomial convolution).
    pub fn at_probability(&self, p: f64) -> Result<PercolationPoint, PercolationError> {
        if !(0.0..=1.0).contains(&p) {
            return invalid(format!("p = {p} is outside [0, 1]"));
        }
        self.check_consistent()?;
        let (first, w) = binomial_window(self.units, p);
        let sweeps = self.sweeps.max(1) as f64;
        let mean = |sums: &[f64]| convolve(first, &w, sums) / sweeps;
        let largest = mean(&self.largest_fraction_sum);
        let largest_sq = mean(&self.largest_fraction_squared_sum);
        let spanning = if self.first_span_x.iter().all(|&f| f == u32::MAX) {
            f64::NAN
        } else {
            convolve(first, &w, &cumulative(&self.first_span_x, self.units))
        };
        Ok(PercolationPoint {
            p,
            wrapping_x: convolve(first, &w, &cumulative(&self.first_wrap_x, self.units)),
            wrapping_any: convolve(first, &w, &cumulative(&self.first_wrap_any, self.units)),
            spanning_x: spanning,
            largest_cluster_fraction: largest,
            largest_cluster_fraction_error: ((largest_sq - largest * largest).max(0.0)
                / (sweeps - 1.0).max(1.0))
            .sqrt(),
            mean_cluster_size: mean(&self.mean_cluster_size_sum),
            correlation_length: mean(&self.correlation_length_squared_sum).sqrt(),
        })
    }
}

/// Which probability curve to cross.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum CrossingObservable {
    /// Wrapping along x.
    WrappingX,
    /// Wrapping in any direction.
    WrappingAny,
    /// Spanning along x (open boundaries).
    SpanningX,
}

/// (L_small, L_large, crossing p).
pub type PairCrossing = (usize, usize, f64);

/// Crossing estimate of p_c.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CrossingEstimate {
    /// Mean of the crossings of consecutive sizes.
    pub p_c: f64,
    /// Bootstrap standard error of `p_c`.
    pub error: f64,
    /// (L_small, L_large, crossing p) of consecutive sizes.
    pub pair_crossings: Vec<PairCrossing>,
    /// Bootstrap resamples used.
    pub bootstrap_samples: usize,
    /// The bootstrap stopped early on interrupt (the error uses the resamples done).
    pub interrupted: bool,
}

/// p where `R_small(p) = R_large(p)` in `[lo, hi]`, from the first sign
/// change on a grid, refined by bisection.
fn pair_crossing(
    small: &[f64],
    m_small: usize,
    large: &[f64],
    m_large: usize,
    lo: f64,
    hi: f64,
) -> Option<f64> {
    let diff = |p: f64| {
        let (fs, ws) = binomial_window(m_small, p);
        let (fl, wl) = binomial_window(m_large, p);
        convolve(fs, &ws, small) - convolve(fl, &wl, large)
    };
    let average = |p: f64| {
        let (fs, ws) = binomial_window(m_small, p);
        let (fl, wl) = binomial_window(m_large, p);
        0.5 * (convolve(fs, &ws, small) + convolve(fl, &wl, large))
    };
    // Sign changes in the tails (both curves ≈ 0 or ≈ 1, where single
    // early or late sweeps dominate) are noise: only brackets where the
    // mean curve is inside [0.05, 0.95] count, and of those the one with
    // the largest drop of the difference.
    let steps = 64;
    let mut best: Option<(f64, f64, f64)> = None;
    let mut a = lo;
    let mut da = diff(a);
    for k in 1..=steps {
        let b = lo + (hi - lo) * k as f64 / steps as f64;
        let db = diff(b);
        let mean = average(0.5 * (a + b));
        if da > 0.0 && db <= 0.0 && (0.05..=0.95).contains(&mean) {
            let drop = da - db;
            let better = match best {
                Some((_, _, d)) => drop > d,
                None => true,
            };
            if better {
                best = Some((a, b, drop));
            }
        }
        a = b;
        da = db;
    }
    let (mut x0, mut x1, _) = best?;
    for _ in 0..40 {
        let mid = 0.5 * (x0 + x1);
        if diff(mid) > 0.0 {
            x0 = mid;
        } else {
            x1 = mid;
        }
    }
    Some(0.5 * (x0 + x1))
}

/// Crossing estimate of p_c from runs at several sizes (sorted by L
/// here), searched in `[p_lo, p_hi]`; error from `bootstrap_samples`
/// resamplings of the sweeps of every size. `interrupt` is polled between
/// resamples: the estimate itself is always computed, and an interrupted
/// bootstrap keeps the resamples done so far (marked `interrupted`).
pub fn crossing_estimate(
    runs: &[NewmanZiffRun],
    observable: CrossingObservable,
    p_lo: f64,
    p_hi: f64,
    bootstrap_samples: usize,
    rng: &mut SpinRng,
    interrupt: &Interrupt,
) -> Result<CrossingEstimate, PercolationError> {
    if runs.len() < 2 {
        return invalid("a crossing needs runs at two or more sizes".into());
    }
    if !(0.0 <= p_lo && p_lo < p_hi && p_hi <= 1.0) {
        return invalid(format!(
            "the search interval [{p_lo}, {p_hi}] is not inside [0, 1]"
        ));
    }
    for r in runs {
        r.check_consistent()?;
    }
    let mut sorted: Vec<&NewmanZiffRun> = runs.iter().collect();
    sorted.sort_by_key(|r| r.linear_size);
    let firsts = |r: &NewmanZiffRun| -> Vec<u32> {
        match observable {
            CrossingObservable::WrappingX => r.first_wrap_x.clone(),
            CrossingObservable::WrappingAny => r.first_wrap_any.clone(),
            CrossingObservable::SpanningX => r.first_span_x.clone(),
        }
    };
    let originals: Vec<Vec<u32>> = sorted.iter().map(|r| firsts(r)).collect();
    let estimate = |lists: &[Vec<u32>]| -> Option<(f64, Vec<PairCrossing>)> {
        let curves: Vec<Vec<f64>> = lists
            .iter()
            .zip(&sorted)
            .map(|(l, r)| cumulative(l, r.units))
            .collect();
        let mut pairs = Vec::new();
        for k in 0..sorted.len() - 1 {
            let p = pair_crossing(
                &curves[k],
                sorted[k].units,
                &curves[k + 1],
                sorted[k + 1].units,
                p_lo,
                p_hi,
            )?;
            pairs.push((sorted[k].linear_size, sorted[k + 1].linear_size, p));
        }
        let mean = pairs.iter().map(|x| x.2).sum::<f64>() / pairs.len() as f64;
        Some((mean, pairs))
    };
    let (p_c, pair_crossings) = estimate(&originals).ok_or_else(|| {
        PercolationError::Invalid(format!(
            "the curves do not cross inside [{p_lo}, {p_hi}]; widen the interval or add sweeps"
        ))
    })?;
    let mut samples = Vec::with_capacity(bootstrap_samples);
    let mut resampled: Vec<Vec<u32>> = originals.clone();
    let mut interrupted = false;
    for _ in 0..bootstrap_samples {
        if interrupt.is_requested() {
            interrupted = true;
            break;
        }
        for (target, source) in resampled.iter_mut().zip(&originals) {
            for t in target.iter_mut() {
                *t = source[rng.gen_range(0..source.len())];
            }
        }
        if let Some((p, _)) = estimate(&resampled) {
            samples.push(p);
        }
    }
    let error = if samples.len() >= 2 {
        let m = samples.iter().sum::<f64>() / samples.len() as f64;
        (samples.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (samples.len() - 1) as f64).sqrt()
    } else {
        f64::NAN
    };
    Ok(CrossingEstimate {
        p_c,
        error,
        pair_crossings,
        bootstrap_samples: samples.len(),
        interrupted,
    })
}

/// One random occupation of a graph.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Realisation {
    /// Bond or site.
    pub kind: PercolationKind,
    /// Per edge (bond) or per site (site): occupied.
    pub open: Vec<bool>,
}

impl Realisation {
    /// Occupy each unit independently with probability `p`.
    pub fn random(
        graph: &PercolationGraph,
        kind: PercolationKind,
        p: f64,
        rng: &mut SpinRng,
    ) -> Result<Self, PercolationError> {
        if !(0.0..=1.0).contains(&p) {
            return invalid(format!("p = {p} is outside [0, 1]"));
        }
        let units = match kind {
            PercolationKind::Bond => graph.edge_count(),
            PercolationKind::Site => graph.site_count(),
        };
        Ok(Self {
            kind,
            open: (0..units).map(|_| rng.gen::<f64>() < p).collect(),
        })
    }

    /// A given bond mask (e.g. the open hops of a spin-ice state on
    /// [`PercolationGraph::pyrochlore_diamond`], indexed by spin).
    pub fn bonds(graph: &PercolationGraph, open: Vec<bool>) -> Result<Self, PercolationError> {
        if open.len() != graph.edge_count() {
            return invalid(format!(
                "the mask has {} entries but the graph has {} edges",
                open.len(),
                graph.edge_count()
            ));
        }
        Ok(Self {
            kind: PercolationKind::Bond,
            open,
        })
    }

    /// Refuse a mask that does not match `graph`.
    fn check_fits(&self, graph: &PercolationGraph) -> Result<(), PercolationError> {
        let units = match self.kind {
            PercolationKind::Bond => graph.edge_count(),
            PercolationKind::Site => graph.site_count(),
        };
        if self.open.len() != units {
            return invalid(format!(
                "the realisation has {} entries but {} has {units} {}",
                self.open.len(),
                graph.name,
                if self.kind == PercolationKind::Bond {
                    "bonds"
                } else {
                    "sites"
                }
            ));
        }
        Ok(())
    }

    /// Fraction of units occupied (compare with p_c).
    pub fn open_fraction(&self) -> f64 {
        self.open.iter().filter(|o| **o).count() as f64 / self.open.len().max(1) as f64
    }

    /// Whether `site` is present.
    fn site_present(&self, site: usize) -> bool {
        self.kind == PercolationKind::Bond || self.open[site]
    }

    /// Whether a walker may cross `edge` from `from` to `to`.
    fn passable(&self, from: usize, to: usize, edge: usize) -> bool {
        match self.kind {
            PercolationKind::Bond => self.open[edge],
            PercolationKind::Site => self.open[from] && self.open[to],
        }
    }
}

/// Cluster statistics of one realisation.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ClusterStatistics {
    /// `(s, n_s)`: number of clusters of each size s, ascending.
    pub size_distribution: Vec<(u64, u64)>,
    /// Largest cluster size over N.
    pub largest_cluster_fraction: f64,
    /// Cluster label (root site) per site; `u32::MAX` for absent sites.
    pub label: Vec<u32>,
    /// Label of the largest cluster.
    pub largest_label: u32,
}

/// Clusters of a realisation (union–find over the open units).
pub fn clusters(
    graph: &PercolationGraph,
    realisation: &Realisation,
) -> Result<ClusterStatistics, PercolationError> {
    realisation.check_fits(graph)?;
    let n = graph.site_count;
    let mut forest = Forest::new(n);
    for (e, [a, b]) in graph.edges.iter().enumerate() {
        let (a, b) = (*a as usize, *b as usize);
        if realisation.passable(a, b, e) {
            let (ra, _) = forest.find(a);
            let (rb, _) = forest.find(b);
            if ra != rb {
                forest.union(ra, rb, [0; 3]);
            }
        }
    }
    let mut label = vec![u32::MAX; n];
    let mut histogram = std::collections::BTreeMap::new();
    let mut largest = (0u32, 0u32);
    for (site, l) in label.iter_mut().enumerate() {
        if !realisation.site_present(site) {
            continue;
        }
        let (root, _) = forest.find(site);
        *l = root as u32;
        if root == site {
            let s = forest.size[root];
            *histogram.entry(s as u64).or_insert(0u64) += 1;
            if s > largest.0 {
                largest = (s, root as u32);
            }
        }
    }
    Ok(ClusterStatistics {
        size_distribution: histogram.into_iter().collect(),
        largest_cluster_fraction: largest.0 as f64 / n as f64,
        label,
        largest_label: largest.1,
    })
}

/// Reusable breadth-first search over a realisation.
pub struct ChemicalDistanceSearch {
    distance: Vec<u32>,
    queue: Vec<u32>,
}

impl ChemicalDistanceSearch {
    /// Buffers for `graph`.
    pub fn new(graph: &PercolationGraph) -> Self {
        Self {
            distance: vec![u32::MAX; graph.site_count],
            queue: Vec::with_capacity(graph.site_count),
        }
    }

    /// `growth[ℓ]` = sites within chemical distance ℓ of `seed`
    /// (ℓ = 0..=max_distance; `growth[0] = 1`), overwriting `growth`.
    /// Returns the largest distance reached (≤ `max_distance`; 0 for an
    /// absent seed, whose growth is all zeros).
    pub fn grow(
        &mut self,
        graph: &PercolationGraph,
        realisation: &Realisation,
        seed: usize,
        max_distance: usize,
        growth: &mut Vec<u64>,
    ) -> usize {
        growth.clear();
        growth.resize(max_distance + 1, 0);
        for &s in &self.queue {
            self.distance[s as usize] = u32::MAX;
        }
        self.queue.clear();
        if seed >= graph.site_count
            || realisation.check_fits(graph).is_err()
            || self.distance.len() != graph.site_count
            || !realisation.site_present(seed)
        {
            return 0;
        }
        self.distance[seed] = 0;
        self.queue.push(seed as u32);
        let mut head = 0;
        let mut reached = 0;
        while head < self.queue.len() {
            let site = self.queue[head] as usize;
            head += 1;
            let d = self.distance[site] as usize;
            reached = reached.max(d);
            growth[d] += 1;
            if d == max_distance {
                continue;
            }
            for &[other, edge] in graph.incident(site) {
                let o = other as usize;
                if self.distance[o] == u32::MAX && realisation.passable(site, o, edge as usize) {
                    self.distance[o] = d as u32 + 1;
                    self.queue.push(other);
                }
            }
        }
        for k in 1..growth.len() {
            growth[k] += growth[k - 1];
        }
        reached
    }
}

/// Averaged chemical-distance growth.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ChemicalGrowth {
    /// ℓ = 0..=max.
    pub distance: Vec<f64>,
    /// ⟨N(ℓ)⟩, sites within chemical distance ℓ, averaged over the seeds
    /// whose cluster reaches distance ℓ.
    pub mean_sites: Vec<f64>,
    /// Seeds whose cluster reaches each ℓ.
    pub surviving_seeds: Vec<u64>,
    /// Seeds tried.
    pub seeds: usize,
}

impl ChemicalGrowth {
    /// Adds the seeds of `other` (same `max_distance`): the conditioned means
    /// are recombined with their surviving-seed weights.
    pub fn absorb(&mut self, other: &ChemicalGrowth) -> Result<(), PercolationError> {
        if other.distance.len() != self.distance.len() {
            return invalid("cannot combine growths of different maximal distance".into());
        }
        for l in 0..self.distance.len() {
            let (a, b) = (self.surviving_seeds[l], other.surviving_seeds[l]);
            let total = |mean: f64, n: u64| if n > 0 { mean * n as f64 } else { 0.0 };
            let sum = total(self.mean_sites[l], a) + total(other.mean_sites[l], b);
            self.surviving_seeds[l] = a + b;
            self.mean_sites[l] = if a + b > 0 {
                sum / (a + b) as f64
            } else {
                f64::NAN
            };
        }
        self.seeds += other.seeds;
        Ok(())
    }
}

/// ⟨N(ℓ)⟩ from `seeds_per_realisation` random seeds (uniform over present
/// sites) in each of `realisations` random occupations at probability `p`.
/// At each ℓ the average runs over the seeds whose cluster reaches ℓ, the
/// conditioning under which `N(ℓ) ∝ ℓ^{d_ℓ}`, `d_ℓ = d_f/d_min` (the
/// unconditioned mean grows as ℓ^{(2d_f − d)/d_min} instead; Havlin &
/// Ben-Avraham, Adv. Phys. 36, 695 (1987); Grassberger, J. Phys. A 25, 5475
/// (1992) (memory)).
#[allow(clippy::too_many_arguments)]
pub fn chemical_growth(
    graph: &PercolationGraph,
    kind: PercolationKind,
    p: f64,
    realisations: usize,
    seeds_per_realisation: usize,
    max_distance: usize,
    rng: &mut SpinRng,
    interrupt: &Interrupt,
) -> Result<ChemicalGrowth, PercolationError> {
    let mut search = ChemicalDistanceSearch::new(graph);
    let mut growth = Vec::new();
    let mut total = vec![0.0; max_distance + 1];
    let mut surviving = vec![0u64; max_distance + 1];
    let mut seeds = 0;
    let mut present = Vec::new();
    for _ in 0..realisations {
        if interrupt.is_requested() {
            break;
        }
        let realisation = Realisation::random(graph, kind, p, rng)?;
        present.clear();
        present.extend((0..graph.site_count).filter(|&s| realisation.site_present(s)));
        if present.is_empty() {
            continue;
        }
        for _ in 0..seeds_per_realisation {
            let seed = present[rng.gen_range(0..present.len())];
            let reached = search.grow(graph, &realisation, seed, max_distance, &mut growth);
            for l in 0..=reached {
                total[l] += growth[l] as f64;
                surviving[l] += 1;
            }
            seeds += 1;
        }
    }
    if seeds == 0 {
        return Err(PercolationError::Interrupted);
    }
    Ok(ChemicalGrowth {
        distance: (0..=max_distance).map(|l| l as f64).collect(),
        mean_sites: total
            .iter()
            .zip(&surviving)
            .map(|(t, s)| if *s > 0 { t / *s as f64 } else { f64::NAN })
            .collect(),
        surviving_seeds: surviving,
        seeds,
    })
}

/// Random walks ("blind ant", de Gennes, La Recherche 7, 919 (1976)): each
/// step picks one of the site's edges uniformly and moves along it if it
/// is passable, else stays.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RandomWalks {
    /// Sample times (steps).
    pub times_steps: Vec<u64>,
    /// ⟨|r(t) − r(0)|²⟩ over walkers (displacement units²).
    pub mean_square_displacement: Vec<f64>,
    /// Per walker, the unwrapped x coordinate at each sample time (a
    /// uniform series, ready for [`crate::spectra::welch_psd`]).
    pub x_series: Vec<Vec<f64>>,
    /// Walkers finished (the averages run over these).
    pub walkers: usize,
    /// Stopped early on interrupt: the walkers finished so far are kept.
    pub interrupted: bool,
}

/// Steps between polls of the interrupt inside one walk (a poll is an
/// atomic load; 2^16 steps take well under a millisecond).
const WALK_POLL_STEPS: u64 = 1 << 16;

/// `walkers` blind-ant walks of `steps` steps from `starts` (cycled),
/// sampled every `sample_every` steps. `interrupt` is polled between walkers
/// and every [`WALK_POLL_STEPS`] steps; an interrupted run keeps the walkers
/// that finished (a walker cut short is dropped, so every kept series has
/// the full length), or returns [`PercolationError::Interrupted`] if none did.
#[allow(clippy::too_many_arguments)]
pub fn random_walks(
    graph: &PercolationGraph,
    realisation: &Realisation,
    starts: &[usize],
    walkers: usize,
    steps: u64,
    sample_every: u64,
    rng: &mut SpinRng,
    interrupt: &Interrupt,
) -> Result<RandomWalks, PercolationError> {
    realisation.check_fits(graph)?;
    if starts.is_empty() || walkers == 0 || sample_every == 0 {
        return invalid(
            "random walks need start sites, ≥ 1 walker and a sample interval ≥ 1".into(),
        );
    }
    if let Some(s) = starts
        .iter()
        .find(|&&s| s >= graph.site_count || !realisation.site_present(s))
    {
        return invalid(format!(
            "start site {s} is not an occupied site of the graph"
        ));
    }
    let samples = (steps / sample_every) as usize + 1;
    let mut msd = vec![0.0; samples];
    let mut x_series = Vec::with_capacity(walkers);
    let mut interrupted = false;
    let mut r2_of_walker = vec![0.0; samples];
    'walkers: for w in 0..walkers {
        if interrupt.is_requested() {
            interrupted = true;
            break;
        }
        let mut site = starts[w % starts.len()];
        let mut position = [0i64; 3];
        let mut xs = Vec::with_capacity(samples);
        xs.push(0.0);
        for t in 1..=steps {
            if t % WALK_POLL_STEPS == 0 && interrupt.is_requested() {
                interrupted = true;
                break 'walkers;
            }
            let incident = graph.incident(site);
            if !incident.is_empty() {
                let [other, edge] = incident[rng.gen_range(0..incident.len())];
                if realisation.passable(site, other as usize, edge as usize) {
                    let d = graph.step(site, edge as usize);
                    for k in 0..3 {
                        position[k] += d[k] as i64;
                    }
                    site = other as usize;
                }
            }
            if t % sample_every == 0 {
                let k = (t / sample_every) as usize;
                r2_of_walker[k] = position.iter().map(|v| (v * v) as f64).sum::<f64>();
                xs.push(position[0] as f64);
            }
        }
        for (m, r2) in msd.iter_mut().zip(&r2_of_walker) {
            *m += r2;
        }
        x_series.push(xs);
    }
    let done = x_series.len();
    if done == 0 {
        return Err(PercolationError::Interrupted);
    }
    msd.iter_mut().for_each(|m| *m /= done as f64);
    Ok(RandomWalks {
        times_steps: (0..samples as u64).map(|k| k * sample_every).collect(),
        mean_square_displacement: msd,
        x_series,
        walkers: done,
        interrupted,
    })
}

/// Bond thresholds p_c of the built-in lattices: square 1/2 (Kesten,
/// Commun. Math. Phys. 74, 41 (1980), exact), simple cubic 0.248812 (Lorenz
/// & Ziff, PRE 57, 230 (1998)), diamond 0.3880 (van der Marck, PRE 55, 1514
/// (1997), memory).
pub fn bond_threshold(kind: LatticeKind) -> f64 {
    match kind {
        LatticeKind::Square => 0.5,
        LatticeKind::SimpleCubic => 0.248_812,
        LatticeKind::Diamond => DIAMOND_BOND_THRESHOLD,
    }
}

/// Site thresholds p_c: square 0.592746 (Newman & Ziff, PRL 85, 4104
/// (2000)), simple cubic 0.311608 (Deng & Blöte, PRE 72, 016126 (2005)),
/// diamond 0.4301 (van der Marck 1997, memory).
pub fn site_threshold(kind: LatticeKind) -> f64 {
    match kind {
        LatticeKind::Square => 0.592_746,
        LatticeKind::SimpleCubic => 0.311_608,
        LatticeKind::Diamond => 0.4301,
    }
}

/// The published threshold of `kind` percolation on `lattice`.
pub fn threshold(lattice: LatticeKind, kind: PercolationKind) -> f64 {
    match kind {
        PercolationKind::Bond => bond_threshold(lattice),
        PercolationKind::Site => site_threshold(lattice),
    }
}

/// Diamond bond threshold 0.3880 (van der Marck, PRE 55, 1514 (1997),
/// memory): the reference against which the open-hop fraction of a
/// spin-ice state is compared (the monopoles hop on the diamond lattice).
pub const DIAMOND_BOND_THRESHOLD: f64 = 0.3880;

/// Whether spin `spin` carries a monopole of sign `charge_sign` onward
/// from tetrahedron `from_tet`, i.e. whether flipping it moves that charge
/// out of `from_tet` into the other tetrahedron of the spin.
///
/// Convention (derived from physics-reference §1): spin `i` points along
/// `σ_i e_a`, and `e_a` points out of up tetrahedra, so the spin points out
/// of its up tetrahedron when `σ = +1` and out of its down tetrahedron when
/// `σ = −1`. Flipping it lowers `Q` of the tetrahedron it points out of by
/// one and raises the other by one: **a positive charge hops along the
/// spin's arrow (out of the tetrahedron the spin points out of), a negative
/// charge against it.** `from_tet` must be one of the spin's tetrahedra.
pub fn carries_onward(
    lat: &Pyrochlore,
    sigma: &[i8],
    spin: usize,
    from_tet: usize,
    charge_sign: i8,
) -> bool {
    let points_out = (sigma[spin] > 0) == lat.is_up(from_tet);
    if charge_sign > 0 {
        points_out
    } else {
        !points_out
    }
}

/// The open hop directions of one spin-ice state under a dynamics rule.
///
/// The graph is [`PercolationGraph::pyrochlore_diamond`]: sites are the
/// tetrahedra (where monopoles live), bond `i` is spin `i`. A bond is
/// **open** when its spin's gate class (transverse field of its six
/// neighbours in this state, [`crate::gating`]) is one of the open (fast)
/// classes of the rule ([`crate::monopoles::open_classes`]). That is the
/// undirected static-snapshot graph; its open fraction is what is compared
/// with the diamond bond threshold. The directed graph adds the charge
/// direction ([`carries_onward`]): a monopole of sign `q` on `t` can hop
/// through spin `i` only if `i` is open *and* carries `q` onward from `t`.
///
/// Note (derived, physics-reference §5): no spin in an ice background has
/// `h⊥ = 0`, so the undirected fraction of a pure ice state is 1 under the
/// bimodal rule; what a monopole sees is measured by [`Self::monopole_exits`]
/// (monopoles of the state) and [`fresh_pair_exits`] (every pair one flip
/// can create).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct OpenHopGraph {
    /// Per spin (= per diamond bond): the gate class is open.
    pub open: Vec<bool>,
    /// Spins in each gate class.
    pub class_histogram: [u64; GATE_CLASS_COUNT],
    /// Which classes the rule treats as open.
    pub open_classes: [bool; GATE_CLASS_COUNT],
}

/// Hop directions seen by monopoles: over `monopoles` singly charged
/// tetrahedra, `open_exits` of their `4 × monopoles` bonds are open and
/// carry the charge onward.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct ExitCount {
    /// Singly charged tetrahedra examined.
    pub monopoles: u64,
    /// Open bonds that carry the charge onward, summed over them.
    pub open_exits: u64,
}

impl ExitCount {
    /// Open exits per bond of a monopole's tetrahedron (NaN without
    /// monopoles): the effective bond occupation a moving monopole sees, to
    /// compare with the diamond bond threshold. At most 3/4 (a single charge
    /// has three spins that carry it onward, derived).
    pub fn fraction(&self) -> f64 {
        if self.monopoles == 0 {
            f64::NAN
        } else {
            self.open_exits as f64 / (4 * self.monopoles) as f64
        }
    }

    /// Sum of two counts.
    pub fn combined(self, other: ExitCount) -> ExitCount {
        ExitCount {
            monopoles: self.monopoles + other.monopoles,
            open_exits: self.open_exits + other.open_exits,
        }
    }
}

fn check_state(lat: &Pyrochlore, sigma: &[i8]) -> Result<(), PercolationError> {
    if sigma.len() != lat.spin_count() || sigma.iter().any(|&s| s != 1 && s != -1) {
        return invalid(format!(
            "a spin-ice state of this lattice has {} entries of ±1 (got {} entries)",
            lat.spin_count(),
            sigma.len()
        ));
    }
    Ok(())
}

/// Open exits of a monopole of sign `q` on `tet` in `sigma` with per-spin
/// open flags `open`.
fn exits_of(lat: &Pyrochlore, sigma: &[i8], open: &[bool], tet: usize, q: i8) -> u64 {
    lat.spins_of(tet)
        .iter()
        .filter(|&&s| open[s as usize] && carries_onward(lat, sigma, s as usize, tet, q))
        .count() as u64
}

impl OpenHopGraph {
    /// The open bonds of state `sigma` (one ±1 per spin of `lat`) when the
    /// classes marked in `open_classes` are open.
    pub fn from_state(
        lat: &Pyrochlore,
        sigma: &[i8],
        open_classes: [bool; GATE_CLASS_COUNT],
    ) -> Result<Self, PercolationError> {
        check_state(lat, sigma)?;
        let classes = GateClasses::new(lat, sigma);
        Ok(Self {
            open: classes
                .as_slice()
                .iter()
                .map(|&c| open_classes[c as usize])
                .collect(),
            class_histogram: classes.histogram(),
            open_classes,
        })
    }

    /// Fraction of bonds (spins) that are open, directions ignored.
    pub fn open_bond_fraction(&self) -> f64 {
        self.open.iter().filter(|o| **o).count() as f64 / self.open.len().max(1) as f64
    }

    /// `open_bond_fraction − p_c(diamond bond)`: positive above threshold.
    pub fn distance_from_threshold(&self) -> f64 {
        self.open_bond_fraction() - DIAMOND_BOND_THRESHOLD
    }

    /// The undirected open bonds as a realisation of
    /// [`PercolationGraph::pyrochlore_diamond`] (bond index = spin index),
    /// for [`clusters`], [`chemical_growth`]-style searches and walkers.
    pub fn realisation(&self) -> Realisation {
        Realisation {
            kind: PercolationKind::Bond,
            open: self.open.clone(),
        }
    }

    /// Whether a monopole of sign `charge_sign` on `from_tet` can hop
    /// through `spin` (open and carrying the charge onward).
    pub fn hop_open(
        &self,
        lat: &Pyrochlore,
        sigma: &[i8],
        spin: usize,
        from_tet: usize,
        charge_sign: i8,
    ) -> bool {
        self.open[spin] && carries_onward(lat, sigma, spin, from_tet, charge_sign)
    }

    /// The directed graph for charges of sign `charge_sign`: one arc
    /// `(from, to)` of tetrahedra per open spin, along the spin's arrow for
    /// positive charges and against it for negative ones.
    pub fn directed_arcs(&self, lat: &Pyrochlore, sigma: &[i8], charge_sign: i8) -> Vec<[u32; 2]> {
        (0..self.open.len())
            .filter(|&s| self.open[s])
            .map(|s| {
                let [up, down] = lat.tetrahedra_of(s);
                if carries_onward(lat, sigma, s, up as usize, charge_sign) {
                    [up, down]
                } else {
                    [down, up]
                }
            })
            .collect()
    }

    /// Exits seen by the single charges (|Q| = 1) of the state itself.
    pub fn monopole_exits(&self, lat: &Pyrochlore, sigma: &[i8]) -> ExitCount {
        let mut count = ExitCount::default();
        for t in 0..lat.tetrahedron_count() {
            let q = crate::hamiltonian::charge(lat, sigma, t);
            if q.abs() == 1 {
                count.monopoles += 1;
                count.open_exits += exits_of(lat, sigma, &self.open, t, q);
            }
        }
        count
    }
}

/// Exits seen by freshly created monopoles: for every neutral tetrahedron
/// `t` of `sigma` and each of its four spins `r`, flip `r` (which puts a
/// charge on `t` and the opposite one on the tetrahedron across `r`), count
/// the open exits of the charge on `t` in that state (gates recomputed
/// after the flip), and flip back. Gives a monopole's view of a state with
/// no monopoles (an ice state), probing every tetrahedron.
pub fn fresh_pair_exits(
    lat: &Pyrochlore,
    sigma: &[i8],
    open_classes: [bool; GATE_CLASS_COUNT],
) -> Result<ExitCount, PercolationError> {
    check_state(lat, sigma)?;
    let mut scratch = sigma.to_vec();
    let mut count = ExitCount::default();
    for t in 0..lat.tetrahedron_count() {
        if crate::hamiltonian::charge(lat, sigma, t) != 0 {
            continue;
        }
        for &r in lat.spins_of(t) {
            let r = r as usize;
            scratch[r] = -scratch[r];
            let q = crate::hamiltonian::charge(lat, &scratch, t);
            let exits = lat
                .spins_of(t)
                .iter()
                .filter(|&&s| {
                    let s = s as usize;
                    carries_onward(lat, &scratch, s, t, q)
                        && open_classes[gate_class(lat, &scratch, s) as usize]
                })
                .count() as u64;
            count.monopoles += 1;
            count.open_exits += exits;
            scratch[r] = -scratch[r];
        }
    }
    Ok(count)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::RngStreams;

    fn run(kind: LatticeKind, l: usize, sweeps: usize, seed: u64) -> NewmanZiffRun {
        let g = PercolationGraph::lattice(kind, l).unwrap();
        let mut rng = RngStreams::new(seed).stream(l as u64);
        newman_ziff(
            &g,
            PercolationKind::Bond,
            sweeps,
            &mut rng,
            &Interrupt::new(),
        )
        .unwrap()
    }

    #[test]
    fn lattices_have_the_right_coordination_and_counts() {
        // Coordination 4 / 6 / 4 (derived from the lattice definitions).
        for (kind, l, sites, z) in [
            (LatticeKind::Square, 5, 25, 4),
            (LatticeKind::SimpleCubic, 3, 27, 6),
            (LatticeKind::Diamond, 2, 64, 4),
        ] {
            let g = PercolationGraph::lattice(kind, l).unwrap();
            assert_eq!(g.site_count(), sites);
            assert_eq!(g.edge_count(), sites * z / 2);
            for s in 0..sites {
                assert_eq!(g.incident(s).len(), z, "{kind:?} site {s}");
            }
        }
        assert!(PercolationGraph::lattice(LatticeKind::Diamond, 1).is_err());
        assert!(PercolationGraph::lattice(LatticeKind::Square, 1 << 20).is_err());
    }

    #[test]
    fn full_lattice_wraps_and_empty_does_not() {
        // At n = M every cluster has merged: s_max = N, wrapping certain.
        let r = run(LatticeKind::Diamond, 3, 4, 1);
        let full = r.at_probability(1.0).unwrap();
        assert_eq!(full.largest_cluster_fraction, 1.0);
        assert_eq!(full.wrapping_x, 1.0);
        assert_eq!(full.spanning_x, 1.0);
        let empty = r.at_probability(0.0).unwrap();
        assert_eq!(empty.wrapping_any, 0.0);
        assert!((empty.largest_cluster_fraction - 1.0 / 216.0).abs() < 1e-15);
        // A loop winding along x has net x displacement 4L (quarter units)
        // with steps of ±1, so it needs ≥ 4L bonds (derived); wrapping along
        // x is one kind of wrapping.
        assert!(r.first_wrap_x.iter().all(|&n| n as usize >= 12));
        assert!(r
            .first_wrap_x
            .iter()
            .zip(&r.first_wrap_any)
            .all(|(x, any)| x >= any));
    }

    #[test]
    fn pyrochlore_diamond_graph_percolates_like_the_diamond_lattice() {
        let lat = Pyrochlore::new(3).unwrap();
        let g = PercolationGraph::pyrochlore_diamond(&lat).unwrap();
        assert_eq!(g.site_count(), lat.tetrahedron_count());
        assert!(g
            .displacements
            .iter()
            .all(|d| d.iter().all(|v| v.abs() == 1)));
        let all_open = Realisation::bonds(&g, vec![true; g.edge_count()]).unwrap();
        assert_eq!(
            clusters(&g, &all_open).unwrap().largest_cluster_fraction,
            1.0
        );
        let mut rng = RngStreams::new(3).stream(0);
        let r = newman_ziff(&g, PercolationKind::Bond, 3, &mut rng, &Interrupt::new()).unwrap();
        assert!(r.first_wrap_x.iter().all(|&n| (n as usize) < r.units));
    }

    #[test]
    fn square_bond_threshold_is_one_half() {
        // Kesten, Commun. Math. Phys. 74, 41 (1980): p_c = 1/2 exactly.
        let runs: Vec<_> = [16, 32, 64]
            .iter()
            .map(|&l| run(LatticeKind::Square, l, 400, 11))
            .collect();
        let mut rng = RngStreams::new(5).stream(99);
        let c = crossing_estimate(
            &runs,
            CrossingObservable::WrappingX,
            0.35,
            0.65,
            40,
            &mut rng,
            &Interrupt::new(),
        )
        .unwrap();
        eprintln!("{c:?}");
        assert!((c.p_c - 0.5).abs() < 0.01, "{c:?}");
        assert!(c.error < 0.01, "{c:?}");
    }

    #[test]
    fn simple_cubic_bond_threshold() {
        // Lorenz & Ziff, PRE 57, 230 (1998): p_c = 0.248812.
        let runs: Vec<_> = [8, 12, 16]
            .iter()
            .map(|&l| run(LatticeKind::SimpleCubic, l, 600, 12))
            .collect();
        let mut rng = RngStreams::new(6).stream(99);
        let c = crossing_estimate(
            &runs,
            CrossingObservable::WrappingX,
            0.15,
            0.35,
            40,
            &mut rng,
            &Interrupt::new(),
        )
        .unwrap();
        eprintln!("{c:?}");
        assert!((c.p_c - 0.248812).abs() < 0.005, "{c:?}");
    }

    #[test]
    fn diamond_bond_threshold() {
        // van der Marck, PRE 55, 1514 (1997) (memory): p_c = 0.3880.
        let runs: Vec<_> = [6, 8, 10, 12]
            .iter()
            .map(|&l| run(LatticeKind::Diamond, l, 600, 13))
            .collect();
        let mut rng = RngStreams::new(7).stream(99);
        let c = crossing_estimate(
            &runs,
            CrossingObservable::WrappingX,
            0.3,
            0.5,
            40,
            &mut rng,
            &Interrupt::new(),
        )
        .unwrap();
        eprintln!("{c:?}");
        assert!((c.p_c - 0.3880).abs() < 0.005, "{c:?}");
    }

    #[test]
    fn chemical_dimension_at_threshold_on_diamond() {
        // d_ℓ = d_f/d_min = 2.5230/1.3756 = 1.834: Wang et al., PRE 87,
        // 052107 (2013) (memory); Zhou et al., PRE 86, 061101 (2012).
        // N(ℓ) is fitted with its leading 1/ℓ correction (common practice):
        // local slopes still climb from 1.5 to 1.75 over ℓ = 5..45 here.
        // Box: 32 cells ≫ the Euclidean reach of ℓ = 40 (≈ 15 bonds). Many
        // realisations with few seeds each: the spread between realisations
        // dominates (over seeds 17–21 with 96 × 50 seeds: 1.836–1.872).
        let g = PercolationGraph::lattice(LatticeKind::Diamond, 32).unwrap();
        let mut rng = RngStreams::new(17).stream(0);
        let growth = chemical_growth(
            &g,
            PercolationKind::Bond,
            0.3880,
            192,
            40,
            40,
            &mut rng,
            &Interrupt::new(),
        )
        .unwrap();
        let fit = crate::fit::fit_power_law_with_correction(
            &growth.distance,
            &growth.mean_sites,
            None,
            Some((4.0, 40.0)),
        )
        .unwrap();
        let d_l = fit.parameters[1];
        eprintln!("d_l = {d_l} ± {}", fit.standard_errors[1]);
        assert!(
            (d_l - 1.834).abs() < 0.08,
            "d_l = {d_l} ± {} ({} seeds)",
            fit.standard_errors[1],
            growth.seeds
        );
        // The survival probability of the growth decays as ℓ^{−(d − d_f)/d_min}
        // = ℓ^{−0.347} (derived from the same two exponents); loose check.
        let survival =
            (growth.surviving_seeds[32] as f64 / growth.surviving_seeds[4] as f64).ln() / 8f64.ln();
        assert!(
            (survival + 0.347).abs() < 0.1,
            "survival exponent {survival}"
        );
    }

    #[test]
    fn walkers_diffuse_on_the_full_lattice_and_slow_down_on_clusters() {
        // Full diamond lattice, blind ant with every bond open: each step
        // moves by a (±1,±1,±1) vector, so ⟨r²⟩ = 3t exactly in mean (derived).
        let g = PercolationGraph::lattice(LatticeKind::Diamond, 8).unwrap();
        let mut rng = RngStreams::new(23).stream(0);
        let full = Realisation::bonds(&g, vec![true; g.edge_count()]).unwrap();
        let walks = random_walks(
            &g,
            &full,
            &[0, 17, 300],
            300,
            400,
            40,
            &mut rng,
            &Interrupt::new(),
        )
        .unwrap();
        let last = *walks.mean_square_displacement.last().unwrap();
        // s.d. of the mean of r² over 300 walkers ≈ 3t·√(2/3)/√300 (Gaussian limit).
        assert!(
            (last / 1200.0 - 1.0).abs() < 4.0 * (2.0f64 / 3.0).sqrt() / 300f64.sqrt(),
            "{last}"
        );
        assert_eq!(walks.x_series[0].len(), 11);
        // At p_c walks on the largest cluster are slower (sub-diffusive; common practice).
        let at_pc = Realisation::random(&g, PercolationKind::Bond, 0.388, &mut rng).unwrap();
        let stats = clusters(&g, &at_pc).unwrap();
        let starts: Vec<usize> = (0..g.site_count())
            .filter(|&s| stats.label[s] == stats.largest_label)
            .take(50)
            .collect();
        let slow = random_walks(
            &g,
            &at_pc,
            &starts,
            300,
            400,
            40,
            &mut rng,
            &Interrupt::new(),
        )
        .unwrap();
        assert!(*slow.mean_square_displacement.last().unwrap() < 0.5 * last);
    }

    #[test]
    fn cluster_distribution_counts_every_site_once() {
        let g = PercolationGraph::lattice(LatticeKind::SimpleCubic, 6).unwrap();
        let mut rng = RngStreams::new(4).stream(0);
        let r = Realisation::random(&g, PercolationKind::Site, 0.3, &mut rng).unwrap();
        let stats = clusters(&g, &r).unwrap();
        let total: u64 = stats.size_distribution.iter().map(|(s, n)| s * n).sum();
        assert_eq!(total as usize, r.open.iter().filter(|o| **o).count());
        assert!(Realisation::bonds(&g, vec![true; 3]).is_err());
        let wrong = Realisation {
            kind: PercolationKind::Bond,
            open: vec![true; 5],
        };
        assert!(clusters(&g, &wrong).is_err());
        assert!(random_walks(&g, &wrong, &[0], 1, 10, 1, &mut rng, &Interrupt::new()).is_err());
    }

    #[test]
    fn binomial_window_is_normalised_with_the_right_mean() {
        // Mean Mp of the binomial distribution (handbook).
        let (first, w) = binomial_window(10_000, 0.3);
        let sum: f64 = w.iter().sum();
        let mean: f64 = w
            .iter()
            .enumerate()
            .map(|(k, w)| (first + k) as f64 * w)
            .sum();
        assert!((sum - 1.0).abs() < 1e-12);
        assert!((mean - 3000.0).abs() < 1e-6);
    }

    fn site_crossing(kind: LatticeKind, sizes: &[usize], sweeps: usize, lo: f64, hi: f64) -> f64 {
        let runs: Vec<_> = sizes
            .iter()
            .map(|&l| {
                let g = PercolationGraph::lattice(kind, l).unwrap();
                let mut rng = RngStreams::new(31).stream(l as u64);
                newman_ziff(
                    &g,
                    PercolationKind::Site,
                    sweeps,
                    &mut rng,
                    &Interrupt::new(),
                )
                .unwrap()
            })
            .collect();
        let mut rng = RngStreams::new(32).stream(99);
        let c = crossing_estimate(
            &runs,
            CrossingObservable::WrappingX,
            lo,
            hi,
            20,
            &mut rng,
            &Interrupt::new(),
        )
        .unwrap();
        eprintln!("{kind:?} site: {c:?}");
        c.p_c
    }

    #[test]
    fn square_site_threshold() {
        // Newman & Ziff, PRL 85, 4104 (2000): p_c = 0.592746.
        let p = site_crossing(LatticeKind::Square, &[16, 32, 64], 400, 0.45, 0.75);
        assert!((p - 0.592746).abs() < 0.01, "{p}");
        assert!((site_threshold(LatticeKind::Square) - 0.592746).abs() < 1e-12);
    }

    #[test]
    fn simple_cubic_and_diamond_site_thresholds() {
        // Deng & Blöte, PRE 72, 016126 (2005): 0.311608 (simple cubic);
        // van der Marck, PRE 55, 1514 (1997) (memory): 0.4301 (diamond).
        let sc = site_crossing(LatticeKind::SimpleCubic, &[8, 12, 16], 400, 0.2, 0.45);
        assert!((sc - 0.311608).abs() < 0.006, "{sc}");
        let diamond = site_crossing(LatticeKind::Diamond, &[6, 8, 10], 400, 0.32, 0.55);
        assert!((diamond - 0.4301).abs() < 0.006, "{diamond}");
    }

    #[test]
    fn interrupted_walks_and_bootstraps_keep_what_they_have() {
        let g = PercolationGraph::lattice(LatticeKind::Diamond, 3).unwrap();
        let full = Realisation::bonds(&g, vec![true; g.edge_count()]).unwrap();
        let mut rng = RngStreams::new(2).stream(0);
        let stop = Interrupt::new();
        stop.request();
        assert_eq!(
            random_walks(&g, &full, &[0], 5, 100, 10, &mut rng, &stop),
            Err(PercolationError::Interrupted)
        );
        let runs = [
            run(LatticeKind::Square, 8, 50, 1),
            run(LatticeKind::Square, 16, 50, 2),
        ];
        let c = crossing_estimate(
            &runs,
            CrossingObservable::WrappingX,
            0.3,
            0.7,
            30,
            &mut rng,
            &stop,
        )
        .unwrap();
        assert!(c.interrupted);
        assert_eq!(c.bootstrap_samples, 0);
        assert!(c.p_c > 0.3 && c.p_c < 0.7);
        let walks = random_walks(&g, &full, &[0], 4, 100, 10, &mut rng, &Interrupt::new()).unwrap();
        assert_eq!((walks.walkers, walks.interrupted), (4, false));
    }

    mod open_hops {
        use super::super::*;
        use crate::gating::{AttemptTimes, SlowGate, CLOSED_GATE_CLASS};
        use crate::metropolis::{initial_configuration, Start};
        use crate::monopoles::open_classes;
        use crate::rng::RngStreams;

        fn random_state(lat: &Pyrochlore, seed: u64) -> Vec<i8> {
            initial_configuration(lat, Start::Random, &mut RngStreams::new(seed).stream(0))
        }

        #[test]
        fn an_all_open_rule_opens_every_bond() {
            // Uniform rates: every class within a factor 1 of the fastest, so every
            // bond is open (exact); a single charge has exactly three spins that carry
            // it onward (derived: Q = ±1 is three out / one in, or the reverse).
            let lat = Pyrochlore::new(2).unwrap();
            let sigma = random_state(&lat, 5);
            let open = open_classes(&AttemptTimes::uniform(1e-6).unwrap(), 1.0);
            assert_eq!(open, [true; GATE_CLASS_COUNT]);
            let g = OpenHopGraph::from_state(&lat, &sigma, open).unwrap();
            assert_eq!(g.open_bond_fraction(), 1.0);
            assert!((g.distance_from_threshold() - (1.0 - 0.3880)).abs() < 1e-12);
            let exits = g.monopole_exits(&lat, &sigma);
            assert!(exits.monopoles > 0);
            assert_eq!(exits.open_exits, 3 * exits.monopoles);
            assert_eq!(exits.fraction(), 0.75);
            let fresh = fresh_pair_exits(&lat, &sigma, open).unwrap();
            assert_eq!(fresh.open_exits, 3 * fresh.monopoles);
            let graph = PercolationGraph::pyrochlore_diamond(&lat).unwrap();
            let c = clusters(&graph, &g.realisation()).unwrap();
            assert_eq!(c.largest_cluster_fraction, 1.0);
        }

        #[test]
        fn bimodal_frozen_rule_opens_the_spins_not_in_class_zero() {
            // Exact by definition: open ⇔ class ≠ 0; counted independently with
            // `gate_class` spin by spin.
            let lat = Pyrochlore::new(3).unwrap();
            let sigma = random_state(&lat, 9);
            let times = AttemptTimes::bimodal(1e-6, SlowGate::Frozen).unwrap();
            let open = open_classes(&times, 10.0);
            assert_eq!(open, [false, true, true, true]);
            let g = OpenHopGraph::from_state(&lat, &sigma, open).unwrap();
            let not_closed = (0..lat.spin_count())
                .filter(|&i| gate_class(&lat, &sigma, i) != CLOSED_GATE_CLASS)
                .count();
            assert_eq!(
                g.open_bond_fraction(),
                not_closed as f64 / lat.spin_count() as f64
            );
            assert!(g.open_bond_fraction() < 1.0);
            assert_eq!(
                g.class_histogram.iter().sum::<u64>() as usize,
                lat.spin_count()
            );
            // In an ice state no spin has h⊥ = 0 (derived, physics-reference §5).
            let ice =
                initial_configuration(&lat, Start::IceState, &mut RngStreams::new(1).stream(0));
            let ice_graph = OpenHopGraph::from_state(&lat, &ice, open).unwrap();
            assert_eq!(ice_graph.open_bond_fraction(), 1.0);
            assert!(OpenHopGraph::from_state(&lat, &ice[1..], open).is_err());
        }

        #[test]
        fn a_positive_charge_hops_along_the_spin_arrow() {
            // Q = (n_out − n_in)/2 (physics-reference §1): flipping a spin that
            // carries +1 onward from t lowers Q_t by one and raises the other
            // tetrahedron's Q by one (derived, checked here against `charge`).
            let lat = Pyrochlore::new(2).unwrap();
            let mut sigma = random_state(&lat, 3);
            let open = [true; GATE_CLASS_COUNT];
            let g = OpenHopGraph::from_state(&lat, &sigma, open).unwrap();
            let arcs = g.directed_arcs(&lat, &sigma, 1);
            assert_eq!(arcs.len(), lat.spin_count());
            for spin in 0..lat.spin_count() {
                let [from, to] = arcs[spin];
                assert!(g.hop_open(&lat, &sigma, spin, from as usize, 1));
                assert!(g.hop_open(&lat, &sigma, spin, to as usize, -1));
                assert!(!g.hop_open(&lat, &sigma, spin, to as usize, 1));
                let before =
                    [from, to].map(|t| crate::hamiltonian::charge(&lat, &sigma, t as usize));
                sigma[spin] = -sigma[spin];
                let after =
                    [from, to].map(|t| crate::hamiltonian::charge(&lat, &sigma, t as usize));
                sigma[spin] = -sigma[spin];
                assert_eq!([after[0] - before[0], after[1] - before[1]], [-1, 1]);
            }
        }
    }
}
