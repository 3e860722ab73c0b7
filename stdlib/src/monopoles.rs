//! Monopole tracking through the kinetics, mean-square displacement, and the
//! sites a monopole can reach through open (fast) spins (physics-reference
//! §5, §8).
//!
//! ## Identities
//! A monopole is one unit of charge `Q = ±1` on a tetrahedron (a doubly
//! charged tetrahedron holds two monopoles of the same sign). A flip of spin
//! `s` moves one unit of positive charge from the tetrahedron `X` whose
//! charge drops by one to the other one, `Y`, whose charge rises by one.
//! With `q_X`, `q_Y` the charges before the flip:
//! * `q_X > 0`, `q_Y ≥ 0`: a positive monopole hops `X → Y`;
//! * `q_X ≤ 0`, `q_Y < 0`: a negative monopole hops `Y → X`;
//! * `q_X > 0`, `q_Y < 0`: a positive and a negative monopole annihilate;
//! * `q_X ≤ 0`, `q_Y ≥ 0`: a pair is created, `+` on `Y`, `−` on `X`.
//!
//! These four cases are exhaustive. **Pairing rule** for the only ambiguity,
//! a doubly charged tetrahedron: the monopole with the smallest identity (the
//! oldest) is the one that hops or annihilates. Identities count up from 0
//! in order of creation (the monopoles of the initial state are numbered by
//! tetrahedron index).
//!
//! Positions are tetrahedron centres (diamond sites), unwrapped across the
//! periodic boundary by adding the minimum-image displacement of every hop
//! (a diamond bond, √3/4 a, shorter than half of any box).
//!
//! ## Reachable sites
//! [`reachable_sites`] counts the diamond sites a monopole can reach within
//! `n` hops through open spins, in two labelled modes ([`ReachMode`]); see
//! there for what each mode assumes.

use crate::control::{Interrupt, Progress, ProgressFn};
use crate::dynamics::{Execution, FlipEvent, FlipObserver, KineticEngine};
use crate::figure::{FigureError, PALETTE};
use crate::gating::{gate_class, AttemptTimes, GATE_CLASS_COUNT};
use crate::lattice::Pyrochlore;
use serde::{Deserialize, Serialize};
use std::collections::{HashSet, VecDeque};

/// No monopole in this slot.
const EMPTY: u32 = u32::MAX;

/// One tracked monopole.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct MonopoleRecord {
    /// Identity (creation order).
    pub id: u32,
    /// +1 or −1.
    pub charge: i8,
    /// Creation time (s; 0 for monopoles present at the start).
    pub born_seconds: f64,
    /// Annihilation time (s), `None` if alive at the end.
    pub died_seconds: Option<f64>,
    /// Hops made.
    pub hops: u64,
    /// Distinct diamond sites visited (including the birth site).
    pub distinct_sites: usize,
    /// Index into the history's time grid of `positions[0]`.
    pub first_sample: usize,
    /// Unwrapped position (units of `a`) at each grid time while alive.
    pub positions: Vec<[f64; 3]>,
}

/// Everything recorded about monopoles during a kinetics run.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct MonopoleHistory {
    /// The sample grid (s).
    pub times_seconds: Vec<f64>,
    /// Every monopole seen.
    pub monopoles: Vec<MonopoleRecord>,
    /// Hops of existing monopoles.
    pub hops: u64,
    /// Pair creations.
    pub creations: u64,
    /// Pair annihilations.
    pub annihilations: u64,
    /// Hops by the gate class of the hop spin (class 0: h⊥ = 0).
    pub hop_gate_classes: [u64; GATE_CLASS_COUNT],
    /// Stopped early on interrupt.
    pub interrupted: bool,
}

/// A point of the mean-square displacement curve.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct DisplacementPoint {
    /// Lag (s).
    pub lag_seconds: f64,
    /// ⟨|r(t+lag) − r(t)|²⟩ over monopoles and time origins (units of a²).
    pub mean_square_displacement: f64,
    /// Number of (monopole, origin) pairs averaged.
    pub pairs: u64,
}

impl MonopoleHistory {
    /// Mean-square displacement for lags `1..=max_lag` grid steps, averaged
    /// over monopoles and all time origins at which the monopole lives at
    /// both ends.
    pub fn mean_square_displacement(&self, max_lag: usize) -> Vec<DisplacementPoint> {
        let dt = if self.times_seconds.len() > 1 {
            self.times_seconds[1] - self.times_seconds[0]
        } else {
            0.0
        };
        (1..=max_lag)
            .map(|lag| {
                let mut sum = 0.0;
                let mut pairs = 0u64;
                for m in &self.monopoles {
                    if m.positions.len() > lag {
                        for (a, b) in m.positions.iter().zip(&m.positions[lag..]) {
                            sum += (0..3).map(|c| (b[c] - a[c]).powi(2)).sum::<f64>();
                            pairs += 1;
                        }
                    }
                }
                DisplacementPoint {
                    lag_seconds: lag as f64 * dt,
                    mean_square_displacement: if pairs > 0 { sum / pairs as f64 } else { 0.0 },
                    pairs,
                }
            })
            .collect()
    }
}

struct Live {
    tet: u32,
    position: [f64; 3],
    visited: HashSet<u32>,
}

/// Follows monopole identities flip by flip (a [`FlipObserver`]).
pub struct MonopoleTracker<'a> {
    lat: &'a Pyrochlore,
    /// Up to two monopole ids per tetrahedron.
    occupants: Vec<[u32; 2]>,
    /// Charge per tetrahedron (kept from the flips).
    charge: Vec<i8>,
    records: Vec<MonopoleRecord>,
    live: Vec<Option<Live>>,
    hops: u64,
    creations: u64,
    annihilations: u64,
    hop_gate_classes: [u64; GATE_CLASS_COUNT],
}

impl<'a> MonopoleTracker<'a> {
    /// Start from the charges of `sigma`.
    pub fn new(lat: &'a Pyrochlore, sigma: &[i8]) -> Self {
        let tets = lat.tetrahedron_count();
        let mut tracker = Self {
            lat,
            occupants: vec![[EMPTY; 2]; tets],
            charge: vec![0; tets],
            records: Vec::new(),
            live: Vec::new(),
            hops: 0,
            creations: 0,
            annihilations: 0,
            hop_gate_classes: [0; GATE_CLASS_COUNT],
        };
        for t in 0..tets {
            let q = crate::hamiltonian::charge(lat, sigma, t);
            for _ in 0..q.unsigned_abs() {
                tracker.spawn(t as u32, q.signum(), 0.0);
            }
            tracker.charge[t] = q;
        }
        tracker
    }

    fn spawn(&mut self, tet: u32, charge: i8, time: f64) {
        let id = self.records.len() as u32;
        let slot = &mut self.occupants[tet as usize];
        if slot[0] == EMPTY {
            slot[0] = id;
        } else {
            slot[1] = id;
        }
        let mut visited = HashSet::new();
        visited.insert(tet);
        self.records.push(MonopoleRecord {
            id,
            charge,
            born_seconds: time,
            died_seconds: None,
            hops: 0,
            distinct_sites: 1,
            first_sample: usize::MAX,
            positions: Vec::new(),
        });
        self.live.push(Some(Live {
            tet,
            position: self.lat.tetrahedron_centre(tet as usize),
            visited,
        }));
    }

    /// Remove the oldest occupant of `tet` (the pairing rule); returns its id.
    fn take_oldest(&mut self, tet: u32) -> u32 {
        let slot = &mut self.occupants[tet as usize];
        let (a, b) = (slot[0], slot[1]);
        let oldest = if b != EMPTY && b < a { b } else { a };
        if oldest == a {
            *slot = [b, EMPTY];
        } else {
            *slot = [a, EMPTY];
        }
        oldest
    }

    fn place(&mut self, tet: u32, id: u32) {
        let slot = &mut self.occupants[tet as usize];
        if slot[0] == EMPTY {
            slot[0] = id;
        } else {
            slot[1] = id;
        }
    }

    fn kill(&mut self, id: u32, time: f64) {
        self.live[id as usize] = None;
        self.records[id as usize].died_seconds = Some(time);
    }

    fn hop(&mut self, id: u32, from: u32, to: u32) {
        self.place(to, id);
        let live = self.live[id as usize]
            .as_mut()
            .expect("occupants are alive (tracker invariant)");
        let d = self.lat.displacement(
            self.lat.tetrahedron_centre(from as usize),
            self.lat.tetrahedron_centre(to as usize),
        );
        for (p, dc) in live.position.iter_mut().zip(d) {
            *p += dc;
        }
        live.tet = to;
        live.visited.insert(to);
        let r = &mut self.records[id as usize];
        r.hops += 1;
        r.distinct_sites = live.visited.len();
        self.hops += 1;
    }

    /// Record positions of the living monopoles as grid sample `index`.
    pub fn sample(&mut self, index: usize) {
        for (r, l) in self.records.iter_mut().zip(&self.live) {
            if let Some(l) = l {
                if r.first_sample == usize::MAX {
                    r.first_sample = index;
                }
                r.positions.push(l.position);
            }
        }
    }

    /// Monopole ids on tetrahedron `tet` (0, 1 or 2 of them).
    pub fn occupants(&self, tet: usize) -> Vec<u32> {
        self.occupants[tet]
            .iter()
            .copied()
            .filter(|&x| x != EMPTY)
            .collect()
    }

    /// Records so far.
    pub fn records(&self) -> &[MonopoleRecord] {
        &self.records
    }

    /// Hops counted by the gate class of the hop spin.
    pub fn hop_gate_classes(&self) -> [u64; GATE_CLASS_COUNT] {
        self.hop_gate_classes
    }

    /// Hops so far.
    pub fn hop_count(&self) -> u64 {
        self.hops
    }

    /// Turn into a history over `times_seconds`.
    pub fn into_history(self, times_seconds: Vec<f64>, interrupted: bool) -> MonopoleHistory {
        let mut monopoles = self.records;
        for m in &mut monopoles {
            if m.first_sample == usize::MAX {
                m.first_sample = times_seconds.len();
            }
        }
        MonopoleHistory {
            times_seconds,
            monopoles,
            hops: self.hops,
            creations: self.creations,
            annihilations: self.annihilations,
            hop_gate_classes: self.hop_gate_classes,
            interrupted,
        }
    }
}

impl FlipObserver for MonopoleTracker<'_> {
    fn on_flip(&mut self, event: &FlipEvent<'_>) {
        let [up, down] = self.lat.tetrahedra_of(event.spin);
        // Charge after the flip, from the engine's tetrahedron sums.
        let q_of = |t: u32| -> i8 {
            let s = event.state.tetrahedron_sums[t as usize] / 2;
            if (t as usize) < self.lat.tetrahedron_count() / 2 {
                s
            } else {
                -s
            }
        };
        let (new_up, new_down) = (q_of(up), q_of(down));
        let (old_up, old_down) = (self.charge[up as usize], self.charge[down as usize]);
        self.charge[up as usize] = new_up;
        self.charge[down as usize] = new_down;
        // X loses one unit of positive charge, Y gains it.
        let (x, y, qx, qy) = if new_up < old_up {
            (up, down, old_up, old_down)
        } else {
            (down, up, old_down, old_up)
        };
        let time = event.time_seconds;
        if qx > 0 && qy >= 0 {
            let id = self.take_oldest(x);
            self.hop(id, x, y);
            self.hop_gate_classes[event.gate_class as usize] += 1;
        } else if qx <= 0 && qy < 0 {
            let id = self.take_oldest(y);
            self.hop(id, y, x);
            self.hop_gate_classes[event.gate_class as usize] += 1;
        } else if qx > 0 && qy < 0 {
            let a = self.take_oldest(x);
            let b = self.take_oldest(y);
            self.kill(a, time);
            self.kill(b, time);
            self.annihilations += 1;
        } else {
            self.spawn(y, 1, time);
            self.spawn(x, -1, time);
            self.creations += 1;
        }
    }
}

/// Run the kinetics for `duration_seconds`, tracking monopoles and sampling
/// their positions every `sample_interval_seconds`. Interrupt is polled
/// between chunks of 2^18 steps; on interrupt the history so far is returned
/// (marked). Progress counts samples.
/// Works with every engine ([`KineticEngine`]): nearest-neighbour, exchange
/// shells or dipolar.
pub fn track_monopoles<'a, K: KineticEngine<'a>>(
    engine: &mut K,
    duration_seconds: f64,
    sample_interval_seconds: f64,
    execution: Execution,
    interrupt: &Interrupt,
    progress: ProgressFn<'_>,
) -> Result<MonopoleHistory, crate::dynamics::KineticsError> {
    use crate::dynamics::KineticsError;
    if !(duration_seconds >= 0.0 && duration_seconds.is_finite()) {
        return Err(KineticsError::InvalidDuration(duration_seconds));
    }
    if !(sample_interval_seconds > 0.0 && sample_interval_seconds.is_finite()) {
        return Err(KineticsError::InvalidSampleInterval(
            sample_interval_seconds,
        ));
    }
    let steps = (duration_seconds / sample_interval_seconds * (1.0 + 1e-12)).floor();
    if steps + 1.0 > crate::dynamics::MAX_SAMPLES as f64 {
        return Err(KineticsError::TooManySamples {
            samples: (steps + 1.0) as u64,
        });
    }
    let samples = steps as usize + 1;
    let lat = engine.lattice();
    let mut tracker = MonopoleTracker::new(lat, engine.sigma());
    let t0 = engine.time_seconds();
    let mut times = Vec::with_capacity(samples);
    tracker.sample(0);
    times.push(0.0);
    let mut interrupted = false;
    'grid: for k in 1..samples {
        let target = t0 + k as f64 * sample_interval_seconds;
        loop {
            if interrupt.is_requested() {
                interrupted = true;
                break 'grid;
            }
            if engine.advance(target, execution, 1 << 18, &mut tracker) {
                break;
            }
        }
        tracker.sample(k);
        // The grid time (the attempt clock may stop a rounding short of it).
        times.push(k as f64 * sample_interval_seconds);
        if k % (samples / 100).max(1) == 0 {
            progress(&Progress {
                label: "monopole tracking: samples of simulated time".into(),
                done: k as u64 + 1,
                total: samples as u64,
            });
        }
    }
    Ok(tracker.into_history(times, interrupted))
}

/// How [`reachable_sites`] treats the gates along a path.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum ReachMode {
    /// Path-dependent: a hop must go through a spin that carries the
    /// monopole's charge onward (pointing out of the current tetrahedron for
    /// `+`, into it for `−`) and is open, both judged in the snapshot *with
    /// the incoming hop's spin flipped*. The search runs over (site, incoming
    /// spin) states. A hop straight back through the incoming spin is not
    /// followed (it restores the previous state). Approximation: only the
    /// last hop's flip is applied; earlier flips of the same path are
    /// ignored, which matters only when a path returns next to its own trail
    /// (around a hexagon, ≥ 6 hops).
    /// Energies are not considered (in a dilute monopole gas the destinations
    /// are almost always neutral).
    PathDependent,
    /// Static snapshot: bond percolation on the diamond lattice with the
    /// bonds whose spin is open in the current configuration, directions and
    /// flips ignored (breadth-first search on the current gates).
    StaticSnapshot,
}

/// Which gate classes count as open: those whose attempt time is within a
/// factor `slower_than_fastest_by` of the fastest.
pub fn open_classes(times: &AttemptTimes, slower_than_fastest_by: f64) -> [bool; GATE_CLASS_COUNT] {
    let fastest = times.shortest_seconds();
    times
        .attempt_time_seconds
        .map(|t| t <= fastest * slower_than_fastest_by)
}

/// One reachable cluster: sites with their hop distance and unwrapped
/// position relative to the start.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ReachableCluster {
    /// Mode used.
    pub mode: ReachMode,
    /// Start tetrahedron.
    pub start_tetrahedron: usize,
    /// `sites_within[n]` = distinct sites reachable in ≤ n hops (n = 0..=max).
    pub sites_within: Vec<u64>,
    /// Reached sites: (tetrahedron, hops, position in units of a, unwrapped
    /// from the start).
    pub sites: Vec<(u32, u32, [f64; 3])>,
    /// Bonds used (indices into `sites`).
    pub bonds: Vec<(u32, u32)>,
}

/// Diamond sites a monopole of `charge_sign` on `start_tetrahedron` can reach
/// within `max_hops` hops through spins of the `open` gate classes.
pub fn reachable_sites(
    lat: &Pyrochlore,
    sigma: &[i8],
    start_tetrahedron: usize,
    charge_sign: i8,
    open: [bool; GATE_CLASS_COUNT],
    max_hops: u32,
    mode: ReachMode,
) -> ReachableCluster {
    let tets = lat.tetrahedron_count();
    let mut site_hops = vec![u32::MAX; tets];
    let mut site_index = vec![u32::MAX; tets];
    let mut sites: Vec<(u32, u32, [f64; 3])> = Vec::new();
    let mut bonds = Vec::new();
    let start_pos = lat.tetrahedron_centre(start_tetrahedron);
    site_hops[start_tetrahedron] = 0;
    site_index[start_tetrahedron] = 0;
    sites.push((start_tetrahedron as u32, 0, [0.0; 3]));
    // State: (tet, incoming spin or u32::MAX, hops). For the static mode the
    // incoming spin is irrelevant and states are sites.
    let mut seen: HashSet<(u32, u32)> = HashSet::new();
    let mut queue: VecDeque<(u32, u32, u32)> = VecDeque::new();
    queue.push_back((start_tetrahedron as u32, u32::MAX, 0));
    seen.insert((start_tetrahedron as u32, u32::MAX));
    let mut scratch = sigma.to_vec();
    while let Some((t, incoming, hops)) = queue.pop_front() {
        if hops >= max_hops {
            continue;
        }
        if incoming != u32::MAX {
            scratch[incoming as usize] = -scratch[incoming as usize];
        }
        let up = lat.is_up(t as usize);
        let nbs = lat.diamond_neighbours(t as usize);
        for (k, &s) in lat.spins_of(t as usize).iter().enumerate() {
            let s = s as usize;
            if mode == ReachMode::PathDependent && s as u32 == incoming {
                // Hopping back through the incoming spin restores the state
                // before the last hop, already searched with one hop fewer;
                // followed as if it were a fresh hop, it would apply the
                // incoming flip to the wrong configuration and open gates
                // that are shut (spurious states).
                continue;
            }
            let passable = match mode {
                ReachMode::StaticSnapshot => open[gate_class(lat, sigma, s) as usize],
                ReachMode::PathDependent => {
                    // Out of t means σ = +1 on an up and −1 on a down tetrahedron.
                    let out = (scratch[s] > 0) == up;
                    let carries = if charge_sign > 0 { out } else { !out };
                    carries && open[gate_class(lat, &scratch, s) as usize]
                }
            };
            if !passable {
                continue;
            }
            let u = nbs[k];
            let key = match mode {
                ReachMode::StaticSnapshot => (u, u32::MAX),
                ReachMode::PathDependent => (u, s as u32),
            };
            if seen.insert(key) {
                queue.push_back((key.0, key.1, hops + 1));
            }
            if site_hops[u as usize] == u32::MAX {
                site_hops[u as usize] = hops + 1;
                let from = site_index[t as usize] as usize;
                let d = lat.displacement(
                    lat.tetrahedron_centre(t as usize),
                    lat.tetrahedron_centre(u as usize),
                );
                let p = sites[from].2;
                site_index[u as usize] = sites.len() as u32;
                bonds.push((from as u32, sites.len() as u32));
                sites.push((u, hops + 1, [p[0] + d[0], p[1] + d[1], p[2] + d[2]]));
            }
        }
        if incoming != u32::MAX {
            scratch[incoming as usize] = -scratch[incoming as usize];
        }
    }
    let _ = start_pos;
    let mut sites_within = vec![0u64; max_hops as usize + 1];
    for &(_, h, _) in &sites {
        sites_within[h as usize] += 1;
    }
    for n in 1..sites_within.len() {
        sites_within[n] += sites_within[n - 1];
    }
    ReachableCluster {
        mode,
        start_tetrahedron,
        sites_within,
        sites,
        bonds,
    }
}

/// Mean and standard error of `sites_within[n]` over clusters (all with the
/// same `max_hops`).
pub fn average_growth(clusters: &[ReachableCluster]) -> Vec<crate::observe::Estimate> {
    let Some(first) = clusters.first() else {
        return Vec::new();
    };
    let len = first.sites_within.len();
    let k = clusters.len() as f64;
    (0..len)
        .map(|n| {
            let xs: Vec<f64> = clusters
                .iter()
                .map(|c| c.sites_within.get(n).copied().unwrap_or(0) as f64)
                .collect();
            let mean = xs.iter().sum::<f64>() / k;
            let var = if clusters.len() > 1 {
                xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (k - 1.0)
            } else {
                0.0
            };
            crate::observe::Estimate::new(mean, (var / k).sqrt())
        })
        .collect()
}

/// Clusters from every monopole of a snapshot.
pub fn reachable_from_all_monopoles(
    lat: &Pyrochlore,
    sigma: &[i8],
    open: [bool; GATE_CLASS_COUNT],
    max_hops: u32,
    mode: ReachMode,
) -> Vec<ReachableCluster> {
    (0..lat.tetrahedron_count())
        .filter_map(|t| {
            let q = crate::hamiltonian::charge(lat, sigma, t);
            (q.abs() == 1).then(|| reachable_sites(lat, sigma, t, q, open, max_hops, mode))
        })
        .collect()
}

/// A projected-3D SVG picture of a reachable cluster: sites coloured by hop
/// distance (bands of our palette), bonds as lines, an oblique projection.
pub fn render_cluster_svg(
    cluster: &ReachableCluster,
    width_px: u32,
    height_px: u32,
) -> Result<String, FigureError> {
    use plotters::prelude::*;
    if !(crate::figure::MIN_SIZE_PX..=crate::figure::MAX_SIZE_PX).contains(&width_px)
        || !(crate::figure::MIN_SIZE_PX..=crate::figure::MAX_SIZE_PX).contains(&height_px)
    {
        return Err(FigureError::InvalidSize {
            width_px,
            height_px,
        });
    }
    // Oblique projection: x' = x − y·cos30°, y' = z + y·sin30° — the depth
    // axis y recedes up and to the left.
    let project =
        |p: [f64; 3]| -> (f64, f64) { (p[0] - 0.866 * p[1] * 0.6, p[2] + 0.5 * p[1] * 0.6) };
    let pts: Vec<(f64, f64)> = cluster.sites.iter().map(|s| project(s.2)).collect();
    let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for &(x, y) in &pts {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    let pad = 0.1 * ((x1 - x0).max(y1 - y0)).max(0.5);
    let max_hops = cluster.sites.iter().map(|s| s.1).max().unwrap_or(0).max(1);
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (width_px, height_px)).into_drawing_area();
        root.fill(&WHITE)
            .map_err(|e| FigureError::Drawing(e.to_string()))?;
        let title = format!(
            "reachable sites ({}), {} sites within {} hops",
            match cluster.mode {
                ReachMode::PathDependent => "path-dependent",
                ReachMode::StaticSnapshot => "static snapshot",
            },
            cluster.sites.len(),
            max_hops
        );
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 18))
            .margin(10)
            .build_cartesian_2d((x0 - pad)..(x1 + pad), (y0 - pad)..(y1 + pad))
            .map_err(|e| FigureError::Drawing(e.to_string()))?;
        let bond_colour = RGBColor(0xb0, 0xb0, 0xb0);
        chart
            .draw_series(cluster.bonds.iter().map(|&(a, b)| {
                PathElement::new(vec![pts[a as usize], pts[b as usize]], bond_colour)
            }))
            .map_err(|e| FigureError::Drawing(e.to_string()))?;
        chart
            .draw_series(cluster.sites.iter().zip(&pts).map(|(s, &p)| {
                let band = (s.1 as usize * (PALETTE.len() - 1)) / max_hops as usize;
                let radius = if s.1 == 0 { 6 } else { 3 };
                Circle::new(p, radius, PALETTE[band].filled())
            }))
            .map_err(|e| FigureError::Drawing(e.to_string()))?;
        root.present()
            .map_err(|e| FigureError::Drawing(e.to_string()))?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::control::ignore_progress;
    use crate::dynamics::{AcceptanceRule, Kinetics, NearestNeighbourFlipEnergy};
    use crate::gating::test_support::random_ice_state;
    use crate::hamiltonian::{charge, NearestNeighbourIce};
    use crate::rng::RngStreams;
    use rand::Rng;

    /// A disordered ice state with one ± pair separated by a string of
    /// `length` flipped spins (a self-avoiding walk leaving each tetrahedron
    /// on an "out" spin; flipping it puts −1 at the start and +1 at the end).
    fn separated_pair(lat: &Pyrochlore, seed: u64, length: usize) -> Vec<i8> {
        let mut rng = RngStreams::new(seed).stream(0);
        loop {
            let mut sigma = random_ice_state(lat, &mut rng, 300);
            let mut t = rng.gen_range(0..lat.tetrahedron_count());
            let mut visited = vec![t];
            let mut path = Vec::new();
            let mut ok = true;
            for _ in 0..length {
                let out_sign = if lat.is_up(t) { 1 } else { -1 };
                let outs: Vec<usize> = lat
                    .spins_of(t)
                    .iter()
                    .map(|&s| s as usize)
                    .filter(|&s| sigma[s] == out_sign)
                    .collect();
                let s = outs[rng.gen_range(0..outs.len())];
                let [up, down] = lat.tetrahedra_of(s);
                let next = if up as usize == t { down } else { up } as usize;
                if visited.contains(&next) {
                    ok = false;
                    break;
                }
                visited.push(next);
                path.push(s);
                t = next;
            }
            // The ends must not be neighbours (an adjacent pair can annihilate).
            let (a, b) = (visited[0], t);
            if ok && !lat.diamond_neighbours(a).contains(&(b as u32)) {
                for s in path {
                    sigma[s] = -sigma[s];
                }
                return sigma;
            }
        }
    }

    #[test]
    fn tracker_follows_charges_through_random_flips() {
        // Σ of tracked charges on each tetrahedron equals Q_t after every
        // flip, through hops, creations and annihilations (definition, §5).
        let lat = Pyrochlore::new(2).unwrap();
        let model = NearestNeighbourIce::new(1.0);
        let mut rng = RngStreams::new(8).stream(0);
        let sigma = crate::metropolis::initial_configuration(
            &lat,
            crate::metropolis::Start::Random,
            &mut rng,
        );
        let mut engine = Kinetics::new(
            &lat,
            NearestNeighbourFlipEnergy::new(&model, None).unwrap(),
            sigma,
            AcceptanceRule::Metropolis,
            1.5,
            AttemptTimes::uniform(1.0).unwrap(),
            rng,
        )
        .unwrap();
        let mut tracker = MonopoleTracker::new(&lat, engine.sigma());
        for k in 1..40 {
            engine.advance(k as f64, Execution::RejectionFree, u64::MAX, &mut tracker);
            for t in 0..lat.tetrahedron_count() {
                let q = charge(&lat, engine.sigma(), t);
                let tracked: i8 = tracker
                    .occupants(t)
                    .iter()
                    .map(|&id| tracker.records()[id as usize].charge)
                    .sum();
                assert_eq!(q, tracked, "tetrahedron {t}");
            }
        }
        assert!(tracker.hop_count() > 50 && tracker.creations > 5 && tracker.annihilations > 5);
        // Unwrapped positions fold back onto the current site's centre, and
        // distinct sites never exceed hops + 1 (definitions).
        let box_l = lat.box_length();
        for (r, l) in tracker.records.iter().zip(&tracker.live) {
            if let Some(l) = l {
                let centre = lat.tetrahedron_centre(l.tet as usize);
                for (p, c) in l.position.iter().zip(centre) {
                    let folded = p.rem_euclid(box_l);
                    let diff = (folded - c).abs();
                    assert!(diff < 1e-9 || (diff - box_l).abs() < 1e-9);
                }
                assert!(r.distinct_sites <= r.hops as usize + 1);
            }
        }
    }

    fn hop_rate_per_monopole(rule: AcceptanceRule, execution: Execution) -> (f64, f64) {
        // T = 0: only ΔE ≤ 0 moves happen; with the pair apart, each monopole
        // has exactly three zero-cost hop spins (its three majority spins)
        // and nothing else moves (derived).
        let lat = Pyrochlore::new(4).unwrap();
        let model = NearestNeighbourIce::new(1.1);
        let window = 0.25;
        let replicas = 300u64;
        let mut hops = 0u64;
        for r in 0..replicas {
            let sigma = separated_pair(&lat, 1000 + r, 6);
            let mut engine = Kinetics::new(
                &lat,
                NearestNeighbourFlipEnergy::new(&model, None).unwrap(),
                sigma,
                rule,
                0.0,
                AttemptTimes::uniform(1.0).unwrap(),
                RngStreams::new(5000 + r).stream(1),
            )
            .unwrap();
            let history = track_monopoles(
                &mut engine,
                window,
                window,
                execution,
                &Interrupt::new(),
                &ignore_progress,
            )
            .unwrap();
            assert_eq!(history.creations, 0);
            hops += history.hops;
        }
        let exposure = 2.0 * window * replicas as f64; // monopole-τ0
        (hops as f64 / exposure, (hops as f64).sqrt() / exposure)
    }

    #[test]
    fn isolated_monopole_hops_three_times_per_tau0_with_metropolis() {
        // Physics-reference §9 (derived): three ΔE = 0 hop spins, each
        // attempting once per τ0 and accepted with min(1, e^0) = 1 → 3 hops
        // per τ0. Glauber accepts ΔE = 0 with ½ → 1.5 per τ0 (derived).
        // Poisson counting error, 3σ.
        for execution in [Execution::RejectionFree, Execution::AttemptBased] {
            let (rate, err) = hop_rate_per_monopole(AcceptanceRule::Metropolis, execution);
            assert!(
                (rate - 3.0).abs() < 3.0 * err,
                "{execution:?}: {rate} ± {err}"
            );
        }
        let (rate, err) = hop_rate_per_monopole(AcceptanceRule::Glauber, Execution::RejectionFree);
        assert!((rate - 1.5).abs() < 3.0 * err, "Glauber: {rate} ± {err}");
    }

    #[test]
    fn one_third_of_a_fresh_monopoles_hop_spins_are_gated() {
        // Of the hop spins of a monopole in an ice background, 3 of 9 equally
        // likely neighbour patterns have h⊥ = 0 (physics-reference §5,
        // derived). Disordered ice states (loop moves), one flip makes a pair,
        // count the gate classes of each monopole's other two majority spins;
        // binomial error, 3σ.
        let lat = Pyrochlore::new(4).unwrap();
        let mut rng = RngStreams::new(1).stream(0);
        let (mut closed, mut total) = (0u64, 0u64);
        for _ in 0..400 {
            let mut sigma = random_ice_state(&lat, &mut rng, 1000);
            let s = rng.gen_range(0..lat.spin_count());
            sigma[s] = -sigma[s];
            for t in lat.tetrahedra_of(s) {
                let q = charge(&lat, &sigma, t as usize);
                let up = lat.is_up(t as usize);
                for &c in lat.spins_of(t as usize) {
                    let c = c as usize;
                    let out = (sigma[c] > 0) == up;
                    if c != s && (q > 0) == out {
                        total += 1;
                        closed += (gate_class(&lat, &sigma, c) == 0) as u64;
                    }
                }
            }
        }
        assert_eq!(total, 400 * 2 * 2);
        let p = closed as f64 / total as f64;
        let err = (p * (1.0 - p) / total as f64).sqrt();
        assert!((p - 1.0 / 3.0).abs() < 3.0 * err, "share {p} ± {err}");
    }

    #[test]
    fn share_of_gated_hops_in_a_low_temperature_run_is_near_one_third() {
        // The same share over the hops actually made in a T = 0.3 K run
        // (J_eff = 1.1 K, uniform rates). A moving monopole shapes its own
        // surroundings (its last hop's spin is one of its next hop spins), so
        // the realised share is not exactly the 3/9 of independent patterns:
        // measured 0.357 ± 0.006 here. Checked to lie within 0.05 of 1/3 and
        // far from the 0 of an ice state or the 10/64 of random patterns
        // (derived, gating module).
        let lat = Pyrochlore::new(4).unwrap();
        let model = NearestNeighbourIce::new(1.1);
        let mut closed = 0u64;
        let mut total = 0u64;
        for r in 0..6u64 {
            let sigma = separated_pair(&lat, 77 + r, 6);
            let mut engine = Kinetics::new(
                &lat,
                NearestNeighbourFlipEnergy::new(&model, None).unwrap(),
                sigma,
                AcceptanceRule::Metropolis,
                0.3,
                AttemptTimes::uniform(1.0).unwrap(),
                RngStreams::new(900 + r).stream(1),
            )
            .unwrap();
            let h = track_monopoles(
                &mut engine,
                400.0,
                1.0,
                Execution::RejectionFree,
                &Interrupt::new(),
                &ignore_progress,
            )
            .unwrap();
            closed += h.hop_gate_classes[0];
            total += h.hops;
        }
        let p = closed as f64 / total as f64;
        assert!(total > 1000, "{total} hops");
        assert!((p - 1.0 / 3.0).abs() < 0.05, "share {p} of {total}");
    }

    #[test]
    fn pairing_rule_moves_the_oldest_of_a_double_charge() {
        // Build a double charge by hand: up tetrahedron 0 all out (+2).
        let lat = Pyrochlore::new(2).unwrap();
        let mut rng = RngStreams::new(3).stream(0);
        let mut sigma = random_ice_state(&lat, &mut rng, 50);
        for &s in lat.spins_of(0) {
            sigma[s as usize] = 1;
        }
        let tracker = MonopoleTracker::new(&lat, &sigma);
        let ids = tracker.occupants(0);
        assert_eq!(ids.len(), 2);
        assert!(ids
            .iter()
            .all(|&i| tracker.records()[i as usize].charge == 1));
        let mut tracker = tracker;
        let oldest = *ids.iter().min().unwrap();
        assert_eq!(tracker.take_oldest(0), oldest);
        assert_eq!(tracker.occupants(0).len(), 1);
    }

    #[test]
    fn msd_of_a_known_walk() {
        // Positions 0, 1, 2 along x: MSD(1) = 1, MSD(2) = 4 (definition).
        let history = MonopoleHistory {
            times_seconds: vec![0.0, 0.5, 1.0],
            monopoles: vec![MonopoleRecord {
                id: 0,
                charge: 1,
                born_seconds: 0.0,
                died_seconds: None,
                hops: 2,
                distinct_sites: 3,
                first_sample: 0,
                positions: vec![[0.0; 3], [1.0, 0.0, 0.0], [2.0, 0.0, 0.0]],
            }],
            hops: 2,
            creations: 0,
            annihilations: 0,
            hop_gate_classes: [0; 4],
            interrupted: false,
        };
        let msd = history.mean_square_displacement(2);
        assert_eq!(msd[0].mean_square_displacement, 1.0);
        assert_eq!(msd[0].pairs, 2);
        assert_eq!(msd[1].mean_square_displacement, 4.0);
        assert_eq!(msd[1].lag_seconds, 1.0);
    }

    #[test]
    fn with_all_spins_open_the_static_count_is_the_diamond_shell_sum() {
        // Coordination sequence of the diamond lattice: 4, 12, 24, 42, 64 sites
        // at 1..5 bonds (OEIS A005246 (memory); Conway & Sloane, Proc. R. Soc.
        // A 453, 2369 (1997) (memory)). On an L = 4 box (16 bonds across) no
        // shell wraps before 5 hops.
        let lat = Pyrochlore::new(4).unwrap();
        let sigma = vec![1i8; lat.spin_count()];
        let c = reachable_sites(&lat, &sigma, 0, 1, [true; 4], 5, ReachMode::StaticSnapshot);
        let shells: Vec<u64> = c.sites_within.windows(2).map(|w| w[1] - w[0]).collect();
        assert_eq!(shells, vec![4, 12, 24, 42, 64]);
        // Nothing is open: only the start.
        let none = reachable_sites(&lat, &sigma, 0, 1, [false; 4], 5, ReachMode::StaticSnapshot);
        assert_eq!(none.sites_within, vec![1; 6]);
    }

    #[test]
    fn path_dependent_search_obeys_the_charge_direction() {
        // A +1 monopole at the end of a string: with every class open, the
        // first hop can use only its three majority (out) spins (derived).
        let lat = Pyrochlore::new(3).unwrap();
        let sigma = separated_pair(&lat, 5, 4);
        let plus = (0..lat.tetrahedron_count())
            .find(|&t| charge(&lat, &sigma, t) == 1)
            .unwrap();
        let c = reachable_sites(
            &lat,
            &sigma,
            plus,
            1,
            [true; 4],
            3,
            ReachMode::PathDependent,
        );
        assert_eq!(c.sites_within[1], 4);
        let s = reachable_sites(
            &lat,
            &sigma,
            plus,
            1,
            [true; 4],
            3,
            ReachMode::StaticSnapshot,
        );
        assert_eq!(s.sites_within[1], 5);
        assert!(c.sites_within[3] <= s.sites_within[3]);
        let svg = render_cluster_svg(&c, 480, 400).unwrap();
        assert!(svg.starts_with("<svg") && svg.contains("<circle"));
        assert!(svg.contains("path-dependent"));
        assert!(render_cluster_svg(&c, 10, 400).is_err());
    }
}
