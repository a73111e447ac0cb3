//! The adaptive driver: integrate over a [`Surface`] to a tolerance, with an
//! error estimate and a hard node budget.
//!
//! Each patch of the surface is a product rule with one resolution per
//! variable, starting from 6 points each. A round evaluates the rule at the
//! current resolutions (the base) and, for each variable alone, at half as
//! many points again (a probe). The change a probe makes is that variable's
//! error indicator; the error estimate is the sum of the indicators plus a
//! round-off floor, and the value reported is the base plus every probe's
//! correction. If the estimate meets the tolerance the driver stops;
//! otherwise it refines every variable whose indicator is above its share
//! of the tolerance and goes round again, so an integrand that varies along
//! one variable refines that one only. Variables far below their share are
//! not probed again until the estimate meets the tolerance; then one more
//! round probes them at the final resolutions, so the estimate returned as
//! converged rests on probes of every variable — unless the node budget
//! runs out in that last round: the estimate, which met the tolerance with
//! the settled variables' indicators from their earlier probes, is then
//! returned as converged. The driver never evaluates a rule that would take
//! the total past the node budget: otherwise it returns what it has,
//! flagged as not converged.

use super::surface::{Compensated, Patch, Surface};

/// When the driver may stop: once the error estimate is at most
/// max(`abs`, `rel` · |value|), or before evaluating more than `max_nodes`
/// integrand values in total.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tolerance {
    pub abs: f64,
    pub rel: f64,
    pub max_nodes: usize,
}

impl Tolerance {
    /// The node budget unless set otherwise: about a second of a cheap
    /// integrand.
    pub const DEFAULT_MAX_NODES: usize = 20_000_000;

    /// An absolute tolerance.
    pub fn absolute(abs: f64) -> Tolerance {
        Tolerance {
            abs,
            rel: 0.0,
            max_nodes: Tolerance::DEFAULT_MAX_NODES,
        }
    }

    /// A tolerance relative to the value. For integrals that may vanish, add
    /// an absolute floor with [`Tolerance::with_abs`].
    pub fn relative(rel: f64) -> Tolerance {
        Tolerance {
            abs: 0.0,
            rel,
            max_nodes: Tolerance::DEFAULT_MAX_NODES,
        }
    }

    pub fn with_abs(self, abs: f64) -> Tolerance {
        Tolerance { abs, ..self }
    }

    pub fn with_rel(self, rel: f64) -> Tolerance {
        Tolerance { rel, ..self }
    }

    pub fn with_max_nodes(self, max_nodes: usize) -> Tolerance {
        Tolerance { max_nodes, ..self }
    }

    pub(crate) fn target(&self, value: f64) -> f64 {
        self.abs.max(self.rel * value.abs())
    }
}

/// The result of [`integrate`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Estimate {
    /// The integral.
    pub value: f64,
    /// The error estimate: the sum of the changes that refining each
    /// variable alone made, plus a round-off floor of 16 ε Σ|w f|. Infinite
    /// when no full round fitted in the budget or the integrand was not
    /// finite at some node.
    pub error: f64,
    /// How many times the integrand was evaluated.
    pub nodes: usize,
    /// Σ|w f| over the last rule summed: the size of the integrand's
    /// contributions, against which a vanishing integral is judged.
    pub magnitude: f64,
    /// Whether the error estimate met the tolerance. When false the driver
    /// stopped on the node budget, on a value that was not finite (NaN or
    /// infinite at some node: refining cannot help), on the round-off floor,
    /// or on the largest rule it builds, with `value` and `error` as they
    /// stood.
    pub converged: bool,
}

/// The most nodes a one-dimensional factor is allowed.
const MAX_PER_VAR: usize = 4096;
/// The resolution every variable starts from.
const START: usize = 6;
/// The next resolution of a variable: half as many points again.
fn finer(n: usize) -> usize {
    n + n / 2
}

/// A variable whose indicator is below this fraction of its share of the
/// tolerance is settled.
const SETTLED: f64 = 0.01;
/// Round-off floor of the error estimate, in units of ε Σ|w f|.
const ROUND_OFF: f64 = 16.0;

/// ∫ f(x, N(x)) dS over `surface`, where N is the outward unit normal (see
/// each [`Surface`] constructor for the plane's), refined until the error
/// estimate meets `tol` or the node budget is spent. Never loops forever.
///
/// The estimate bounds the true error when each refinement of a variable at
/// least halves that variable's error, as it does (geometrically) for
/// integrands smooth on the surface; check [`Surface::check_clear`] first
/// so that no singularity lies on or near it. A NaN or infinite value at any
/// node ends the integration at once, not converged.
pub fn integrate(surface: &Surface, f: impl Fn(&[f64], &[f64]) -> f64, tol: Tolerance) -> Estimate {
    integrate_batch(
        surface,
        |points, normals, out| {
            let dim = surface.dim();
            for ((x, n), v) in points
                .chunks_exact(dim)
                .zip(normals.chunks_exact(dim))
                .zip(out.iter_mut())
            {
                *v = f(x, n);
            }
        },
        tol,
    )
}

/// The largest dimension in which surfaces other than turned spheres are
/// integrated by product rules: above it the product rule's 2·6^(d-1)
/// starting nodes alone pass the budgets, and the sparse grid takes over.
pub const PRODUCT_MAX_DIM: usize = 6;

/// The integrand as the drivers call it: points, normals, values out.
pub(crate) type Integrand<'a> = dyn FnMut(&[f64], &[f64], &mut [f64]) + 'a;

/// Nodes handed to the integrand at once by [`integrate_batch`].
pub const BATCH: usize = 4096;

/// [`integrate`] with the integrand evaluated in batches:
/// `f(points, normals, out)` receives up to [`BATCH`] nodes, their points
/// and outward normals flat (d coordinates each), and writes one value per
/// node into `out`.
pub fn integrate_batch(
    surface: &Surface,
    mut f: impl FnMut(&[f64], &[f64], &mut [f64]),
    tol: Tolerance,
) -> Estimate {
    if surface.aligned() || surface.dim() > PRODUCT_MAX_DIM {
        return super::sparse::integrate(surface, &mut f, tol);
    }
    Driver {
        patches: surface.patches(),
        f: &mut f,
        nodes: 0,
        max_nodes: tol.max_nodes,
        magnitude: 0.0,
    }
    .run(tol)
}

/// Σ w f over a rule, and Σ |w f|.
#[derive(Clone, Copy, Debug)]
struct Sum {
    value: f64,
    abs: f64,
}

/// What the driver knows about one variable of one patch.
#[derive(Clone, Copy, Debug)]
struct Var {
    /// Its resolution.
    n: usize,
    /// The rule with this variable at `finer(n)`, the others as they are,
    /// while the patch's resolutions have not changed since it was taken.
    probe: Option<Sum>,
    /// |probe - base| when last probed, possibly at other resolutions of the
    /// other variables.
    indicator: f64,
    /// Far below its share of the tolerance: not probed again until the
    /// final round, which probes every variable at the final resolutions.
    settled: bool,
}

/// One patch: its base rule and its variables.
struct State {
    base: Sum,
    vars: Vec<Var>,
}

struct Driver<'a> {
    patches: &'a [Patch],
    f: &'a mut Integrand<'a>,
    nodes: usize,
    max_nodes: usize,
    /// Σ|w f| of the current rules.
    magnitude: f64,
}

impl Driver<'_> {
    fn run(&mut self, tol: Tolerance) -> Estimate {
        let mut states: Vec<State> = Vec::with_capacity(self.patches.len());
        for patch in self.patches {
            let vars = vec![
                Var {
                    n: START,
                    probe: None,
                    indicator: f64::INFINITY,
                    settled: false,
                };
                patch.vars()
            ];
            let base = match self.eval(patch, &resolutions(&vars)) {
                Some(base) if base.value.is_finite() => base,
                Some(base) => return self.stop(base.value, f64::INFINITY),
                None => return self.stop(f64::NAN, f64::INFINITY),
            };
            states.push(State { base, vars });
        }
        let count: usize = states.iter().map(|s| s.vars.len()).sum();
        let mut best = (states.iter().map(|s| s.base.value).sum(), f64::INFINITY);
        loop {
            // Probe every variable that is neither settled nor probed at the
            // current resolutions.
            for (patch, state) in self.patches.iter().zip(&mut states) {
                for j in 0..state.vars.len() {
                    let var = state.vars[j];
                    if var.settled || var.probe.is_some() {
                        continue;
                    }
                    let mut res = resolutions(&state.vars);
                    res[j] = finer(var.n);
                    if res[j] > MAX_PER_VAR {
                        return self.stop(best.0, best.1);
                    }
                    let probe = match self.eval(patch, &res) {
                        Some(probe) if probe.value.is_finite() => probe,
                        Some(probe) => return self.stop(probe.value, f64::INFINITY),
                        // The budget ran out in the round that re-probes the
                        // settled variables: the estimate already met the
                        // tolerance (their indicators are from earlier
                        // probes), so it stands.
                        None if best.1 <= tol.target(best.0) => {
                            return self.done(best.0, best.1);
                        }
                        None => return self.stop(best.0, best.1),
                    };
                    state.vars[j].probe = Some(probe);
                    state.vars[j].indicator = (probe.value - state.base.value).abs();
                }
            }
            // The base values plus every fresh probe's correction; the error
            // adds every indicator, fresh or not, and the round-off floor.
            let (mut value, mut abs, mut indicators) = (0.0, 0.0, 0.0);
            let mut complete = true;
            for state in &states {
                value += state.base.value;
                abs += state.base.abs;
                for var in &state.vars {
                    indicators += var.indicator;
                    match var.probe {
                        Some(probe) => value += probe.value - state.base.value,
                        None => complete = false,
                    }
                }
            }
            let error = indicators + ROUND_OFF * f64::EPSILON * abs;
            best = (value, error);
            self.magnitude = abs;
            let target = tol.target(value);
            if error <= target {
                if complete {
                    return self.done(value, error);
                }
                // Check the settled variables at the final resolutions.
                for state in &mut states {
                    for var in &mut state.vars {
                        var.settled = false;
                    }
                }
                continue;
            }
            // Refine every variable above its share of the tolerance; settle
            // those far below it.
            let share = target / count as f64;
            let mut refined = false;
            for (patch, state) in self.patches.iter().zip(&mut states) {
                let above: Vec<usize> = (0..state.vars.len())
                    .filter(|&j| state.vars[j].indicator > share)
                    .collect();
                for var in &mut state.vars {
                    var.settled = var.indicator <= SETTLED * share;
                }
                if above.is_empty() {
                    continue;
                }
                refined = true;
                let base = match above[..] {
                    [j] if state.vars[j].probe.is_some() => state.vars[j].probe,
                    _ => None,
                };
                for &j in &above {
                    state.vars[j].n = finer(state.vars[j].n);
                }
                for var in &mut state.vars {
                    var.probe = None;
                }
                state.base = match base {
                    Some(base) => base,
                    None => match self.eval(patch, &resolutions(&state.vars)) {
                        Some(base) if base.value.is_finite() => base,
                        Some(base) => return self.stop(base.value, f64::INFINITY),
                        None => return self.stop(best.0, best.1),
                    },
                };
            }
            if !refined {
                // The round-off floor alone is above the tolerance.
                return self.stop(best.0, best.1);
            }
        }
    }

    /// Σ w f over `patch` at resolutions `res`, or `None` if that would
    /// take the node count past the budget.
    fn eval(&mut self, patch: &Patch, res: &[usize]) -> Option<Sum> {
        let size = patch.size(res);
        if self.nodes.saturating_add(size) > self.max_nodes {
            return None;
        }
        self.nodes += size;
        let mut sum = Compensated::default();
        let dim = patch.vars() + 1;
        let mut batch = Batch::new(dim);
        let f = &mut *self.f;
        patch.for_each(res, &mut |x, normal, w| {
            if batch.push(x, normal, w) {
                batch.flush(f, &mut sum);
            }
        });
        batch.flush(f, &mut sum);
        Some(Sum {
            value: sum.value(),
            abs: sum.abs(),
        })
    }

    fn stop(&self, value: f64, error: f64) -> Estimate {
        Estimate {
            value,
            error,
            nodes: self.nodes,
            magnitude: self.magnitude,
            converged: false,
        }
    }

    fn done(&self, value: f64, error: f64) -> Estimate {
        Estimate {
            converged: true,
            ..self.stop(value, error)
        }
    }
}

/// Nodes gathered for one call of the integrand.
struct Batch {
    points: Vec<f64>,
    normals: Vec<f64>,
    weights: Vec<f64>,
    out: Vec<f64>,
}

impl Batch {
    fn new(dim: usize) -> Batch {
        Batch {
            points: Vec::with_capacity(BATCH * dim),
            normals: Vec::with_capacity(BATCH * dim),
            weights: Vec::with_capacity(BATCH),
            out: Vec::with_capacity(BATCH),
        }
    }

    /// Adds a node; true when the batch is full.
    fn push(&mut self, x: &[f64], normal: &[f64], w: f64) -> bool {
        self.points.extend_from_slice(x);
        self.normals.extend_from_slice(normal);
        self.weights.push(w);
        self.weights.len() == BATCH
    }

    /// Evaluates the nodes gathered and adds w f of each to `sum`, in
    /// order.
    fn flush(&mut self, f: &mut Integrand<'_>, sum: &mut Compensated) {
        if self.weights.is_empty() {
            return;
        }
        self.out.clear();
        self.out.resize(self.weights.len(), 0.0);
        f(&self.points, &self.normals, &mut self.out);
        for (w, v) in self.weights.iter().zip(&self.out) {
            sum.add(w * v);
        }
        self.points.clear();
        self.normals.clear();
        self.weights.clear();
    }
}

fn resolutions(vars: &[Var]) -> Vec<usize> {
    vars.iter().map(|v| v.n).collect()
}
