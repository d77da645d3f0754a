//! Where the states of a network diagram go: stress majorization (Gansner, Koren and North,
//! "Graph drawing by stress majorization", Graph Drawing 2004, LNCS 3383, pp. 239-250) over
//! graph-theoretic distances, started from classical multidimensional scaling, followed by a
//! push-apart pass that removes node overlaps.
//!
//! Owns: the breadth-first distances, the deterministic start (classical MDS by a Jacobi
//! eigen-decomposition, no randomness), the majorization itself (the paper's exact update
//! `L^w X' = L^Z(X) X`, one Cholesky factorisation reused for every step, weights `d^-2`), the
//! stress it lowers (the paper's eq. 1) and the overlap removal.
//! Must not: know what a state, a probability or a flux is, draw anything, or do any I/O. It
//! receives vertex counts, edges and radii and returns coordinates in units of one graph step;
//! the caller scales them to pixels.
//!
//! Sizes: every step is dense (`n^2` memory, `n^3` for the factorisation); the diagrams call it
//! for at most a few dozen states (larger networks are summarised before they get here).

/// A point of the plane.
pub type Point = [f64; 2];

/// Most majorization steps; the relative decrease of the stress stops it much earlier.
pub const MAX_STEPS: usize = 500;

/// Relative stress decrease below which majorization stops.
pub const STRESS_TOLERANCE: f64 = 1e-7;

/// Shortest-path lengths (number of edges) between every pair of the `n` vertices of the
/// undirected graph `edges`, by one breadth-first search per vertex. A pair in different
/// components gets the largest finite distance plus one, so that components are drawn near
/// each other rather than infinitely far apart.
pub fn graph_distances(n: usize, edges: &[(usize, usize)]) -> Vec<Vec<f64>> {
    let all: Vec<usize> = (0..n).collect();
    distances_among(n, edges, &all)
}

/// [`graph_distances`] between the vertices `among` only, measured in the whole graph (paths
/// may pass through other vertices): a summary that draws some states keeps them where the
/// whole network would put them. One breadth-first search per vertex of `among`.
pub fn distances_among(n: usize, edges: &[(usize, usize)], among: &[usize]) -> Vec<Vec<f64>> {
    let mut neighbours = vec![Vec::new(); n];
    for &(a, b) in edges {
        if a < n && b < n && a != b {
            neighbours[a].push(b);
            neighbours[b].push(a);
        }
    }
    let mut hops = vec![f64::INFINITY; n];
    let mut d = vec![vec![f64::INFINITY; among.len()]; among.len()];
    for (row, &source) in d.iter_mut().zip(among) {
        hops.fill(f64::INFINITY);
        if source >= n {
            continue;
        }
        hops[source] = 0.0;
        let mut queue = std::collections::VecDeque::from([source]);
        while let Some(v) = queue.pop_front() {
            for &w in &neighbours[v] {
                if hops[w].is_infinite() {
                    hops[w] = hops[v] + 1.0;
                    queue.push_back(w);
                }
            }
        }
        for (x, &target) in row.iter_mut().zip(among) {
            *x = hops.get(target).copied().unwrap_or(f64::INFINITY);
        }
    }
    let longest = d
        .iter()
        .flatten()
        .copied()
        .filter(|x| x.is_finite())
        .fold(0.0, f64::max);
    for x in d.iter_mut().flatten() {
        if x.is_infinite() {
            *x = longest + 1.0;
        }
    }
    d
}

/// The stress of positions `x` for target distances `d` with the weights `w_ij = d_ij^-2`
/// (Gansner, Koren and North 2004, eq. 1): `sum_{i<j} w_ij (|x_i - x_j| - d_ij)^2`.
pub fn stress(d: &[Vec<f64>], x: &[Point]) -> f64 {
    let mut total = 0.0;
    for i in 0..x.len() {
        for j in i + 1..x.len() {
            let gap = distance(x[i], x[j]) - d[i][j];
            total += gap * gap / (d[i][j] * d[i][j]);
        }
    }
    total
}

/// Euclidean distance of two points.
pub fn distance(a: Point, b: Point) -> f64 {
    (a[0] - b[0]).hypot(a[1] - b[1])
}

/// Classical multidimensional scaling (Torgerson): the two leading eigenvectors of the doubly
/// centred matrix `B = -J D^(2) J / 2`, scaled by the square roots of their eigenvalues. It
/// is deterministic and already close to a good drawing, which is why the paper recommends it
/// as the start. A non-positive eigenvalue gives a zero coordinate (a path stays on a line).
pub fn classical_mds(d: &[Vec<f64>]) -> Vec<Point> {
    let n = d.len();
    if n < 2 {
        return vec![[0.0, 0.0]; n];
    }
    let sq: Vec<Vec<f64>> = d
        .iter()
        .map(|row| row.iter().map(|x| x * x).collect())
        .collect();
    let row_mean: Vec<f64> = sq
        .iter()
        .map(|r| r.iter().sum::<f64>() / n as f64)
        .collect();
    let mean = row_mean.iter().sum::<f64>() / n as f64;
    let mut b = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..n {
            b[i][j] = -0.5 * (sq[i][j] - row_mean[i] - row_mean[j] + mean);
        }
    }
    let (values, vectors) = symmetric_eigen(b);
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &c| values[c].total_cmp(&values[a]).then(a.cmp(&c)));
    let mut x = vec![[0.0, 0.0]; n];
    for (axis, &k) in order.iter().take(2).enumerate() {
        let scale = values[k].max(0.0).sqrt();
        // Fix the sign (an eigenvector's sign is arbitrary): the first nonzero entry positive.
        let sign = vectors
            .iter()
            .map(|row| row[k])
            .find(|v| v.abs() > 1e-12)
            .map_or(1.0, f64::signum);
        for (i, p) in x.iter_mut().enumerate() {
            p[axis] = sign * scale * vectors[i][k];
        }
    }
    x
}

/// Eigenvalues and eigenvectors (as columns) of the symmetric matrix `a`, by cyclic Jacobi
/// rotations: simple, deterministic and accurate for the small matrices of a diagram.
fn symmetric_eigen(mut a: Vec<Vec<f64>>) -> (Vec<f64>, Vec<Vec<f64>>) {
    let n = a.len();
    let mut v = vec![vec![0.0; n]; n];
    for (i, row) in v.iter_mut().enumerate() {
        row[i] = 1.0;
    }
    let scale: f64 = a.iter().flatten().map(|x| x * x).sum::<f64>().sqrt();
    for _sweep in 0..100 {
        let off: f64 = (0..n)
            .flat_map(|i| (0..n).filter(move |&j| j != i).map(move |j| (i, j)))
            .map(|(i, j)| a[i][j] * a[i][j])
            .sum::<f64>()
            .sqrt();
        if off <= 1e-14 * scale || off == 0.0 {
            break;
        }
        for p in 0..n {
            for q in p + 1..n {
                if a[p][q].abs() <= 1e-300 {
                    continue;
                }
                let theta = (a[q][q] - a[p][p]) / (2.0 * a[p][q]);
                let t = theta.signum() / (theta.abs() + (theta * theta + 1.0).sqrt());
                let t = if theta == 0.0 { 1.0 } else { t };
                let c = 1.0 / (t * t + 1.0).sqrt();
                let s = t * c;
                for row in a.iter_mut() {
                    let (akp, akq) = (row[p], row[q]);
                    row[p] = c * akp - s * akq;
                    row[q] = s * akp + c * akq;
                }
                let (low, high) = a.split_at_mut(q);
                for (apk, aqk) in low[p].iter_mut().zip(high[0].iter_mut()) {
                    let (x, y) = (*apk, *aqk);
                    *apk = c * x - s * y;
                    *aqk = s * x + c * y;
                }
                for row in v.iter_mut() {
                    let (vkp, vkq) = (row[p], row[q]);
                    row[p] = c * vkp - s * vkq;
                    row[q] = s * vkp + c * vkq;
                }
            }
        }
    }
    ((0..n).map(|i| a[i][i]).collect(), v)
}

/// Stress majorization from `start` (Gansner, Koren and North 2004, section 2.1): each step
/// solves `L^w X' = L^Z(X) X`, where `L^w` is the Laplacian of the weights `d^-2` and `L^Z`
/// that of `w_ij d_ij / |x_i - x_j|`. Each step minimises a quadratic that touches the stress
/// at the current layout and lies above it elsewhere, so the stress never increases. Returns
/// the layout and the number of steps taken.
pub fn majorize(d: &[Vec<f64>], start: &[Point]) -> (Vec<Point>, usize) {
    let n = start.len();
    if n < 2 {
        return (start.to_vec(), 0);
    }
    let weight = |i: usize, j: usize| 1.0 / (d[i][j] * d[i][j]);
    // L^w without the row and column of vertex 0 (which the solve pins at the origin: the
    // stress does not change under translation), factored once.
    let mut lw = vec![vec![0.0; n - 1]; n - 1];
    for i in 1..n {
        for j in 0..n {
            if i != j {
                lw[i - 1][i - 1] += weight(i, j);
                if j > 0 {
                    lw[i - 1][j - 1] = -weight(i, j);
                }
            }
        }
    }
    let Some(factor) = cholesky(lw) else {
        return (start.to_vec(), 0);
    };
    let mut x = start.to_vec();
    let mut current = stress(d, &x);
    for step in 1..=MAX_STEPS {
        let mut rhs = vec![[0.0, 0.0]; n];
        for i in 0..n {
            for j in 0..n {
                let dist = distance(x[i], x[j]);
                if i == j || dist <= 1e-12 {
                    continue;
                }
                let lz = weight(i, j) * d[i][j] / dist;
                for axis in 0..2 {
                    rhs[i][axis] += lz * (x[i][axis] - x[j][axis]);
                }
            }
        }
        let mut next = vec![[0.0, 0.0]; n];
        for axis in 0..2 {
            let b: Vec<f64> = rhs[1..].iter().map(|r| r[axis]).collect();
            for (k, value) in cholesky_solve(&factor, b).into_iter().enumerate() {
                next[k + 1][axis] = value;
            }
        }
        let updated = stress(d, &next);
        if !updated.is_finite() || updated > current {
            return (x, step - 1);
        }
        let decrease = current - updated;
        x = next;
        current = updated;
        if decrease <= STRESS_TOLERANCE * current.max(f64::MIN_POSITIVE) {
            return (x, step);
        }
    }
    (x, MAX_STEPS)
}

/// The lower-triangular Cholesky factor of the symmetric positive definite `a`, or `None`.
fn cholesky(mut a: Vec<Vec<f64>>) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    for j in 0..n {
        let diagonal = a[j][j] - (0..j).map(|k| a[j][k] * a[j][k]).sum::<f64>();
        if diagonal.is_nan() || diagonal <= 0.0 {
            return None;
        }
        a[j][j] = diagonal.sqrt();
        for i in j + 1..n {
            let s = a[i][j] - (0..j).map(|k| a[i][k] * a[j][k]).sum::<f64>();
            a[i][j] = s / a[j][j];
        }
    }
    Some(a)
}

/// Solves `L L^T y = b` with the factor from [`cholesky`].
fn cholesky_solve(l: &[Vec<f64>], mut b: Vec<f64>) -> Vec<f64> {
    let n = b.len();
    for i in 0..n {
        let s: f64 = (0..i).map(|k| l[i][k] * b[k]).sum();
        b[i] = (b[i] - s) / l[i][i];
    }
    for i in (0..n).rev() {
        let s: f64 = (i + 1..n).map(|k| l[k][i] * b[k]).sum();
        b[i] = (b[i] - s) / l[i][i];
    }
    b
}

/// The layout rotated so that its widest spread is horizontal (screens are wider than tall)
/// and centred on the origin; distances, and so the stress, do not change.
pub fn landscape(x: &[Point]) -> Vec<Point> {
    let n = x.len().max(1) as f64;
    let cx = x.iter().map(|p| p[0]).sum::<f64>() / n;
    let cy = x.iter().map(|p| p[1]).sum::<f64>() / n;
    let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
    for p in x {
        let (u, v) = (p[0] - cx, p[1] - cy);
        sxx += u * u;
        syy += v * v;
        sxy += u * v;
    }
    let angle = 0.5 * (2.0 * sxy).atan2(sxx - syy);
    let (s, c) = angle.sin_cos();
    x.iter()
        .map(|p| {
            let (u, v) = (p[0] - cx, p[1] - cy);
            [c * u + s * v, -s * u + c * v]
        })
        .collect()
}

/// Sweeps of the push-apart pass before the layout is spread out and the pass repeated.
const PUSH_SWEEPS: usize = 200;

/// Positions with no two discs (radii `radii`) closer than `gap` between their rims: pairs
/// that are too close are pushed apart along the line joining them, half each, sweep after
/// sweep in a fixed order; if that has not settled after [`PUSH_SWEEPS`] sweeps, the whole
/// layout is spread by 10% and the pass repeated, which always ends (spreading alone does).
pub fn separate(x: &[Point], radii: &[f64], gap: f64) -> Vec<Point> {
    let mut x = x.to_vec();
    let n = x.len().min(radii.len());
    for _round in 0..200 {
        for _sweep in 0..PUSH_SWEEPS {
            if !push_apart(&mut x[..n], radii, gap) {
                return x;
            }
        }
        for p in x.iter_mut() {
            p[0] *= 1.1;
            p[1] *= 1.1;
        }
    }
    x
}

/// One push-apart sweep over all pairs; true if any pair moved.
fn push_apart(x: &mut [Point], radii: &[f64], gap: f64) -> bool {
    let mut moved = false;
    for i in 0..x.len() {
        for j in i + 1..x.len() {
            let need = radii[i] + radii[j] + gap;
            let (dx, dy) = (x[j][0] - x[i][0], x[j][1] - x[i][1]);
            let dist = dx.hypot(dy);
            if dist >= need {
                continue;
            }
            // Coincident points separate along a direction fixed by their indices.
            let (ux, uy) = if dist > 1e-12 {
                (dx / dist, dy / dist)
            } else {
                let a = (i * 7 + j * 13) as f64;
                (a.cos(), a.sin())
            };
            let push = 0.5 * (need - dist) * 1.0001 + 1e-9;
            x[i][0] -= ux * push;
            x[i][1] -= uy * push;
            x[j][0] += ux * push;
            x[j][1] += uy * push;
            moved = true;
        }
    }
    moved
}

/// Every stage of a layout, so that callers and tests can see what majorization changed.
#[derive(Debug, Clone)]
pub struct Placement {
    /// Graph-theoretic distances the layout fits.
    pub distances: Vec<Vec<f64>>,
    /// Classical MDS start.
    pub initial: Vec<Point>,
    /// After stress majorization, rotated to landscape.
    pub majorized: Vec<Point>,
    /// Majorization steps taken.
    pub steps: usize,
}

/// The stress-majorization layout of the `n` vertices of `edges` (undirected), before any
/// overlap removal (which needs the radii: [`separate`]).
pub fn place(n: usize, edges: &[(usize, usize)]) -> Placement {
    place_by(graph_distances(n, edges))
}

/// The layout of vertices whose target distances are `distances` (e.g. [`distances_among`]).
pub fn place_by(distances: Vec<Vec<f64>>) -> Placement {
    let initial = classical_mds(&distances);
    let (majorized, steps) = majorize(&distances, &initial);
    Placement {
        majorized: landscape(&majorized),
        distances,
        initial,
        steps,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn path_distances_and_disconnected_pairs() {
        let d = graph_distances(4, &[(0, 1), (1, 2)]);
        assert_eq!(d[0][2], 2.0);
        assert_eq!(d[0][3], 3.0); // longest finite distance (2) plus one
    }

    #[test]
    fn majorization_never_raises_the_stress_and_separation_removes_overlaps() {
        let edges = [(0, 1), (1, 2), (2, 3), (3, 0), (0, 2), (3, 4)];
        let p = place(5, &edges);
        assert!(stress(&p.distances, &p.majorized) <= stress(&p.distances, &p.initial) + 1e-12);
        let radii = [0.6; 5];
        let x = separate(&p.majorized, &radii, 0.1);
        for i in 0..5 {
            for j in i + 1..5 {
                assert!(distance(x[i], x[j]) >= 1.3 - 1e-9);
            }
        }
    }
}
