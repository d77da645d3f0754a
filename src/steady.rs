//! Steady state of a network and the observables measured there.
//!
//! Owns the generator and the unique stationary distribution of an irreducible [`Network`]:
//! - dense networks (up to [`SteadySettings::dense_limit`] states) use the subtraction-free
//!   elimination of Grassmann, Taksar & Heyman (1985, Oper. Res. 33, 1107), which keeps every
//!   probability, however tiny, to full relative accuracy;
//! - larger ones use a sparse LU (faer) of the generator with one state eliminated, followed by
//!   iterative refinement and a level-by-level re-solve of components too small for the LU's
//!   absolute accuracy, so that no probability is returned as zero or negative.
//!
//! It also computes fluxes, powers and entropy production at any distribution ([`observe`]).
//! Energies are in kT, rates in the model's time unit. No file I/O, no printing.

use crate::linalg::SparseLu;
use crate::model::{log_ratio, Channel, Network};
use crate::numeric::{DoubleDouble, DOUBLE_DOUBLE_EPSILON};
use faer::sparse::Triplet;
use faer::Mat;

pub use crate::solve_error::SolveError;

/// How the steady state was computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Dense Grassmann-Taksar-Heyman elimination.
    DenseGth,
    /// Sparse LU with one state eliminated, refined.
    SparseLu,
}

impl Method {
    pub fn name(self) -> &'static str {
        match self {
            Method::DenseGth => "dense GTH elimination",
            Method::SparseLu => "sparse LU",
        }
    }
}

/// Settings of the steady-state solve.
#[derive(Debug, Clone, Copy)]
pub struct SteadySettings {
    /// Largest network solved densely (GTH is O(n^3) but exact in relative terms). Default 400.
    pub dense_limit: usize,
    /// Levels of re-solving ever smaller components on the sparse path (each level extends full
    /// relative accuracy by about 8 decades). Default 48.
    pub max_levels: usize,
}

impl Default for SteadySettings {
    fn default() -> Self {
        Self {
            dense_limit: 400,
            max_levels: 48,
        }
    }
}

/// The stationary distribution with the diagnostics of its solve.
#[derive(Debug, Clone)]
pub struct SteadyState {
    pub probabilities: Vec<f64>,
    pub method: Method,
    /// `max_i |(R p)_i| / (largest rate * max p)`.
    pub relative_residual: f64,
}

/// Solves `R p = 0`, `sum p = 1` for an irreducible network.
pub fn solve(network: &Network, settings: &SteadySettings) -> Result<SteadyState, SolveError> {
    solve_factored(network, settings).map(|(state, _)| state)
}

/// The factorisation of the generator behind a steady-state solve, kept so that further systems
/// `R y = b` (with `sum b = 0`) cost one solve each: the fluctuations of a current need one
/// (methods, section 12).
pub enum Factors {
    /// The GTH elimination: `a[i*n + j]` holds the censored rate `i -> j` at the time the larger
    /// of `i, j` was eliminated, `exit[k]` the censored exit rate of `k` (state 0 last).
    Gth { a: Vec<f64>, exit: Vec<f64> },
    /// The sparse LU of the generator with the row and column of `reference` removed.
    Sparse { lu: Box<SparseLu>, reference: usize },
}

impl Factors {
    /// A solution `y` of `R y = b` for a right-hand side with `sum b = 0`, the one with
    /// `y = 0` at the eliminated state (the solutions differ by multiples of `p`).
    pub fn solve(&self, b: &[f64]) -> Vec<f64> {
        match self {
            Factors::Gth { a, exit } => {
                // `R y = b` is `y^T Q = b^T` with `Q` the rate matrix; eliminating the states
                // as GTH did carries the right-hand side along (methods, section 12).
                let n = exit.len();
                let mut b = b.to_vec();
                for k in (1..n).rev() {
                    let s = exit[k];
                    for j in 0..k {
                        b[j] += b[k] * a[k * n + j] / s;
                    }
                }
                // Back substitution by rows (each solved `y_k` pushed into the states above
                // it), so that the factors are read contiguously.
                let (mut y, mut inflow) = (vec![0.0; n], vec![0.0; n]);
                for k in 1..n {
                    y[k] = (inflow[k] - b[k]) / exit[k];
                    let row = &a[k * n..(k + 1) * n];
                    for j in k + 1..n {
                        inflow[j] += y[k] * row[j];
                    }
                }
                y
            }
            Factors::Sparse { lu, reference } => {
                on_reduced(*reference, b, |x| lu.solve_in_place(x))
            }
        }
    }
}

impl Factors {
    /// `R^T y = b` with the same factors, `y` zero at the eliminated reference state, for the
    /// sparse factorisation (`None` for the dense elimination, which is not kept in a form
    /// that solves the transposed system).
    pub fn solve_transposed(&self, b: &[f64]) -> Option<Vec<f64>> {
        let Factors::Sparse { lu, reference } = self else {
            return None;
        };
        Some(on_reduced(*reference, b, |x| {
            lu.solve_transpose_in_place(x)
        }))
    }
}

/// Solves a system reduced by one state: `b` without component `reference` goes to `solve`
/// (which overwrites it with the solution), and the solution comes back with a zero there.
pub fn on_reduced(
    reference: usize,
    b: &[f64],
    solve: impl FnOnce(faer::MatMut<'_, f64>),
) -> Vec<f64> {
    let n = b.len();
    let mut x = Mat::<f64>::from_fn(n - 1, 1, |r, _| b[if r < reference { r } else { r + 1 }]);
    solve(x.as_mut());
    (0..n)
        .map(|i| match i.cmp(&reference) {
            std::cmp::Ordering::Less => x[(i, 0)],
            std::cmp::Ordering::Equal => 0.0,
            std::cmp::Ordering::Greater => x[(i - 1, 0)],
        })
        .collect()
}

/// [`solve`], keeping the factorisation of the generator for further solves.
pub fn solve_factored(
    network: &Network,
    settings: &SteadySettings,
) -> Result<(SteadyState, Factors), SolveError> {
    let (probabilities, method, factors) = if network.len() <= settings.dense_limit {
        let (p, factors) = gth(network);
        (p, Method::DenseGth, factors)
    } else {
        let (p, factors) = sparse(network, settings)?;
        (p, Method::SparseLu, factors)
    };
    if let Some(bad) = probabilities
        .iter()
        .position(|p| !(p.is_finite() && *p > 0.0))
    {
        // GTH is subtraction-free, so a zero there is an underflow (a probability below the
        // smallest double, about e^-745), not round-off; the sparse path can lose one to both.
        let cause = match method {
            Method::DenseGth => "it lies below the smallest double (about e^-745 = 1e-323), since the energies or drives of this network span more than about 745 kT; fix: drop the states that are never visited, or split the model so that each part spans less",
            Method::SparseLu => "round-off of the sparse solve swamps it, because the rates of this network span many decades; fix: rescale or merge the fastest or slowest channels",
        };
        return Err(SolveError::Unresolved(format!(
            "probability of state {bad} came out as {:e} ({}): {cause}",
            probabilities[bad],
            method.name()
        )));
    }
    let relative_residual = relative_residual(network, &probabilities);
    Ok((
        SteadyState {
            probabilities,
            method,
            relative_residual,
        },
        factors,
    ))
}

/// `R p` for the network's generator (net probability inflow into each state).
pub fn apply_generator(network: &Network, p: &[f64]) -> Vec<f64> {
    let mut out = vec![0.0; network.len()];
    for c in &network.channels {
        let j = c.flux(p);
        out[c.from] -= j;
        out[c.to] += j;
    }
    out
}

/// `max_i |(R p)_i| / (largest rate * max p)`.
pub fn relative_residual(network: &Network, p: &[f64]) -> f64 {
    let rp = apply_generator(network, p);
    let scale = network.max_rate() * p.iter().copied().fold(0.0, f64::max);
    rp.iter().map(|x| x.abs()).fold(0.0, f64::max) / scale
}

/// Dense GTH on the network's rate matrix, with its elimination kept.
fn gth(network: &Network) -> (Vec<f64>, Factors) {
    let n = network.len();
    let mut a = vec![0.0; n * n]; // a[i*n + j]: rate i -> j
    for c in &network.channels {
        a[c.from * n + c.to] += c.forward;
        a[c.to * n + c.from] += c.backward;
    }
    let (p, exit) = gth_eliminate(&mut a, n);
    (p, Factors::Gth { a, exit })
}

/// Dense GTH (Grassmann-Taksar-Heyman): censor states n-1, ..., 1 in turn, then rebuild by back
/// substitution. `a[i*n + j]` is the total rate i -> j (diagonal ignored); `a` is overwritten.
/// Subtraction-free, so every probability keeps a small relative error however tiny it is.
pub fn gth_rates(a: &mut [f64], n: usize) -> Vec<f64> {
    gth_eliminate(a, n).0
}

/// [`gth_rates`], returning the censored exit rates beside the probabilities.
fn gth_eliminate(a: &mut [f64], n: usize) -> (Vec<f64>, Vec<f64>) {
    let mut exit = vec![0.0; n];
    for k in (1..n).rev() {
        let s: f64 = a[k * n..k * n + k].iter().sum();
        exit[k] = s;
        for i in 0..k {
            let f = a[i * n + k] / s;
            if f != 0.0 {
                for j in 0..k {
                    a[i * n + j] += f * a[k * n + j];
                }
            }
        }
    }
    let mut p = vec![0.0; n];
    p[0] = 1.0;
    for k in 1..n {
        p[k] = (0..k).map(|i| p[i] * a[i * n + k]).sum::<f64>() / exit[k];
    }
    normalise(&mut p);
    (p, exit)
}

fn normalise(p: &mut [f64]) {
    let total: f64 = p.iter().sum();
    p.iter_mut().for_each(|x| *x /= total);
}

/// Largest network whose chord fluxes [`observe`] takes from a double-double GTH solve: such a
/// solve costs about 20 times a double one (O(n^3)), negligible up to here, and it lets a net
/// flux that is 1e-16 of its one-way fluxes still come out to about 1e-14 relative.
pub const REFINED_LIMIT: usize = 64;

/// Smallest probability or rate admitted to the double-double solve: below about 1e-290 its
/// low words underflow and the stated accuracy would not hold.
const REFINED_FLOOR: f64 = 1e-280;

/// Componentwise relative accuracy of the double-double GTH probabilities: GTH is subtraction
/// free, and its proven componentwise error bound grows like n^3 unit round-offs (O'Cinneide,
/// Numer. Math. 65, 109 (1993); the constant 8 is ours, generous).
fn refined_accuracy(n: usize) -> f64 {
    8.0 * (n as f64).powi(3) * DOUBLE_DOUBLE_EPSILON
}

/// Dense GTH in double-double arithmetic (the same elimination as [`gth_rates`]), or `None`
/// where some rate or probability is too small for double-double to keep its accuracy.
fn gth_double_double(network: &Network) -> Option<Vec<DoubleDouble>> {
    let n = network.len();
    let tiny = |x: f64| !(x.is_finite() && x >= REFINED_FLOOR);
    if network
        .channels
        .iter()
        .any(|c| tiny(c.forward) || tiny(c.backward))
    {
        return None;
    }
    let mut a = vec![DoubleDouble::default(); n * n];
    for c in &network.channels {
        a[c.from * n + c.to] = a[c.from * n + c.to] + DoubleDouble::from_f64(c.forward);
        a[c.to * n + c.from] = a[c.to * n + c.from] + DoubleDouble::from_f64(c.backward);
    }
    let mut exit = vec![DoubleDouble::default(); n];
    for k in (1..n).rev() {
        let s = a[k * n..k * n + k]
            .iter()
            .fold(DoubleDouble::default(), |t, x| t + *x);
        exit[k] = s;
        for i in 0..k {
            if a[i * n + k].hi == 0.0 {
                continue;
            }
            let f = a[i * n + k] / s;
            for j in 0..k {
                if a[k * n + j].hi != 0.0 {
                    a[i * n + j] = a[i * n + j] + f * a[k * n + j];
                }
            }
        }
    }
    let mut p = vec![DoubleDouble::default(); n];
    p[0] = DoubleDouble::from_f64(1.0);
    for k in 1..n {
        let inflow = (0..k).fold(DoubleDouble::default(), |t, i| t + p[i] * a[i * n + k]);
        p[k] = inflow / exit[k];
    }
    let total = p.iter().fold(DoubleDouble::default(), |t, x| t + *x);
    let p: Vec<DoubleDouble> = p.iter().map(|x| *x / total).collect();
    p.iter().all(|x| !tiny(x.hi)).then_some(p)
}

/// Per-state jump lists used by the sparse path: (neighbour, rate into this state from it)
/// and total exit rate.
struct Adjacency {
    inflow: Vec<Vec<(usize, f64)>>,
    exit: Vec<f64>,
}

impl Adjacency {
    fn new(network: &Network) -> Self {
        let n = network.len();
        let mut inflow = vec![Vec::new(); n];
        let mut exit = vec![0.0; n];
        for c in &network.channels {
            inflow[c.to].push((c.from, c.forward));
            inflow[c.from].push((c.to, c.backward));
            exit[c.from] += c.forward;
            exit[c.to] += c.backward;
        }
        Self { inflow, exit }
    }
}

/// Sparse LU of the generator with the row and column of a reference state removed.
///
/// The reference state should be a probable one (eliminating an improbable state scales the
/// solve by its tiny probability), so the state with the largest exit rate is tried first and,
/// if it turns out to be improbable, the solve is repeated with the most probable state.
fn sparse(network: &Network, settings: &SteadySettings) -> Result<(Vec<f64>, Factors), SolveError> {
    let n = network.len();
    let adjacency = Adjacency::new(network);
    let first = (0..n)
        .max_by(|&a, &b| adjacency.exit[a].total_cmp(&adjacency.exit[b]))
        .unwrap_or(0);
    let (mut p, mut lu) = sparse_with_reference(network, &adjacency, first)?;
    let mut reference = first;
    // A badly scaled first solve can return the most probable state with the wrong sign.
    let best = (0..n)
        .max_by(|&a, &b| p[a].abs().total_cmp(&p[b].abs()))
        .unwrap_or(first);
    let first_is_probable = p[first] >= 1e-3 * p[best].abs(); // false also for NaN
    if best != first && !first_is_probable {
        (p, lu) = sparse_with_reference(network, &adjacency, best)?;
        reference = best;
    }
    resolve_small_components(&adjacency, &mut p, settings.max_levels)?;
    normalise(&mut p);
    Ok((
        p,
        Factors::Sparse {
            lu: Box::new(lu),
            reference,
        },
    ))
}

/// One sparse solve with `reference` eliminated (its probability fixed to 1), refined twice.
fn sparse_with_reference(
    network: &Network,
    adjacency: &Adjacency,
    reference: usize,
) -> Result<(Vec<f64>, SparseLu), SolveError> {
    let n = network.len();
    let reduced = |i: usize| if i < reference { i } else { i - 1 };
    let mut triplets = Vec::with_capacity(4 * network.channels.len() + n);
    let mut rhs = Mat::<f64>::zeros(n - 1, 1);
    for i in 0..n {
        if i != reference {
            triplets.push(Triplet::new(reduced(i), reduced(i), -adjacency.exit[i]));
        }
    }
    let mut jump = |from: usize, to: usize, rate: f64| {
        if to == reference {
            return;
        }
        if from == reference {
            rhs[(reduced(to), 0)] -= rate;
        } else {
            triplets.push(Triplet::new(reduced(to), reduced(from), rate));
        }
    };
    for c in &network.channels {
        jump(c.from, c.to, c.forward);
        jump(c.to, c.from, c.backward);
    }
    let lu = SparseLu::factor(n - 1, &triplets)?;
    let mut x = rhs;
    lu.solve_in_place(x.as_mut());
    let expand = |x: &Mat<f64>| -> Vec<f64> {
        (0..n)
            .map(|i| {
                if i == reference {
                    1.0
                } else {
                    x[(reduced(i), 0)]
                }
            })
            .collect()
    };
    for _ in 0..2 {
        let rp = apply_generator(network, &expand(&x));
        let mut correction = Mat::<f64>::from_fn(n - 1, 1, |r, _| {
            let i = if r < reference { r } else { r + 1 };
            -rp[i]
        });
        lu.solve_in_place(correction.as_mut());
        for r in 0..n - 1 {
            x[(r, 0)] += correction[(r, 0)];
        }
    }
    Ok((expand(&x), lu))
}

/// Re-solves, level by level, the components too small for the previous solve's absolute
/// accuracy (below 1e-8 of that level's largest, or not positive).
///
/// With the larger components `L` held fixed, the small set `S` satisfies
/// `exit_i p_i - sum_{j in S} k_ji p_j = sum_{j in L} k_ji p_j` for `i` in `S`: a nonsingular
/// M-matrix with a nonnegative right-hand side whose scale is that of `S` itself, so the new
/// solution is accurate relative to the largest member of `S`. Repeating on what is still small
/// extends full accuracy down the whole range of doubles.
fn resolve_small_components(
    adjacency: &Adjacency,
    p: &mut [f64],
    max_levels: usize,
) -> Result<(), SolveError> {
    let n = p.len();
    let mut active: Vec<usize> = (0..n).collect();
    for _ in 0..max_levels {
        let max = active.iter().map(|&i| p[i]).fold(0.0, f64::max);
        let small: Vec<usize> = active
            .iter()
            .copied()
            .filter(|&i| p[i] < 1e-8 * max || p[i].is_nan())
            .collect();
        if small.is_empty() || small.len() == active.len() {
            return Ok(());
        }
        let mut slot = vec![usize::MAX; n];
        for (k, &i) in small.iter().enumerate() {
            slot[i] = k;
        }
        let mut triplets = Vec::new();
        let mut rhs = Mat::<f64>::zeros(small.len(), 1);
        for (k, &i) in small.iter().enumerate() {
            triplets.push(Triplet::new(k, k, adjacency.exit[i]));
            for &(j, rate) in &adjacency.inflow[i] {
                match slot[j] {
                    usize::MAX => rhs[(k, 0)] += rate * p[j],
                    col => triplets.push(Triplet::new(k, col, -rate)),
                }
            }
        }
        let m = small.len();
        SparseLu::factor(m, &triplets)?.solve_in_place(rhs.as_mut());
        for (k, &i) in small.iter().enumerate() {
            p[i] = rhs[(k, 0)];
        }
        active = small;
    }
    Ok(())
}

/// Observables of a network in its steady state (energies in kT, rates per time unit).
#[derive(Debug, Clone)]
pub struct Observables {
    /// Net flux of each channel; they conserve probability at every state by construction.
    pub fluxes: Vec<f64>,
    /// Round-off bound of each net flux.
    pub flux_roundoff: Vec<f64>,
    /// Work stored per time unit by each channel (kT per time unit).
    pub work_rates: Vec<f64>,
    /// Free energy drawn from the environment per time unit by each channel.
    pub drive_rates: Vec<f64>,
    /// Harvesting power `sum_c w_c J_c`, computed as a sum over independent cycles.
    pub power: f64,
    /// Round-off bound of `power`.
    pub power_roundoff: f64,
    /// Drive power `sum_c d_c J_c`, computed as a sum over independent cycles.
    pub drive_power: f64,
    /// Round-off bound of `drive_power`.
    pub drive_power_roundoff: f64,
    /// Entropy production rate in units of k_B per time unit: drive power minus harvesting
    /// power (LDB makes every cycle's affinity its drive minus its work).
    pub entropy_production: f64,
    /// `power / drive_power`, `None` when the drive power is not determined (zero within its
    /// round-off bound).
    pub efficiency: Option<f64>,
    /// `|sum_c J_c ln(k+ p_from / (k- p_to)) - entropy production|` relative to the largest term
    /// that enters it: a check that `p` is the steady state of these rates.
    pub balance_error: f64,
}

/// Relative accuracy assumed for every steady-state probability: GTH keeps each component to a
/// small multiple of `n eps` in practice (common practice; the proven componentwise bounds of
/// O'Cinneide, Numer. Math. 65, 109 (1993) are larger), and the sparse path refines until it
/// matches. The same constant has always been used by the design verification.
pub fn probability_accuracy(n: usize) -> f64 {
    8.0 * n as f64 * f64::EPSILON
}

/// A spanning tree of the fastest channels (largest one-way traffic `k+ p_from + k- p_to`,
/// Kruskal's algorithm), rooted at state 0.
struct FastTree {
    /// Whether each channel belongs to the tree.
    in_tree: Vec<bool>,
    /// States in breadth-first order from the root.
    order: Vec<usize>,
    /// For each state but the root, the tree channel to its parent.
    parent_channel: Vec<usize>,
}

impl FastTree {
    fn build(network: &Network, traffic: &[f64]) -> Self {
        let (n, m) = (network.len(), network.channels.len());
        let mut by_traffic: Vec<usize> = (0..m).collect();
        by_traffic.sort_by(|&a, &b| traffic[b].total_cmp(&traffic[a]).then(a.cmp(&b)));
        let mut root: Vec<usize> = (0..n).collect();
        fn find(root: &mut [usize], mut s: usize) -> usize {
            while root[s] != s {
                root[s] = root[root[s]];
                s = root[s];
            }
            s
        }
        let mut in_tree = vec![false; m];
        let mut adjacent: Vec<Vec<usize>> = vec![Vec::new(); n];
        for c in by_traffic {
            let ch = &network.channels[c];
            let (a, b) = (find(&mut root, ch.from), find(&mut root, ch.to));
            if a != b {
                root[a] = b;
                in_tree[c] = true;
                adjacent[ch.from].push(c);
                adjacent[ch.to].push(c);
            }
        }
        let mut parent_channel = vec![usize::MAX; n];
        let mut seen = vec![false; n];
        let mut order = vec![0];
        seen[0] = true;
        let mut head = 0;
        while head < order.len() {
            let s = order[head];
            head += 1;
            for &c in &adjacent[s] {
                let ch = &network.channels[c];
                let t = if ch.from == s { ch.to } else { ch.from };
                if !seen[t] {
                    seen[t] = true;
                    parent_channel[t] = c;
                    order.push(t);
                }
            }
        }
        Self {
            in_tree,
            order,
            parent_channel,
        }
    }

    /// The other end of the tree channel from `s` to its parent.
    fn parent(&self, network: &Network, s: usize) -> usize {
        let ch = &network.channels[self.parent_channel[s]];
        if ch.from == s {
            ch.to
        } else {
            ch.from
        }
    }

    /// For each state but the root, whether its parent channel is a bridge (no chord leaves its
    /// subtree), so that conservation makes its net flux exactly zero. Subtrees are numbered as
    /// intervals of a depth-first preorder; a chord leaves the subtree of `s` when an end inside
    /// it sees an end outside the interval.
    fn bridges(&self, network: &Network) -> Vec<bool> {
        let n = network.len();
        let mut size = vec![1usize; n];
        for &s in self.order.iter().skip(1).rev() {
            let parent = self.parent(network, s);
            size[parent] += size[s];
        }
        let (mut pre, mut next_child) = (vec![0usize; n], vec![1usize; n]);
        for &s in self.order.iter().skip(1) {
            let parent = self.parent(network, s);
            pre[s] = pre[parent] + next_child[parent];
            next_child[parent] += size[s];
        }
        let (mut low, mut high) = (pre.clone(), pre.clone());
        for (c, ch) in network.channels.iter().enumerate() {
            if !self.in_tree[c] {
                for (a, b) in [(ch.from, ch.to), (ch.to, ch.from)] {
                    low[a] = low[a].min(pre[b]);
                    high[a] = high[a].max(pre[b]);
                }
            }
        }
        let mut bridge = vec![false; n];
        for &s in self.order.iter().skip(1).rev() {
            bridge[s] = low[s] >= pre[s] && high[s] < pre[s] + size[s];
            let parent = self.parent(network, s);
            low[parent] = low[parent].min(low[s]);
            high[parent] = high[parent].max(high[s]);
        }
        bridge
    }
}

/// Fluxes, powers and entropy production of `network` in its steady state `p`.
///
/// Net fluxes of fast, nearly balanced channels are differences of huge one-way fluxes, so they
/// are not computed that way: only the channels outside a spanning tree of the fastest channels
/// (the chords, the slower ones) are evaluated directly; every tree channel's net flux then
/// follows exactly from flux conservation at each state (leaves first). A channel that is a
/// state's only way in and out carries exactly zero. Powers are sums over the independent
/// cycles (one per chord, Schnakenberg, Rev. Mod. Phys. 48, 571 (1976)) of chord flux times the
/// cycle's work or drive, so tree labels never cancel. Every result carries a round-off bound.
///
/// `p` must be the steady state of `network` (as from [`solve`]): conservation is assumed.
pub fn observe(network: &Network, p: &[f64]) -> Observables {
    let (n, m) = (network.len(), network.channels.len());
    let accuracy = probability_accuracy(n);
    let traffic: Vec<f64> = network
        .channels
        .iter()
        .map(|c| c.forward * p[c.from] + c.backward * p[c.to])
        .collect();
    let tree = FastTree::build(network, &traffic);
    // Chord fluxes from a double-double steady state where the network is small enough: the
    // cancellation of one-way fluxes then costs digits beyond double precision only.
    let refined = (n <= REFINED_LIMIT)
        .then(|| gth_double_double(network))
        .flatten();
    let chord_flux = |ch: &Channel, traffic: f64| match &refined {
        Some(q) => (
            q[ch.from].mul_f64(ch.forward) - q[ch.to].mul_f64(ch.backward),
            traffic * (refined_accuracy(n) + 2.0 * DOUBLE_DOUBLE_EPSILON),
        ),
        None => (
            DoubleDouble::from_f64(ch.flux(p)),
            traffic * (accuracy + f64::EPSILON),
        ),
    };
    // Net fluxes in double-double (rounded to doubles at the end), so sums over chords lose
    // nothing to cancellation; errors are carried beside them.
    let mut exact_flux = vec![DoubleDouble::default(); m];
    let mut flux_error = vec![0.0; m];
    // Net chord outflow of each state, its error bound and its magnitude.
    let (mut outflow, mut outflow_error, mut outflow_size) =
        (vec![DoubleDouble::default(); n], vec![0.0; n], vec![0.0; n]);
    for (c, ch) in network.channels.iter().enumerate() {
        if tree.in_tree[c] {
            continue;
        }
        let (j, error) = chord_flux(ch, traffic[c]);
        exact_flux[c] = j;
        flux_error[c] = error;
        for (s, j) in [(ch.from, j), (ch.to, -j)] {
            outflow[s] = outflow[s] + j;
            outflow_error[s] += error;
            outflow_size[s] += j.hi.abs();
        }
    }
    let bridge = tree.bridges(network);
    for &s in tree.order.iter().skip(1).rev() {
        let c = tree.parent_channel[s];
        let ch = &network.channels[c];
        let parent = tree.parent(network, s);
        // Whatever leaves the subtree of `s` by chords returns through its parent channel, so
        // its net flux from `s` to the parent is minus the subtree's chord outflow. Where the
        // channel's own one-way fluxes are known better than that sum (a slow tree channel
        // below fast chords that nearly cancel), the direct value is taken instead, and it
        // stands for the subtree's outflow further up.
        let toward_parent = |j: DoubleDouble| if ch.from == s { j } else { -j };
        if bridge[s] {
            // Everything that leaves the subtree by chords comes back into it by chords.
            (outflow[s], outflow_error[s], outflow_size[s]) = (DoubleDouble::default(), 0.0, 0.0);
        } else {
            let conserved_error =
                outflow_error[s] + 2.0 * n as f64 * DOUBLE_DOUBLE_EPSILON * outflow_size[s];
            let (direct, direct_error) = chord_flux(ch, traffic[c]);
            if direct_error < conserved_error {
                let through = toward_parent(direct);
                (outflow[s], outflow_error[s], outflow_size[s]) =
                    (-through, direct_error, through.hi.abs());
            } else {
                outflow_error[s] = conserved_error;
            }
        }
        exact_flux[c] = toward_parent(-outflow[s]);
        flux_error[c] = outflow_error[s];
        outflow[parent] = outflow[parent] + outflow[s];
        outflow_error[parent] += outflow_error[s];
        outflow_size[parent] += outflow_size[s];
    }
    let fluxes: Vec<f64> = exact_flux.iter().map(|j| j.hi).collect();
    let flux_roundoff: Vec<f64> = flux_error
        .iter()
        .zip(&fluxes)
        .map(|(e, j)| e + 0.5 * f64::EPSILON * j.abs())
        .collect();
    let work = cycle_sum(network, &tree, &exact_flux, &flux_error, |c| c.work);
    let drive = cycle_sum(network, &tree, &exact_flux, &flux_error, |c| c.drive);
    let entropy_production = drive.value - work.value;
    let (mut direct_sigma, mut scale) = (0.0, 0.0);
    for (c, ch) in network.channels.iter().enumerate() {
        let force = log_ratio(ch.forward, ch.backward) + log_ratio(p[ch.from], p[ch.to]);
        direct_sigma += fluxes[c] * force;
        scale +=
            (fluxes[c] * force).abs() + (fluxes[c] * ch.work).abs() + (fluxes[c] * ch.drive).abs();
    }
    let balance_error = if scale > 0.0 {
        (direct_sigma - entropy_production).abs() / scale
    } else {
        0.0
    };
    let efficiency = (drive.value.abs() > drive.roundoff
        && work.roundoff <= 0.01 * work.value.abs())
    .then(|| work.value / drive.value);
    Observables {
        work_rates: network
            .channels
            .iter()
            .zip(&fluxes)
            .map(|(c, j)| j * c.work)
            .collect(),
        drive_rates: network
            .channels
            .iter()
            .zip(&fluxes)
            .map(|(c, j)| j * c.drive)
            .collect(),
        fluxes,
        flux_roundoff,
        power: work.value,
        power_roundoff: work.roundoff,
        drive_power: drive.value,
        drive_power_roundoff: drive.roundoff,
        entropy_production,
        efficiency,
        balance_error,
    }
}

/// A sum with its round-off bound.
struct Bounded {
    value: f64,
    roundoff: f64,
}

/// `sum_c J_c label_c` over all channels, evaluated as `sum_chords J_c (label_c + phi_from -
/// phi_to)` with `phi` the label accumulated along the tree from the root (the tree channels'
/// share telescopes into the chords' cycles because the fluxes conserve probability). Labels
/// are exact doubles and every sum is in double-double, so the only error that matters is the
/// chord fluxes' own (`flux_error`).
fn cycle_sum(
    network: &Network,
    tree: &FastTree,
    fluxes: &[DoubleDouble],
    flux_error: &[f64],
    label: impl Fn(&Channel) -> f64,
) -> Bounded {
    let n = network.len();
    // phi[s]: label gained along the tree path root -> s; size[s]: sum of |label| on it.
    let (mut phi, mut size) = (vec![DoubleDouble::default(); n], vec![0.0; n]);
    for &s in tree.order.iter().skip(1) {
        let ch = &network.channels[tree.parent_channel[s]];
        let (parent, gain) = if ch.to == s {
            (ch.from, label(ch))
        } else {
            (ch.to, -label(ch))
        };
        phi[s] = phi[parent] + DoubleDouble::from_f64(gain);
        size[s] = size[parent] + gain.abs();
    }
    let (mut value, mut roundoff, mut terms) = (DoubleDouble::default(), 0.0, 0.0);
    for (c, ch) in network.channels.iter().enumerate() {
        if tree.in_tree[c] {
            continue;
        }
        let per_turn = DoubleDouble::from_f64(label(ch)) + phi[ch.from] - phi[ch.to];
        let turn_size = label(ch).abs() + size[ch.from] + size[ch.to];
        let term = fluxes[c] * per_turn;
        value = value + term;
        terms += term.hi.abs();
        roundoff += flux_error[c] * per_turn.hi.abs()
            + fluxes[c].hi.abs() * 2.0 * n as f64 * DOUBLE_DOUBLE_EPSILON * turn_size;
    }
    roundoff += 2.0 * network.channels.len() as f64 * DOUBLE_DOUBLE_EPSILON * terms
        + 0.5 * f64::EPSILON * value.hi.abs();
    Bounded {
        value: value.hi,
        roundoff,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ring(n: usize, forward: f64, backward: f64) -> Network {
        let channels = (0..n)
            .map(|i| Channel {
                from: i,
                to: (i + 1) % n,
                forward,
                backward,
                work: 0.0,
                drive: (forward / backward).ln(),
            })
            .collect();
        Network {
            energies: vec![0.0; n],
            channels,
        }
    }

    #[test]
    fn uniform_ring_is_uniform_both_ways() {
        // A ring with identical rates is symmetric under rotation: p = 1/n exactly.
        let net = ring(7, 3.0, 0.5);
        for limit in [0, 1000] {
            let s = solve(
                &net,
                &SteadySettings {
                    dense_limit: limit,
                    ..Default::default()
                },
            )
            .unwrap();
            for p in &s.probabilities {
                assert!((p - 1.0 / 7.0).abs() < 1e-14);
            }
        }
    }
}
