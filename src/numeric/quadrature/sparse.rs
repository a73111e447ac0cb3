//! The sparse-grid driver: integrate over a [`Surface`] to a tolerance, with
//! an error estimate and a hard node budget, reusing nodes on refinement.
//!
//! Each patch of the surface has d - 1 variables, each with the nested
//! rules of [`super::nested`] (Fejér's second rule for the variable's
//! Jacobi weight; level l has 2^l - 1 nodes and contains level l - 1).
//! The integral is a dimension-adaptive sparse grid (Gerstner & Griebel,
//! Computing 71 (2003) 65–87, common practice): a sum over a set of
//! multi-indices k (one level per variable) of the differences
//! Δ_k = ⊗_j (Q_{k_j} - Q_{k_j - 1}), each evaluated only at the nodes that
//! k adds, because the rules are nested. The driver starts from the
//! Smolyak rule whose level follows the tolerance asked (every k whose
//! levels above the coarsest add up to at most 1, 2 or 3 for about 3, 6 or
//! 9 and more digits), so that every variable is refined at least that far
//! before any estimate is believed. The indices of the last layer are
//! active; the error estimate is the sum of their |Δ_k| — the difference
//! between the last two nested approximations — plus a round-off floor.
//! Until it meets the tolerance the driver takes the active index with the
//! largest |Δ_k| and adds each of its forward neighbours k + e_j whose
//! backward neighbours are all in, so an integrand that varies along one
//! variable is refined along that one, and mixed refinements are made
//! only where they pay. The driver never evaluates nodes that would take
//! the total past the node budget, nor a level finer than
//! [`super::nested::MAX_LEVEL`]: it then returns what it has, flagged as
//! not converged. The nodes of a step are evaluated in one batch.

use std::collections::{HashMap, HashSet};

use super::adapt::{Estimate, Integrand, Tolerance, BATCH};
use super::nested::{count, fejer, MAX_LEVEL};
use super::surface::{Compensated, Patch, Surface, MAX_DIM};

/// Round-off floor of the error estimate, in units of ε Σ|w f|.
const ROUND_OFF: f64 = 16.0;
/// The error estimate is this many times the sum of the last |Δ_k|: the
/// Δs left to come add up to more than the last ones where the sparse grid
/// converges slowly (a source off the axis, an off-centre plane; measured
/// up to 20 times in tests/quadrature.rs).
const SAFETY: f64 = 50.0;

/// The Smolyak level every variable starts from, by the tolerance asked:
/// 1 for about 3 digits, 2 for 6, 3 for 9 or more (levels are counted from
/// 0 here: the sum of the variables' levels above the coarsest).
fn start_level(tol: &Tolerance) -> usize {
    let asked = if tol.rel > 0.0 { tol.rel } else { tol.abs };
    let digits = if asked > 0.0 && asked.is_finite() {
        -asked.log10()
    } else {
        16.0
    };
    ((digits / 3.0).ceil() as usize).clamp(1, 3)
}

/// The integral over `surface` by the dimension-adaptive sparse grid (see
/// the module documentation), with the integrand evaluated in batches as
/// in [`super::integrate_batch`].
pub(crate) fn integrate(surface: &Surface, f: &mut Integrand<'_>, tol: Tolerance) -> Estimate {
    Driver {
        grids: surface.patches().iter().map(Grid::new).collect(),
        f,
        dim: surface.dim(),
        nodes: 0,
        max_nodes: tol.max_nodes,
        last: None,
    }
    .run(tol)
}

/// A multi-index: one level (1 ≤ l ≤ [`MAX_LEVEL`]) per variable, up to
/// [`MAX_DIM`] - 1 variables; unused entries are 0.
type Index = [u8; MAX_DIM - 1];

/// An index of the active set: its contribution Δ to the integral and to
/// Σ|w f|.
#[derive(Clone, Copy, Debug)]
struct Active {
    index: Index,
    delta: f64,
    abs: f64,
    /// The rounding in Δ: 2ε Σ |w f| over its terms.
    noise: f64,
}

/// The sparse grid of one patch.
struct Grid<'a> {
    patch: &'a Patch,
    exponents: Vec<(f64, f64)>,
    /// Per variable, per level (from 1): the level's nodes in order of
    /// appearance and the differences of weights w_l - w_{l-1} (the first
    /// variable's factor folded in).
    rules: Vec<Vec<(Vec<f64>, Vec<f64>)>>,
    /// f(+) + f(-) and |f(+)| + |f(-)| (the two signs of S^0) at the new
    /// nodes of each index evaluated, row-major in the variables.
    blocks: HashMap<Index, Vec<(f64, f64)>>,
    /// Indices whose forward neighbours have been considered.
    old: HashSet<Index>,
    /// Contributions of the old indices, kept for the total.
    old_sum: Vec<(f64, f64)>,
    active: Vec<Active>,
}

impl<'a> Grid<'a> {
    fn new(patch: &'a Patch) -> Grid<'a> {
        let exponents = patch.exponents();
        Grid {
            patch,
            rules: vec![Vec::new(); exponents.len()],
            exponents,
            blocks: HashMap::new(),
            old: HashSet::new(),
            old_sum: Vec::new(),
            active: Vec::new(),
        }
    }

    fn vars(&self) -> usize {
        self.exponents.len()
    }

    /// Nodes and weight differences of variable `j` at `level`.
    fn rule(&mut self, j: usize, level: usize) -> &(Vec<f64>, Vec<f64>) {
        while self.rules[j].len() < level {
            let l = self.rules[j].len() + 1;
            let (alpha, beta) = self.exponents[j];
            let fine = fejer(l, alpha, beta);
            let mut dw = fine.weights.clone();
            if l > 1 {
                let coarse = fejer(l - 1, alpha, beta);
                for (d, w) in dw.iter_mut().zip(&coarse.weights) {
                    *d -= w;
                }
            }
            if j == 0 {
                for (d, &x) in dw.iter_mut().zip(&fine.nodes) {
                    *d *= self.patch.factor(x);
                }
            }
            self.rules[j].push((fine.nodes.clone(), dw));
        }
        &self.rules[j][level - 1]
    }

    /// How many integrand values the new nodes of `index` take.
    fn new_nodes(&self, index: &Index) -> usize {
        (0..self.vars()).fold(2, |n, j| n * (1usize << (index[j] - 1)))
    }

    /// Points and normals of the new nodes of `index` (each node twice,
    /// with S^0's + then -), appended to `points` and `normals`.
    fn place(&mut self, index: &Index, points: &mut Vec<f64>, normals: &mut Vec<f64>) {
        let m = self.vars();
        let dim = m + 1;
        let nodes: Vec<Vec<f64>> = (0..m)
            .map(|j| {
                let l = index[j] as usize;
                let (x, _) = self.rule(j, l);
                x[count(l - 1)..].to_vec()
            })
            .collect();
        let mut xs = vec![0.0; m];
        let mut odometer = vec![0usize; m];
        let (mut p, mut n) = (vec![0.0; dim], vec![0.0; dim]);
        loop {
            for j in 0..m {
                xs[j] = nodes[j][odometer[j]];
            }
            for sign in [1.0, -1.0] {
                self.patch.place(&xs, sign, &mut p, &mut n);
                points.extend_from_slice(&p);
                normals.extend_from_slice(&n);
            }
            if !advance(&mut odometer, |j| nodes[j].len()) {
                break;
            }
        }
    }

    /// Δ of `index`: Σ over the nodes of its full tensor rule of
    /// Π_j (w_{l_j} - w_{l_j - 1}) f, from the blocks of every index below it.
    fn delta(&mut self, index: &Index) -> (f64, f64, f64) {
        let m = self.vars();
        for (j, &level) in index[..m].iter().enumerate() {
            self.rule(j, level as usize);
        }
        let dws: Vec<&[f64]> = (0..m)
            .map(|j| self.rules[j][index[j] as usize - 1].1.as_slice())
            .collect();
        let (mut value, mut abs, mut noise) = (Compensated::default(), 0.0, 0.0);
        // Every index k ≤ index, and within its block every node.
        let mut below = vec![1usize; m];
        loop {
            let mut key: Index = [0; MAX_DIM - 1];
            for j in 0..m {
                key[j] = below[j] as u8;
            }
            let block = &self.blocks[&key];
            let starts: Vec<usize> = below.iter().map(|&l| count(l - 1)).collect();
            let sizes: Vec<usize> = below.iter().map(|&l| 1usize << (l - 1)).collect();
            let mut at = vec![0usize; m];
            for &(g, a) in block {
                let w: f64 = (0..m).map(|j| dws[j][starts[j] + at[j]]).product();
                value.add(w * g);
                abs += w * a;
                noise += w.abs() * a;
                advance(&mut at, |j| sizes[j]);
            }
            if !advance_below(&mut below, index) {
                break;
            }
        }
        (value.value(), abs, 2.0 * f64::EPSILON * noise)
    }
}

/// The next tuple in row-major order (the last variable fastest), each
/// entry j below `len(j)`; false after the last.
fn advance(odometer: &mut [usize], len: impl Fn(usize) -> usize) -> bool {
    for j in (0..odometer.len()).rev() {
        odometer[j] += 1;
        if odometer[j] < len(j) {
            return true;
        }
        odometer[j] = 0;
    }
    false
}

/// The next levels 1 ≤ below_j ≤ index_j; false after the last.
fn advance_below(below: &mut [usize], index: &Index) -> bool {
    for j in (0..below.len()).rev() {
        below[j] += 1;
        if below[j] <= index[j] as usize {
            return true;
        }
        below[j] = 1;
    }
    false
}

/// Why the driver stopped short.
enum Stop {
    /// The node budget or the finest level.
    Limit,
    /// A value that is not finite.
    NotFinite(f64),
}

struct Driver<'a, 'f, 'g> {
    grids: Vec<Grid<'a>>,
    f: &'f mut Integrand<'g>,
    dim: usize,
    nodes: usize,
    max_nodes: usize,
    /// The value when the estimate last met the tolerance on a whole
    /// layer.
    last: Option<f64>,
}

impl Driver<'_, '_, '_> {
    fn run(&mut self, tol: Tolerance) -> Estimate {
        // The Smolyak rule of the starting level: every index whose levels
        // above 1 add up to at most `start`; those at `start` are active.
        let start = start_level(&tol);
        let mut first: Vec<(usize, Index)> = Vec::new();
        for (g, grid) in self.grids.iter().enumerate() {
            let m = grid.vars();
            let mut levels = vec![1usize; m];
            let top = Index::default().map(|_| (start + 1) as u8);
            loop {
                if levels.iter().map(|l| l - 1).sum::<usize>() <= start {
                    let mut index: Index = [0; MAX_DIM - 1];
                    for j in 0..m {
                        index[j] = levels[j] as u8;
                    }
                    first.push((g, index));
                }
                if !advance_below(&mut levels, &top) {
                    break;
                }
            }
        }
        if let Err(stop) = self.add(&first, start) {
            return self.stop(stop, (f64::NAN, f64::INFINITY, 0.0));
        }
        // The active indices of the starting rule are a whole layer: every
        // variable refined once more everywhere.
        let mut whole = true;
        // The value when the estimate last met the tolerance on a whole
        // layer.
        loop {
            let (value, error, magnitude) = self.totals();
            if error <= tol.target(value) {
                if whole {
                    // Met twice in a row, with the value moved by less than
                    // the tolerance in between: converged.
                    if let Some(change) = self.last.map(|p| (value - p).abs()) {
                        if change <= tol.target(value) {
                            return self.estimate(value, error.max(change), magnitude, true);
                        }
                    }
                    self.last = Some(value);
                }
                // Believe it only after refining every variable of every
                // index once more: the margin of the set, whose Δs become
                // the active set and the estimate.
                let margin = match self.margin() {
                    Ok(margin) => margin,
                    Err(stop) => return self.stop(stop, (value, error, magnitude)),
                };
                for grid in &mut self.grids {
                    for active in std::mem::take(&mut grid.active) {
                        grid.old.insert(active.index);
                        grid.old_sum.push((active.delta, active.abs));
                    }
                }
                if let Err(stop) = self.add(&margin, 0) {
                    return self.stop(stop, (value, error, magnitude));
                }
                whole = true;
                continue;
            }
            whole = false;
            // Refine the active index with the largest contribution.
            let Some((g, k)) = self.largest() else {
                return self.estimate(value, error, magnitude, false);
            };
            let active = self.grids[g].active.remove(k);
            let index = active.index;
            self.grids[g].old.insert(index);
            self.grids[g].old_sum.push((active.delta, active.abs));
            let grid = &self.grids[g];
            let mut next = Vec::new();
            for j in 0..grid.vars() {
                let mut forward = index;
                forward[j] += 1;
                if forward[j] as usize > MAX_LEVEL {
                    return self.estimate(value, error, magnitude, false);
                }
                // New, and admissible: every backward neighbour is old.
                let present = grid.active.iter().any(|a| a.index == forward);
                let admissible = !present
                    && (0..grid.vars()).all(|i| {
                        let mut back = forward;
                        back[i] -= 1;
                        back[i] == 0 || grid.old.contains(&back)
                    });
                if admissible {
                    next.push((g, forward));
                }
            }
            if let Err(stop) = self.add(&next, 0) {
                return self.stop(stop, (value, error, magnitude));
            }
        }
    }

    /// Evaluates the new nodes of `indices` in one batch and works out their
    /// Δs; those whose levels above 1 add up to less than `old_below` go to
    /// the old set, the others are active.
    fn add(&mut self, indices: &[(usize, Index)], old_below: usize) -> Result<(), Stop> {
        let total: usize = indices
            .iter()
            .map(|(g, k)| self.grids[*g].new_nodes(k))
            .sum();
        if self.nodes.saturating_add(total) > self.max_nodes {
            return Err(Stop::Limit);
        }
        let (mut points, mut normals) = (Vec::with_capacity(total * self.dim), Vec::new());
        normals.reserve(total * self.dim);
        for (g, k) in indices {
            self.grids[*g].place(k, &mut points, &mut normals);
        }
        let mut values = vec![0.0; total];
        let dim = self.dim;
        for ((p, n), out) in points
            .chunks(BATCH * dim)
            .zip(normals.chunks(BATCH * dim))
            .zip(values.chunks_mut(BATCH))
        {
            (self.f)(p, n, out);
            if let Some(bad) = out.iter().find(|v| !v.is_finite()) {
                self.nodes += total;
                return Err(Stop::NotFinite(*bad));
            }
        }
        self.nodes += total;
        let mut at = 0;
        for (g, k) in indices {
            let grid = &mut self.grids[*g];
            let n = grid.new_nodes(k);
            let block = values[at..at + n]
                .chunks_exact(2)
                .map(|pair| (pair[0] + pair[1], pair[0].abs() + pair[1].abs()))
                .collect();
            at += n;
            grid.blocks.insert(*k, block);
        }
        for (g, k) in indices {
            let grid = &mut self.grids[*g];
            let (delta, abs, noise) = grid.delta(k);
            let above: usize = k[..grid.vars()].iter().map(|&l| l as usize - 1).sum();
            if above < old_below {
                grid.old.insert(*k);
                grid.old_sum.push((delta, abs));
            } else {
                grid.active.push(Active {
                    index: *k,
                    delta,
                    abs,
                    noise,
                });
            }
        }
        Ok(())
    }

    /// Every index outside the set with a backward neighbour in it: the
    /// indices a refinement of every variable of every index adds.
    fn margin(&self) -> Result<Vec<(usize, Index)>, Stop> {
        let mut margin = Vec::new();
        for (g, grid) in self.grids.iter().enumerate() {
            let inside =
                |k: &Index| grid.old.contains(k) || grid.active.iter().any(|a| a.index == *k);
            let mut seen: HashSet<Index> = HashSet::new();
            let all = grid
                .old
                .iter()
                .copied()
                .chain(grid.active.iter().map(|a| a.index));
            let mut all: Vec<Index> = all.collect();
            all.sort_unstable();
            for k in all {
                for j in 0..grid.vars() {
                    let mut forward = k;
                    forward[j] += 1;
                    if inside(&forward) || !seen.insert(forward) {
                        continue;
                    }
                    if forward[j] as usize > MAX_LEVEL {
                        return Err(Stop::Limit);
                    }
                    margin.push((g, forward));
                }
            }
        }
        Ok(margin)
    }

    /// The integral (every Δ), the error estimate (the active |Δ|s and the
    /// round-off floor) and Σ|w f|.
    fn totals(&self) -> (f64, f64, f64) {
        let mut value = Compensated::default();
        let mut abs = 0.0;
        for grid in &self.grids {
            for &(d, a) in &grid.old_sum {
                value.add(d);
                abs += a;
            }
            for active in &grid.active {
                value.add(active.delta);
                abs += active.abs;
            }
        }
        let abs: f64 = abs.abs();
        let floor = ROUND_OFF * f64::EPSILON * abs;
        // A |Δ| above the rounding floor and its own rounding counts
        // SAFETY times.
        let error: f64 = self
            .grids
            .iter()
            .flat_map(|g| &g.active)
            .map(|a| {
                let d = a.delta.abs();
                if d > floor.max(a.noise) {
                    SAFETY * d
                } else {
                    d
                }
            })
            .sum();
        (value.value(), error + floor, abs)
    }

    /// The grid and position of the active index with the largest |Δ|
    /// (the first such, in order).
    fn largest(&self) -> Option<(usize, usize)> {
        let mut best: Option<(usize, usize, f64)> = None;
        for (g, grid) in self.grids.iter().enumerate() {
            for (k, active) in grid.active.iter().enumerate() {
                if best.map_or(true, |(_, _, d)| active.delta.abs() > d) {
                    best = Some((g, k, active.delta.abs()));
                }
            }
        }
        best.map(|(g, k, _)| (g, k))
    }

    fn stop(&self, stop: Stop, (value, error, magnitude): (f64, f64, f64)) -> Estimate {
        match stop {
            Stop::Limit => self.estimate(value, error, magnitude, false),
            Stop::NotFinite(bad) => self.estimate(bad, f64::INFINITY, magnitude, false),
        }
    }

    fn estimate(&self, value: f64, error: f64, magnitude: f64, converged: bool) -> Estimate {
        // Stopped short: the value has moved by this much since the
        // estimate last met the tolerance.
        let error = match self.last {
            Some(p) if !converged => error.max((value - p).abs()),
            _ => error,
        };
        Estimate {
            value,
            error,
            nodes: self.nodes,
            magnitude,
            converged,
        }
    }
}
