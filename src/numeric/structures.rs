//! Tensor structures of a correlator with spinning insertions, in physical
//! space (docs/conventions.md §16).
//!
//! Building blocks at a spinning bulk point x: with a wall, one unit vector
//! per boundary point s, X[s] = I(x - s)·n with the inversion tensor
//! I(v) = δ - 2 v v/|v|² (the image of the normal under the inversion about
//! s: covariant under the conformal maps that keep the wall); without a
//! wall, Z[q,r] = (x - q)/|x - q|² - (x - r)/|x - r|² for two other points;
//! between two spinning points the inversion tensor I(x_p - x_q). Candidate
//! structures are the symmetric traceless products of these; which are
//! independent is decided by the numerical rank of their components at
//! pseudo-random configurations (a Jacobi SVD), never assumed, and the
//! count is set beside the one the symmetry left by the points predicts.
//!
//! The conservation of a spinning operator, ∂_μ of Σ_i f_i(η) K S^i_μ…, is
//! worked out in exact rational arithmetic at rational configurations: the
//! divergence divided by the prefactor is rational in the coordinates. Its
//! projections on the building blocks are rational functions of the
//! cross-ratio; they are reconstructed by exact interpolation and verified
//! exactly at further configurations.

use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

use crate::diagnostic::{Error, ErrorKind, Result};

/// Relative size of a singular value below which it counts as zero.
pub const RANK_TOLERANCE: f64 = 1e-9;
/// Configurations at which the rank is taken (the largest rank counts).
const RANK_CONFIGURATIONS: usize = 4;
/// Largest spin handled.
pub const MAX_SPIN: usize = 2;

fn numeric(why: impl Into<String>) -> Error {
    Error::new(ErrorKind::Numeric, why)
}

// ───────────────────────────── arithmetic ─────────────────────────────

/// The arithmetic the structures are evaluated in: f64 for ranks and fits,
/// exact rationals for the conservation relations.
pub trait Field: Clone + std::fmt::Debug {
    fn int(i: i64) -> Self;
    fn ratio(r: &BigRational) -> Self;
    fn add(&self, o: &Self) -> Self;
    fn sub(&self, o: &Self) -> Self;
    fn mul(&self, o: &Self) -> Self;
    fn div(&self, o: &Self) -> Self;
    fn is_zero(&self) -> bool;
}

impl Field for f64 {
    fn int(i: i64) -> Self {
        i as f64
    }
    fn ratio(r: &BigRational) -> Self {
        r.to_f64().unwrap_or(f64::NAN)
    }
    fn add(&self, o: &Self) -> Self {
        self + o
    }
    fn sub(&self, o: &Self) -> Self {
        self - o
    }
    fn mul(&self, o: &Self) -> Self {
        self * o
    }
    fn div(&self, o: &Self) -> Self {
        self / o
    }
    fn is_zero(&self) -> bool {
        *self == 0.0
    }
}

impl Field for BigRational {
    fn int(i: i64) -> Self {
        BigRational::from_integer(BigInt::from(i))
    }
    fn ratio(r: &BigRational) -> Self {
        r.clone()
    }
    fn add(&self, o: &Self) -> Self {
        self + o
    }
    fn sub(&self, o: &Self) -> Self {
        self - o
    }
    fn mul(&self, o: &Self) -> Self {
        self * o
    }
    fn div(&self, o: &Self) -> Self {
        self / o
    }
    fn is_zero(&self) -> bool {
        Zero::is_zero(self)
    }
}

fn dot<F: Field>(a: &[F], b: &[F]) -> F {
    a.iter()
        .zip(b)
        .fold(F::int(0), |acc, (x, y)| acc.add(&x.mul(y)))
}

fn diff<F: Field>(a: &[F], b: &[F]) -> Vec<F> {
    a.iter().zip(b).map(|(x, y)| x.sub(y)).collect()
}

fn scale<F: Field>(a: &[F], s: &F) -> Vec<F> {
    a.iter().map(|x| x.mul(s)).collect()
}

// ───────────────────────────── the set-up ─────────────────────────────

/// One insertion of the correlator.
#[derive(Clone, Debug, PartialEq)]
pub struct Insertion {
    /// The operator's name and its point's name.
    pub name: String,
    pub point: String,
    pub boundary: bool,
    pub spin: usize,
    /// The scaling dimension, when it is a number.
    pub dim: Option<BigRational>,
    pub conserved: bool,
}

/// A correlator to find the structures of.
#[derive(Clone, Debug, PartialEq)]
pub struct Setup {
    pub d: usize,
    pub wall: bool,
    pub ops: Vec<Insertion>,
}

/// A covariant vector at a spinning point.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Label {
    /// X[s] = I(x - s)·n for the boundary insertion s (an op index).
    Wall(usize),
    /// Z[q,r] = (x - q)/|x - q|² - (x - r)/|x - r|², q < r (op indices).
    Pair(usize, usize),
}

/// One factor of a candidate structure.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Factor {
    /// A building block at spinning op `0`.
    Vector(usize, Label),
    /// The inversion tensor between two spinning ops (p < q).
    Inversion(usize, usize),
}

/// A structure: a combination of products of factors, each product made
/// symmetric and traceless at every spinning point.
#[derive(Clone, Debug, PartialEq)]
pub struct Structure {
    pub terms: Vec<(i64, Vec<Factor>)>,
}

impl Setup {
    fn spinning(&self) -> Vec<usize> {
        (0..self.ops.len())
            .filter(|&k| self.ops[k].spin > 0)
            .collect()
    }

    /// The building blocks at spinning op `p`.
    fn labels(&self, p: usize) -> Vec<Label> {
        if self.wall {
            (0..self.ops.len())
                .filter(|&k| self.ops[k].boundary)
                .map(Label::Wall)
                .collect()
        } else {
            let others: Vec<usize> = (0..self.ops.len()).filter(|&k| k != p).collect();
            let mut out = Vec::new();
            for (i, &q) in others.iter().enumerate() {
                for &r in &others[i + 1..] {
                    out.push(Label::Pair(q, r));
                }
            }
            out
        }
    }

    /// Refuses what this module does not handle, saying what it does.
    pub fn validate(&self) -> Result<()> {
        let spinning = self.spinning();
        if spinning.is_empty() {
            return Err(numeric(
                "no insertion has spin: a correlator of scalars has one structure, the scalar prefactor",
            ));
        }
        for op in &self.ops {
            if op.spin > MAX_SPIN {
                return Err(numeric(format!(
                    "`{}` has spin {}; structures are listed up to spin {MAX_SPIN}",
                    op.name, op.spin
                )));
            }
            if op.boundary && op.spin > 0 {
                return Err(numeric(format!(
                    "`{}` is a boundary operator with indices; only boundary scalars are handled",
                    op.name
                )));
            }
        }
        if self.wall {
            let bulk = self.ops.iter().filter(|o| !o.boundary).count();
            let bdy = self.ops.len() - bulk;
            if bulk != 1 || !(1..=2).contains(&bdy) {
                return Err(numeric(
                    "with a wall, the structures are listed for one bulk operator and one or two boundary scalars",
                ));
            }
        } else {
            if self.ops.iter().any(|o| o.boundary) {
                return Err(numeric("a boundary operator needs `halfspace`"));
            }
            if !(2..=3).contains(&self.ops.len()) || spinning.len() > 2 {
                return Err(numeric(
                    "without a wall, the structures are listed for two or three bulk operators, at most two with spin",
                ));
            }
        }
        if self.d < 3 {
            return Err(numeric("structures are listed in dimension 3 and above"));
        }
        Ok(())
    }

    /// Every candidate product: at each spinning op, `spin` slots filled by
    /// inversion tensors to the other spinning op and building blocks.
    pub fn candidates(&self) -> Vec<Vec<Factor>> {
        let spinning = self.spinning();
        let mut out = Vec::new();
        let pair_max = if spinning.len() == 2 {
            self.ops[spinning[0]].spin.min(self.ops[spinning[1]].spin)
        } else {
            0
        };
        for k in 0..=pair_max {
            // Multisets of labels at each spinning op.
            let mut partial: Vec<Vec<Factor>> = vec![vec![
                Factor::Inversion(
                    spinning[0],
                    *spinning.get(1).unwrap_or(&spinning[0]),
                );
                k
            ]];
            for &p in &spinning {
                let need = self.ops[p].spin - k;
                let labels = self.labels(p);
                let mut next = Vec::new();
                for base in &partial {
                    for combo in multisets(labels.len(), need) {
                        let mut f = base.clone();
                        f.extend(combo.iter().map(|&i| Factor::Vector(p, labels[i])));
                        next.push(f);
                    }
                }
                partial = next;
            }
            out.extend(partial);
        }
        out
    }
}

/// Multisets of `k` elements of 0..n, as sorted index lists.
fn multisets(n: usize, k: usize) -> Vec<Vec<usize>> {
    if k == 0 {
        return vec![vec![]];
    }
    let mut out = Vec::new();
    for rest in multisets(n, k - 1) {
        let start = rest.last().copied().unwrap_or(0);
        for i in start..n {
            let mut r = rest.clone();
            r.push(i);
            out.push(r);
        }
    }
    out
}

// ─────────────────────────── evaluation ───────────────────────────

/// Positions of every insertion (d coordinates, the normal one last).
pub type Config<F> = Vec<Vec<F>>;

fn normal<F: Field>(d: usize) -> Vec<F> {
    (0..d)
        .map(|i| F::int(if i + 1 == d { 1 } else { 0 }))
        .collect()
}

/// The building block `label` at point `x` (op `p`) and ∂_μ of it, as
/// M[μ][ν].
fn block<F: Field>(
    setup: &Setup,
    cfg: &Config<F>,
    p: usize,
    label: Label,
) -> (Vec<F>, Vec<Vec<F>>) {
    let d = setup.d;
    let x = &cfg[p];
    let delta = |m: usize, n: usize| F::int(i64::from(m == n));
    match label {
        Label::Wall(s) => {
            // X = n - 2 y w/|w|², w = x - s.
            let w = diff(x, &cfg[s]);
            let r2 = dot(&w, &w);
            let y = x[d - 1].clone();
            let two = F::int(2);
            let nrm = normal::<F>(d);
            let v: Vec<F> = (0..d)
                .map(|i| nrm[i].sub(&two.mul(&y).mul(&w[i]).div(&r2)))
                .collect();
            let r4 = r2.mul(&r2);
            let m = (0..d)
                .map(|mu| {
                    (0..d)
                        .map(|nu| {
                            let a = nrm[mu].mul(&w[nu]).div(&r2);
                            let b = y.mul(&delta(mu, nu)).div(&r2);
                            let c = two.mul(&y).mul(&w[mu]).mul(&w[nu]).div(&r4);
                            F::int(-2).mul(&a.add(&b).sub(&c))
                        })
                        .collect()
                })
                .collect();
            (v, m)
        }
        Label::Pair(q, r) => {
            let mut v = vec![F::int(0); d];
            let mut m = vec![vec![F::int(0); d]; d];
            for (sign, other) in [(1, q), (-1, r)] {
                let w = diff(x, &cfg[other]);
                let r2 = dot(&w, &w);
                let r4 = r2.mul(&r2);
                let s = F::int(sign);
                for i in 0..d {
                    v[i] = v[i].add(&s.mul(&w[i]).div(&r2));
                }
                for mu in 0..d {
                    for nu in 0..d {
                        let t = delta(mu, nu)
                            .div(&r2)
                            .sub(&F::int(2).mul(&w[mu]).mul(&w[nu]).div(&r4));
                        m[mu][nu] = m[mu][nu].add(&s.mul(&t));
                    }
                }
            }
            (v, m)
        }
    }
}

/// The components of one product of factors, symmetric and traceless at
/// every spinning op: a flat array over the slots (ops in order, `spin`
/// slots each), d^(Σ spin) entries.
fn product<F: Field>(setup: &Setup, cfg: &Config<F>, factors: &[Factor]) -> Vec<F> {
    let d = setup.d;
    let spinning = setup.spinning();
    // Slot positions of each spinning op.
    let mut first = vec![0; setup.ops.len()];
    let mut total = 0;
    for &p in &spinning {
        first[p] = total;
        total += setup.ops[p].spin;
    }
    let mut used = vec![0; setup.ops.len()];
    // Each factor: (slots it fills, its values by those slots' indices).
    enum Filled<F> {
        One(usize, Vec<F>),
        Two(usize, usize, Vec<Vec<F>>),
    }
    let mut filled = Vec::new();
    for f in factors {
        match *f {
            Factor::Vector(p, label) => {
                let slot = first[p] + used[p];
                used[p] += 1;
                filled.push(Filled::One(slot, block(setup, cfg, p, label).0));
            }
            Factor::Inversion(p, q) => {
                let (a, b) = (first[p] + used[p], first[q] + used[q]);
                used[p] += 1;
                used[q] += 1;
                let w = diff(&cfg[p], &cfg[q]);
                let w2 = dot(&w, &w);
                let i = (0..d)
                    .map(|m| {
                        (0..d)
                            .map(|n| {
                                F::int(i64::from(m == n))
                                    .sub(&F::int(2).mul(&w[m]).mul(&w[n]).div(&w2))
                            })
                            .collect()
                    })
                    .collect();
                filled.push(Filled::Two(a, b, i));
            }
        }
    }
    let size = d.pow(total as u32);
    let digits = |mut k: usize| -> Vec<usize> {
        let mut out = vec![0; total];
        for slot in (0..total).rev() {
            out[slot] = k % d;
            k /= d;
        }
        out
    };
    let mut t: Vec<F> = (0..size)
        .map(|k| {
            let idx = digits(k);
            filled.iter().fold(F::int(1), |acc, f| match f {
                Filled::One(s, v) => acc.mul(&v[idx[*s]]),
                Filled::Two(a, b, m) => acc.mul(&m[idx[*a]][idx[*b]]),
            })
        })
        .collect();
    // Symmetric and traceless in each spin-2 op's two slots.
    for &p in &spinning {
        if setup.ops[p].spin != 2 {
            continue;
        }
        let (a, b) = (first[p], first[p] + 1);
        let stride = |s: usize| d.pow((total - 1 - s) as u32);
        let (sa, sb) = (stride(a), stride(b));
        let half = F::int(1).div(&F::int(2));
        let sym: Vec<F> = (0..size)
            .map(|k| {
                let idx = digits(k);
                let swapped = k - idx[a] * sa - idx[b] * sb + idx[b] * sa + idx[a] * sb;
                t[k].add(&t[swapped]).mul(&half)
            })
            .collect();
        let dd = F::int(setup.d as i64);
        t = (0..size)
            .map(|k| {
                let idx = digits(k);
                if idx[a] != idx[b] {
                    return sym[k].clone();
                }
                let base = k - idx[a] * sa - idx[b] * sb;
                let trace = (0..d).fold(F::int(0), |acc, j| acc.add(&sym[base + j * sa + j * sb]));
                sym[k].sub(&trace.div(&dd))
            })
            .collect();
    }
    t
}

/// The components of a structure.
pub fn components<F: Field>(setup: &Setup, cfg: &Config<F>, s: &Structure) -> Vec<F> {
    let mut out: Option<Vec<F>> = None;
    for (c, factors) in &s.terms {
        let p = product(setup, cfg, factors);
        let c = F::int(*c);
        out = Some(match out {
            None => p.iter().map(|v| v.mul(&c)).collect(),
            Some(acc) => acc.iter().zip(&p).map(|(a, v)| a.add(&v.mul(&c))).collect(),
        });
    }
    out.unwrap_or_default()
}

// ─────────────────────────── configurations ───────────────────────────

/// Pseudo-random positions: bulk points at height in [1/4, 5/4), boundary
/// points on the wall, all within the unit cube around the origin and
/// apart by at least 1/4.
pub fn random_config(setup: &Setup, state: &mut u64) -> Config<f64> {
    let d = setup.d;
    loop {
        let cfg: Config<f64> = setup
            .ops
            .iter()
            .map(|op| {
                let mut p: Vec<f64> = (0..d).map(|_| 2.0 * super::splitmix(state) - 1.0).collect();
                if setup.wall {
                    p[d - 1] = if op.boundary {
                        0.0
                    } else {
                        0.25 + super::splitmix(state)
                    };
                }
                p
            })
            .collect();
        let apart = (0..cfg.len()).all(|i| {
            (i + 1..cfg.len()).all(|j| {
                let w = diff(&cfg[i], &cfg[j]);
                dot(&w, &w) > 1.0 / 16.0
            })
        });
        if apart {
            return cfg;
        }
    }
}

/// Pseudo-random rational positions (denominator `den`), as for
/// [`random_config`].
fn rational_config(setup: &Setup, state: &mut u64, den: i64) -> Config<BigRational> {
    let cfg = random_config(setup, state);
    cfg.iter()
        .map(|p| {
            p.iter()
                .map(|v| {
                    BigRational::new(
                        BigInt::from((v * den as f64).round() as i64),
                        BigInt::from(den),
                    )
                })
                .collect()
        })
        .collect()
}

/// The configuration with the points of ops `a` and `b` exchanged.
pub fn swapped<F: Clone>(cfg: &Config<F>, a: usize, b: usize) -> Config<F> {
    let mut c = cfg.clone();
    c.swap(a, b);
    c
}

// ─────────────────────────── cross-ratios ───────────────────────────

/// η = y² |s1 - s2|²/(|x - s1|² |x - s2|²) for a bulk point and two
/// boundary points (0 < η ≤ 1), and its gradient in x.
fn eta<F: Field>(setup: &Setup, cfg: &Config<F>) -> Option<(F, Vec<F>)> {
    if !setup.wall {
        return None;
    }
    let x = setup.ops.iter().position(|o| !o.boundary)?;
    let bdy: Vec<usize> = (0..setup.ops.len())
        .filter(|&k| setup.ops[k].boundary)
        .collect();
    if bdy.len() != 2 {
        return None;
    }
    let d = setup.d;
    let (w1, w2) = (diff(&cfg[x], &cfg[bdy[0]]), diff(&cfg[x], &cfg[bdy[1]]));
    let s = diff(&cfg[bdy[0]], &cfg[bdy[1]]);
    let (r1, r2) = (dot(&w1, &w1), dot(&w2, &w2));
    let y = cfg[x][d - 1].clone();
    let e = y.mul(&y).mul(&dot(&s, &s)).div(&r1.mul(&r2));
    // ∂η = η (2n/y - 2 w1/r1² - 2 w2/r2²).
    let two = F::int(2);
    let nrm = normal::<F>(d);
    let grad = (0..d)
        .map(|i| {
            let t = two
                .mul(&nrm[i])
                .div(&y)
                .sub(&two.mul(&w1[i]).div(&r1))
                .sub(&two.mul(&w2[i]).div(&r2));
            e.mul(&t)
        })
        .collect();
    Some((e, grad))
}

/// The value of η at a configuration (f64).
pub fn eta_value(setup: &Setup, cfg: &Config<f64>) -> Option<f64> {
    eta(setup, cfg).map(|(e, _)| e)
}

/// A configuration with η = `target`: s1 at the origin, s2 one unit along
/// the wall, x above, then turned, moved and scaled along the wall at
/// random (maps that keep η).
pub fn config_at_eta(setup: &Setup, target: f64, state: &mut u64) -> Option<Config<f64>> {
    let d = setup.d;
    let x = setup.ops.iter().position(|o| !o.boundary)?;
    let bdy: Vec<usize> = (0..setup.ops.len())
        .filter(|&k| setup.ops[k].boundary)
        .collect();
    if bdy.len() != 2 || !(target > 0.0 && target <= 1.0) {
        return None;
    }
    for _ in 0..1000 {
        let u = 1.6 * super::splitmix(state) - 0.3;
        let v: Vec<f64> = (0..d - 2)
            .map(|_| 0.8 * super::splitmix(state) - 0.4)
            .collect();
        let vv: f64 = v.iter().map(|t| t * t).sum();
        let a = u * u + vv;
        let b = (u - 1.0) * (u - 1.0) + vv;
        // η (a + Y)(b + Y) = Y for Y = y².
        let p = target * (a + b) - 1.0;
        let disc = p * p - 4.0 * target * target * a * b;
        if disc < 0.0 {
            continue;
        }
        let big = (-p + disc.sqrt()) / (2.0 * target);
        if !(big > 1e-3 && big.is_finite()) {
            continue;
        }
        let y = big.sqrt();
        let mut px = vec![0.0; d];
        px[0] = u;
        px[1..d - 1].copy_from_slice(&v);
        px[d - 1] = y;
        let mut p2 = vec![0.0; d];
        p2[0] = 1.0;
        let p1 = vec![0.0; d];
        // A rotation of the parallel plane spanned by the first two axes,
        // a shift along the wall and a scale.
        let angle = std::f64::consts::TAU * super::splitmix(state);
        let scale = 0.5 + super::splitmix(state);
        let shift: Vec<f64> = (0..d - 1).map(|_| super::splitmix(state) - 0.5).collect();
        let map = |q: &[f64]| -> Vec<f64> {
            let mut r = q.to_vec();
            let (c, s) = (angle.cos(), angle.sin());
            r[0] = c * q[0] - s * q[1];
            if d > 2 {
                r[1] = s * q[0] + c * q[1];
            }
            let mut out: Vec<f64> = r.iter().map(|t| t * scale).collect();
            for (o, s) in out.iter_mut().zip(&shift) {
                *o += s;
            }
            out
        };
        let mut cfg = vec![vec![0.0; d]; setup.ops.len()];
        cfg[x] = map(&px);
        cfg[bdy[0]] = map(&p1);
        cfg[bdy[1]] = map(&p2);
        if d == 2 {
            cfg[bdy[1]][d - 1] = 0.0;
        }
        return Some(cfg);
    }
    None
}

// ─────────────────────────── linear algebra ───────────────────────────

/// Singular values of a rows × cols matrix (one-sided Jacobi), largest
/// first.
pub fn singular_values(a: &[Vec<f64>]) -> Vec<f64> {
    let cols = a.first().map_or(0, Vec::len);
    // Work on columns.
    let mut c: Vec<Vec<f64>> = (0..cols)
        .map(|j| a.iter().map(|r| r[j]).collect())
        .collect();
    for _sweep in 0..60 {
        let mut off = 0.0f64;
        for p in 0..cols {
            for q in p + 1..cols {
                let alpha: f64 = c[p].iter().map(|v| v * v).sum();
                let beta: f64 = c[q].iter().map(|v| v * v).sum();
                let gamma: f64 = c[p].iter().zip(&c[q]).map(|(x, y)| x * y).sum();
                if gamma == 0.0 {
                    continue;
                }
                off = off.max(gamma.abs() / (alpha * beta).sqrt().max(f64::MIN_POSITIVE));
                let zeta = (beta - alpha) / (2.0 * gamma);
                let t = zeta.signum() / (zeta.abs() + (1.0 + zeta * zeta).sqrt());
                let t = if zeta == 0.0 { 1.0 } else { t };
                let cs = 1.0 / (1.0 + t * t).sqrt();
                let sn = cs * t;
                let (cp, cq) = (c[p].clone(), c[q].clone());
                for i in 0..cp.len() {
                    c[p][i] = cs * cp[i] - sn * cq[i];
                    c[q][i] = sn * cp[i] + cs * cq[i];
                }
            }
        }
        if off < 1e-15 {
            break;
        }
    }
    let mut s: Vec<f64> = c
        .iter()
        .map(|v| v.iter().map(|x| x * x).sum::<f64>().sqrt())
        .collect();
    s.sort_by(|a, b| b.total_cmp(a));
    s
}

/// The numerical rank of the columns `cols` (each a vector of components).
pub fn rank(cols: &[Vec<f64>]) -> (usize, Vec<f64>) {
    if cols.is_empty() {
        return (0, vec![]);
    }
    let rows = cols[0].len();
    let a: Vec<Vec<f64>> = (0..rows)
        .map(|i| cols.iter().map(|c| c[i]).collect())
        .collect();
    let s = singular_values(&a);
    let top = s.first().copied().unwrap_or(0.0);
    let r = s.iter().filter(|v| **v > RANK_TOLERANCE * top).count();
    (if top == 0.0 { 0 } else { r }, s)
}

// ─────────────────────────── the listing ───────────────────────────

/// What the statement reports.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Listing {
    /// The cross-ratios, as definitions.
    pub cross_ratios: Vec<String>,
    /// The building blocks and the prefactor, as definitions.
    pub blocks: Vec<String>,
    pub prefactor: String,
    /// How many candidate products, and the rank of their components.
    pub candidates: usize,
    pub rank: usize,
    /// The count the residual symmetry predicts, and why.
    pub expected: Option<usize>,
    pub why: String,
    /// The independent structures (after exchange symmetry when two
    /// identical scalars are present), printed.
    pub structures: Vec<String>,
    /// When two insertions are identical scalars: which, and the rank
    /// without imposing the exchange.
    pub exchange: Option<String>,
    /// Smallest kept and largest dropped singular value over the largest,
    /// at the configuration of largest rank.
    pub gap: (f64, f64),
    /// Conservation: the differential relations (each `… = 0`), or why
    /// none were derived.
    pub conservation: Vec<String>,
    /// The same relations as numbers, for checking a model's f_i.
    #[serde(skip)]
    pub relations: Vec<Relation>,
    pub conservation_note: Option<String>,
}

impl Listing {
    pub fn holds(&self) -> bool {
        self.expected.map_or(true, |e| e == self.structures.len())
            && self
                .conservation_note
                .as_deref()
                .map_or(true, |n| !n.starts_with("failed"))
    }
}

fn label_text(setup: &Setup, l: Label) -> String {
    match l {
        Label::Wall(s) => format!("X[{}]", setup.ops[s].point),
        Label::Pair(q, r) => format!("Z[{},{}]", setup.ops[q].point, setup.ops[r].point),
    }
}

fn product_text(setup: &Setup, factors: &[Factor]) -> String {
    let mut parts = Vec::new();
    for f in factors {
        parts.push(match *f {
            Factor::Vector(_, l) => label_text(setup, l),
            Factor::Inversion(p, q) => {
                format!("I({} - {})", setup.ops[p].point, setup.ops[q].point)
            }
        });
    }
    parts.join(" ")
}

fn structure_text(setup: &Setup, s: &Structure) -> String {
    let mut out = String::new();
    for (k, (c, f)) in s.terms.iter().enumerate() {
        let body = product_text(setup, f);
        match (k, *c) {
            (0, 1) => out.push_str(&body),
            (0, -1) => out.push_str(&format!("- {body}")),
            (0, c) => out.push_str(&format!("{c} {body}")),
            (_, 1) => out.push_str(&format!(" + {body}")),
            (_, -1) => out.push_str(&format!(" - {body}")),
            (_, c) if c < 0 => out.push_str(&format!(" - {} {body}", -c)),
            (_, c) => out.push_str(&format!(" + {c} {body}")),
        }
    }
    out
}

/// The two insertions that are the same scalar operator, if any.
fn identical_pair(setup: &Setup) -> Option<(usize, usize)> {
    for a in 0..setup.ops.len() {
        for b in a + 1..setup.ops.len() {
            let (x, y) = (&setup.ops[a], &setup.ops[b]);
            if x.name == y.name && x.spin == 0 && y.spin == 0 {
                return Some((a, b));
            }
        }
    }
    None
}

/// The image of a product under the exchange of ops `a` and `b`, with its
/// sign (Z[q,r] = -Z[r,q]).
fn exchange_product(factors: &[Factor], a: usize, b: usize) -> (i64, Vec<Factor>) {
    let sw = |k: usize| {
        if k == a {
            b
        } else if k == b {
            a
        } else {
            k
        }
    };
    let mut sign = 1;
    let mut out: Vec<Factor> = factors
        .iter()
        .map(|f| match *f {
            Factor::Vector(p, Label::Wall(s)) => Factor::Vector(sw(p), Label::Wall(sw(s))),
            Factor::Vector(p, Label::Pair(q, r)) => {
                let (q, r) = (sw(q), sw(r));
                if q < r {
                    Factor::Vector(sw(p), Label::Pair(q, r))
                } else {
                    sign = -sign;
                    Factor::Vector(sw(p), Label::Pair(r, q))
                }
            }
            Factor::Inversion(p, q) => {
                let (p, q) = (sw(p), sw(q));
                Factor::Inversion(p.min(q), p.max(q))
            }
        })
        .collect();
    out.sort();
    (sign, out)
}

/// The count of structures the symmetry left by the points predicts, with
/// the reason (docs/conventions.md §16).
fn expected_count(setup: &Setup, identical: bool) -> (Option<usize>, String) {
    let spinning = setup.spinning();
    let l = setup.ops[spinning[0]].spin;
    if setup.wall {
        let bdy = setup.ops.iter().filter(|o| o.boundary).count();
        if bdy == 1 {
            return (
                Some(1),
                "a bulk point and a boundary point are left with the rotations SO(d-1) about the line from one to the other; a symmetric traceless tensor of spin ℓ holds one invariant of them".into(),
            );
        }
        if identical {
            return (
                Some(l / 2 + 1),
                format!(
                    "a bulk point and two boundary points are left with O(d-2) (the directions orthogonal to the normal and to the boundary points), whose invariants in spin ℓ are the ℓ + 1 polynomials of degree ℓ in two directions; the exchange of the identical boundary points acts on them as a reflection and keeps ⌊ℓ/2⌋ + 1 = {}",
                    l / 2 + 1
                ),
            );
        }
        return (
            Some(l + 1),
            format!(
                "a bulk point and two boundary points are left with O(d-2) (the directions orthogonal to the normal and to the boundary points), whose invariants in spin ℓ are the ℓ + 1 = {} polynomials of degree ℓ in the two remaining directions",
                l + 1
            ),
        );
    }
    if spinning.len() == 1 && setup.ops.len() == 3 {
        if identical {
            let n = usize::from(l % 2 == 0);
            return (
                Some(n),
                format!(
                    "three points are left with O(d-1) about the line through them, one invariant in spin ℓ; the exchange of the identical scalars reverses the line and keeps it for even ℓ only ({n})"
                ),
            );
        }
        return (
            Some(1),
            "three points are left with O(d-1) about the line through them; a symmetric traceless tensor of spin ℓ holds one invariant".into(),
        );
    }
    if spinning.len() == 2 && setup.ops.len() == 2 {
        let (a, b) = (setup.ops[spinning[0]].spin, setup.ops[spinning[1]].spin);
        let n = usize::from(a == b);
        return (
            Some(n),
            format!(
                "two points are left with O(d) (rotations and the inversion about one point), which pairs the two spins through the inversion tensor: one structure when they are equal ({n})"
            ),
        );
    }
    (
        None,
        "no count from the residual symmetry is worked out for this case".into(),
    )
}

/// Lists the independent structures of a correlator (and, for one
/// conserved spinning insertion with numeric dimensions, the conservation
/// relations).
pub fn list(setup: &Setup, start: u64) -> Result<(Listing, Vec<Structure>)> {
    setup.validate()?;
    let candidates = setup.candidates();
    let pair = identical_pair(setup);
    // Under the exchange: orbit sums (with signs) of the candidates.
    let structures: Vec<Structure> = match pair {
        None => candidates
            .iter()
            .map(|c| Structure {
                terms: vec![(1, c.clone())],
            })
            .collect(),
        Some((a, b)) => {
            let mut seen: Vec<Vec<Factor>> = Vec::new();
            let mut out = Vec::new();
            for c in &candidates {
                let mut c = c.clone();
                c.sort();
                if seen.contains(&c) {
                    continue;
                }
                let (sign, image) = exchange_product(&c, a, b);
                seen.push(c.clone());
                if image == c {
                    if sign == 1 {
                        out.push(Structure {
                            terms: vec![(1, c)],
                        });
                    }
                    continue;
                }
                seen.push(image.clone());
                out.push(Structure {
                    terms: vec![(1, c), (sign, image)],
                });
            }
            out
        }
    };
    let mut state = start;
    let mut best_rank = 0;
    let mut best_cols: Vec<Vec<f64>> = Vec::new();
    let mut gap = (0.0, 0.0);
    let mut raw_rank = 0;
    for _ in 0..RANK_CONFIGURATIONS {
        let cfg = random_config(setup, &mut state);
        let cols: Vec<Vec<f64>> = structures
            .iter()
            .map(|s| components(setup, &cfg, s))
            .collect();
        let (r, s) = rank(&cols);
        if pair.is_some() {
            let all: Vec<Vec<f64>> = candidates
                .iter()
                .map(|c| {
                    components(
                        setup,
                        &cfg,
                        &Structure {
                            terms: vec![(1, c.clone())],
                        },
                    )
                })
                .collect();
            raw_rank = raw_rank.max(rank(&all).0);
        }
        if r >= best_rank {
            let top = s.first().copied().unwrap_or(1.0).max(f64::MIN_POSITIVE);
            let kept = if r > 0 { s[r - 1] / top } else { 0.0 };
            let dropped = s.get(r).map_or(0.0, |v| v / top);
            gap = (kept, dropped);
            best_rank = r;
            best_cols = cols;
        }
    }
    // Keep a basis: greedily, the structures that raise the rank.
    let mut basis: Vec<usize> = Vec::new();
    for k in 0..structures.len() {
        let mut trial: Vec<Vec<f64>> = basis.iter().map(|&i| best_cols[i].clone()).collect();
        trial.push(best_cols[k].clone());
        if rank(&trial).0 > basis.len() {
            basis.push(k);
        }
    }
    let kept: Vec<Structure> = basis.iter().map(|&i| structures[i].clone()).collect();
    let (expected, why) = expected_count(setup, pair.is_some());
    let spinning = setup.spinning();
    let x = &setup.ops[spinning[0]].point;
    let mut blocks = Vec::new();
    let mut cross = Vec::new();
    let prefactor;
    if setup.wall {
        blocks.push(format!(
            "X[s] = I({x} - s)·n at {x}, I(v) = δ - 2 v v/|v|² (a unit vector; covariant under the maps that keep the wall)"
        ));
        let bdy: Vec<&Insertion> = setup.ops.iter().filter(|o| o.boundary).collect();
        let y = format!("y({x})");
        let bulk = &setup.ops[spinning[0]];
        let mut p = format!("{y}^(-Δ[{}])", bulk.name);
        for b in &bdy {
            p.push_str(&format!(" ({y}/|{x} - {}|²)^(Δ[{}])", b.point, b.name));
        }
        prefactor = p;
        if bdy.len() == 2 {
            let (s1, s2) = (&bdy[0].point, &bdy[1].point);
            cross.push(format!(
                "η = {y}² |{s1} - {s2}|²/(|{x} - {s1}|² |{x} - {s2}|²), 0 < η ≤ 1 (X[{s1}]·X[{s2}] = 1 - 2η)"
            ));
        }
    } else {
        if setup.ops.len() == 3 {
            blocks.push(
                "Z[q,r] = (x - q)/|x - q|² - (x - r)/|x - r|² at the spinning point x".into(),
            );
        }
        if spinning.len() == 2 {
            blocks.push("I(v) = δ - 2 v v/|v|², the inversion tensor".into());
        }
        prefactor = if setup.ops.len() == 3 {
            let (a, b, c) = (&setup.ops[0], &setup.ops[1], &setup.ops[2]);
            format!(
                "|{p} - {q}|^(Δ[{r}] - Δ[{pn}] - Δ[{qn}]) |{p} - {rp}|^(Δ[{qn}] - Δ[{pn}] - Δ[{r}]) |{q} - {rp}|^(Δ[{pn}] - Δ[{qn}] - Δ[{r}]) |Z|^(-ℓ)",
                p = a.point,
                q = b.point,
                rp = c.point,
                pn = a.name,
                qn = b.name,
                r = c.name
            )
        } else {
            let (a, b) = (&setup.ops[0], &setup.ops[1]);
            format!("|{} - {}|^(-2 Δ[{}])", a.point, b.point, a.name)
        };
    }
    if cross.is_empty() {
        cross.push("none: the points can be brought to a standard place".into());
    }
    let exchange = pair.map(|(a, b)| {
        format!(
            "{}({}) ↔ {}({}): {} without the exchange",
            setup.ops[a].name, setup.ops[a].point, setup.ops[b].name, setup.ops[b].point, raw_rank
        )
    });
    let (conservation, relations, conservation_note) = match conservation(setup, &kept, start) {
        Ok(Some((rel, floats))) => (rel, floats, None),
        Ok(None) => (vec![], vec![], None),
        Err(e) => (vec![], vec![], Some(e)),
    };
    let listing = Listing {
        cross_ratios: cross,
        blocks,
        prefactor,
        candidates: structures.len(),
        rank: best_rank,
        expected,
        why,
        structures: kept.iter().map(|s| structure_text(setup, s)).collect(),
        exchange,
        gap,
        conservation,
        relations,
        conservation_note,
    };
    Ok((listing, kept))
}

// ─────────────────────────── conservation ───────────────────────────

/// The divergence at the spinning op, divided by the prefactor: per
/// structure, the coefficient vectors of f_i and of f_i' (d components
/// each). Exact when `F` is.
fn divergence<F: Field>(
    setup: &Setup,
    cfg: &Config<F>,
    s: &Structure,
    dims: &[F],
) -> (Vec<F>, Vec<F>) {
    let d = setup.d;
    let p = setup.spinning()[0];
    let l = setup.ops[p].spin;
    let x = &cfg[p];
    // ∂ log K.
    let mut dlog = vec![F::int(0); d];
    if setup.wall {
        // K = y^(-Δ) Π (y/|x - s|²)^(Δ̂):  ∂ log K = (Σ Δ̂ X[s] - Δ n)/y.
        let y = x[d - 1].clone();
        let nrm = normal::<F>(d);
        for i in 0..d {
            dlog[i] = dlog[i].sub(&dims[p].mul(&nrm[i]).div(&y));
        }
        for (k, op) in setup.ops.iter().enumerate() {
            if op.boundary {
                let (v, _) = block(setup, cfg, p, Label::Wall(k));
                for i in 0..d {
                    dlog[i] = dlog[i].add(&dims[k].mul(&v[i]).div(&y));
                }
            }
        }
    } else {
        // K = Π over pairs |a - b|^(-(Δa + Δb - Δc)): at x, the pairs with x.
        let others: Vec<usize> = (0..setup.ops.len()).filter(|&k| k != p).collect();
        for &q in &others {
            let expo = if others.len() == 2 {
                let r = others.iter().copied().find(|&r| r != q).unwrap_or(q);
                dims[p].add(&dims[q]).sub(&dims[r])
            } else {
                dims[p].mul(&F::int(2))
            };
            let w = diff(x, &cfg[q]);
            let r2 = dot(&w, &w);
            for i in 0..d {
                dlog[i] = dlog[i].sub(&expo.mul(&w[i]).div(&r2));
            }
        }
        // Z has weight 1 at x: the prefactor carries |Z|^(-ℓ).
        if others.len() == 2 {
            let (z, m) = block(setup, cfg, p, Label::Pair(others[0], others[1]));
            let z2 = dot(&z, &z);
            for i in 0..d {
                let mz = (0..d).fold(F::int(0), |acc, j| acc.add(&m[i][j].mul(&z[j])));
                dlog[i] = dlog[i].sub(&F::int(l as i64).mul(&mz).div(&z2));
            }
        }
    }
    let grad_eta = eta(setup, cfg).map(|(_, g)| g);
    let mut f_coef = vec![F::int(0); d];
    let mut fp_coef = vec![F::int(0); d];
    for (c, factors) in &s.terms {
        let c = F::int(*c);
        let labels: Vec<Label> = factors
            .iter()
            .filter_map(|f| match f {
                Factor::Vector(_, l) => Some(*l),
                Factor::Inversion(..) => None,
            })
            .collect();
        let vs: Vec<(Vec<F>, Vec<Vec<F>>)> =
            labels.iter().map(|&l| block(setup, cfg, p, l)).collect();
        let comps = product(setup, cfg, factors);
        // S_μν at row μ: comps[μ d + ν] (spin 2) or comps[μ] (spin 1).
        let s_at = |mu: usize, nu: usize| -> F {
            if l == 1 {
                comps[mu].clone()
            } else {
                comps[mu * d + nu].clone()
            }
        };
        let tr = |m: &Vec<Vec<F>>| (0..d).fold(F::int(0), |acc, i| acc.add(&m[i][i]));
        for nu in 0..d {
            // ∂_μ S_μν.
            let div = if l == 1 {
                if nu == 0 {
                    tr(&vs[0].1)
                } else {
                    F::int(0)
                }
            } else {
                let (va, ma) = (&vs[0].0, &vs[0].1);
                let (vb, mb) = (&vs[1].0, &vs[1].1);
                let half = F::int(1).div(&F::int(2));
                let mut t = tr(ma).mul(&vb[nu]).add(&tr(mb).mul(&va[nu]));
                for mu in 0..d {
                    t = t
                        .add(&va[mu].mul(&mb[mu][nu]))
                        .add(&vb[mu].mul(&ma[mu][nu]));
                }
                let mut g = F::int(0);
                for rho in 0..d {
                    g = g
                        .add(&ma[nu][rho].mul(&vb[rho]))
                        .add(&va[rho].mul(&mb[nu][rho]));
                }
                t.mul(&half).sub(&g.div(&F::int(d as i64)))
            };
            let (mut a, mut b) = (div, F::int(0));
            if l == 1 {
                // A vector: the divergence is a scalar, kept in slot 0.
                if nu == 0 {
                    for mu in 0..d {
                        a = a.add(&s_at(mu, 0).mul(&dlog[mu]));
                        if let Some(g) = &grad_eta {
                            b = b.add(&s_at(mu, 0).mul(&g[mu]));
                        }
                    }
                }
            } else {
                for mu in 0..d {
                    a = a.add(&s_at(mu, nu).mul(&dlog[mu]));
                    if let Some(g) = &grad_eta {
                        b = b.add(&s_at(mu, nu).mul(&g[mu]));
                    }
                }
            }
            f_coef[nu] = f_coef[nu].add(&c.mul(&a));
            fp_coef[nu] = fp_coef[nu].add(&c.mul(&b));
        }
    }
    (f_coef, fp_coef)
}

/// Exact polynomial interpolation: coefficients (low to high) of the
/// polynomial of degree < points.len() through the points (Newton form).
fn interpolate(points: &[(BigRational, BigRational)]) -> Vec<BigRational> {
    let n = points.len();
    let xs: Vec<BigRational> = points.iter().map(|p| p.0.clone()).collect();
    let mut c: Vec<BigRational> = points.iter().map(|p| p.1.clone()).collect();
    for j in 1..n {
        for i in (j..n).rev() {
            c[i] = (&c[i] - &c[i - 1]) / (&xs[i] - &xs[i - j]);
        }
    }
    // Expand the Newton form.
    let mut poly = vec![BigRational::zero(); n];
    for i in (0..n).rev() {
        // poly = poly * (x - xs[i]) + c[i]
        let mut next = vec![BigRational::zero(); n];
        for k in 0..n {
            if k + 1 < n {
                next[k + 1] = &next[k + 1] + &poly[k];
            }
            next[k] = &next[k] - &poly[k] * &xs[i];
        }
        next[0] = &next[0] + &c[i];
        poly = next;
    }
    while poly.len() > 1 && poly.last().is_some_and(Zero::is_zero) {
        poly.pop();
    }
    poly
}

fn poly_at(p: &[BigRational], x: &BigRational) -> BigRational {
    p.iter()
        .rev()
        .fold(BigRational::zero(), |acc, c| acc * x + c)
}

fn rational_text(r: &BigRational) -> String {
    if r.is_integer() {
        r.numer().to_string()
    } else {
        format!("{}/{}", r.numer(), r.denom())
    }
}

/// A polynomial in `var`, e.g. `3 - 2 η + η^2`.
fn poly_text(p: &[BigRational], var: &str) -> String {
    let mut out = String::new();
    for (k, c) in p.iter().enumerate() {
        if Zero::is_zero(c) {
            continue;
        }
        let mag = c.abs();
        let mono = match k {
            0 => String::new(),
            1 => var.to_string(),
            _ => format!("{var}^{k}"),
        };
        let body = if k == 0 {
            rational_text(&mag)
        } else if mag.is_one() {
            mono
        } else {
            format!("{} {mono}", rational_text(&mag))
        };
        if out.is_empty() {
            if c.is_negative() {
                out.push_str("- ");
            }
        } else {
            out.push_str(if c.is_negative() { " - " } else { " + " });
        }
        out.push_str(&body);
    }
    if out.is_empty() {
        "0".into()
    } else {
        out
    }
}

/// How many rational configurations build each relation, and how many more
/// check it exactly.
const INTERPOLATION_POINTS: usize = 10;
const CHECK_POINTS: usize = 6;

/// The conservation relations of the one spinning insertion, when it is
/// conserved and every dimension is a number: per building block V_a,
/// (y/K) V_a·∂_μ(Σ_i f_i K S^i_μ…) = Σ_i p_ai(η) f_i + q_ai(η) f_i' = 0,
/// with p, q reconstructed exactly. `Ok(None)` when not asked for;
/// `Err(why)` when not derived.
fn conservation(
    setup: &Setup,
    kept: &[Structure],
    start: u64,
) -> std::result::Result<Option<Relations>, String> {
    let spinning = setup.spinning();
    if spinning.len() != 1 || !setup.ops[spinning[0]].conserved {
        return Ok(None);
    }
    let p = spinning[0];
    let dims: Vec<BigRational> = setup
        .ops
        .iter()
        .map(|o| o.dim.clone())
        .collect::<Option<Vec<_>>>()
        .ok_or(
            "not derived: every dimension must be a number (declare `dimension` and numeric `dim`)",
        )?;
    let labels = setup.labels(p);
    let has_eta = setup.wall && setup.ops.iter().filter(|o| o.boundary).count() == 2;
    let mut state = start ^ 0x2545_f491;
    // Per sample: η (or 0) and, per building block a and structure i, the
    // exact projections (p_ai, q_ai).
    type Sample = (BigRational, Vec<Vec<(BigRational, BigRational)>>);
    let mut samples: Vec<Sample> = Vec::new();
    let total = INTERPOLATION_POINTS + CHECK_POINTS;
    let mut tries = 0;
    while samples.len() < total {
        tries += 1;
        if tries > 20 * total {
            return Err(
                "not derived: no rational configurations with distinct cross-ratios".into(),
            );
        }
        let cfg = rational_config(setup, &mut state, 64);
        let e = eta(setup, &cfg).map_or(BigRational::zero(), |(e, _)| e);
        if has_eta && samples.iter().any(|(f, _)| *f == e) {
            continue;
        }
        let y = if setup.wall {
            cfg[p][setup.d - 1].clone()
        } else {
            BigRational::one()
        };
        let vecs: Vec<Vec<BigRational>> =
            labels.iter().map(|&l| block(setup, &cfg, p, l).0).collect();
        let mut per_block = Vec::new();
        let divs: Vec<(Vec<BigRational>, Vec<BigRational>)> = kept
            .iter()
            .map(|s| divergence(setup, &cfg, s, &dims))
            .collect();
        // Covariance: each divergence lies in the span of the blocks
        // (spin 2) — checked exactly through the Gram matrix.
        if setup.ops[p].spin == 2 {
            for (a, b) in &divs {
                for v in [a, b] {
                    if !in_span(v, &vecs) {
                        return Err(format!(
                            "failed: the divergence of a structure is not a combination of the building blocks (is Δ[{}] = d + ℓ - 2?)",
                            setup.ops[p].name
                        ));
                    }
                }
            }
        }
        if setup.ops[p].spin == 1 && !setup.wall {
            // Without a wall the divergence is c K |Z| = c (K |Z|^(-1)) |Z|²:
            // c = div/(K_eff |Z|²) is a number.
            let z2 = dot(&vecs[0], &vecs[0]);
            let row = divs
                .iter()
                .map(|(a, _)| (&a[0] / &z2, BigRational::zero()))
                .collect();
            per_block.push(row);
        } else if setup.ops[p].spin == 1 {
            // A scalar divergence, in slot 0, normalised by K/y.
            let row = divs.iter().map(|(a, b)| (&a[0] * &y, &b[0] * &y)).collect();
            per_block.push(row);
        } else {
            for v in &vecs {
                let norm = if setup.wall {
                    y.clone()
                } else {
                    // div = c K |Z| Ẑ = c K_eff |Z|² Z with K_eff = K |Z|^(-2):
                    // c = Z·div/(K_eff |Z|⁴).
                    let z2 = dot(v, v);
                    BigRational::one() / (&z2 * &z2)
                };
                let row = divs
                    .iter()
                    .map(|(a, b)| (dot(a, v) * &norm, dot(b, v) * &norm))
                    .collect();
                per_block.push(row);
            }
        }
        samples.push((e, per_block));
        if !has_eta && samples.len() >= CHECK_POINTS {
            break;
        }
    }
    let var = "η";
    let names: Vec<String> = (1..=kept.len()).map(|i| format!("f{i}")).collect();
    let mut out = Vec::new();
    let blocks_n = samples[0].1.len();
    let mut relations = Vec::new();
    for a in 0..blocks_n {
        let mut relation: Relation = vec![(Vec::new(), Vec::new()); kept.len()];
        let what = if setup.ops[p].spin == 1 {
            "∂·J".to_string()
        } else {
            format!("{}·div", label_text(setup, labels[a]))
        };
        let mut terms = Vec::new();
        for i in 0..kept.len() {
            for which in 0..2 {
                if which == 1 && !has_eta {
                    continue;
                }
                let pts: Vec<(BigRational, BigRational)> = samples
                    .iter()
                    .map(|(e, rows)| {
                        let (pa, qa) = &rows[a][i];
                        (e.clone(), if which == 0 { pa.clone() } else { qa.clone() })
                    })
                    .collect();
                let poly = if has_eta {
                    let fit = interpolate(&pts[..INTERPOLATION_POINTS]);
                    if fit.len() >= INTERPOLATION_POINTS - 1 {
                        return Err(
                            "failed: a coefficient is not a polynomial of low degree in η".into(),
                        );
                    }
                    for (x, v) in &pts[INTERPOLATION_POINTS..] {
                        if poly_at(&fit, x) != *v {
                            return Err(
                                "failed: a coefficient does not pass the exact check".into()
                            );
                        }
                    }
                    fit
                } else {
                    // No cross-ratio: the coefficient must be one number.
                    let first = pts[0].1.clone();
                    if pts.iter().any(|(_, v)| *v != first) {
                        return Err("failed: a coefficient depends on the configuration".into());
                    }
                    vec![first]
                };
                let floats: Vec<f64> = poly
                    .iter()
                    .map(|c| c.to_f64().unwrap_or(f64::NAN))
                    .collect();
                if which == 0 {
                    relation[i].0 = floats;
                } else {
                    relation[i].1 = floats;
                }
                if poly.iter().all(Zero::is_zero) {
                    continue;
                }
                let f = if which == 0 {
                    format!("{}({var})", names[i])
                } else {
                    format!("{}'({var})", names[i])
                };
                let f = if has_eta { f } else { names[i].clone() };
                terms.push(format!("({}) {f}", poly_text(&poly, var)));
            }
        }
        let body = if terms.is_empty() {
            "0".to_string()
        } else {
            terms.join(" + ")
        };
        out.push(format!("{what}: {body} = 0"));
        relations.push(relation);
    }
    Ok(Some((out, relations)))
}

/// One conservation relation: per structure, the coefficients (low to
/// high in η) of f_i and of f_i'.
pub type Relation = Vec<(Vec<f64>, Vec<f64>)>;

/// The relations printed, and as numbers.
type Relations = (Vec<String>, Vec<Relation>);

/// True if `v` is an exact combination of `basis`.
fn in_span(v: &[BigRational], basis: &[Vec<BigRational>]) -> bool {
    // Gram–Schmidt without square roots.
    let mut ortho: Vec<Vec<BigRational>> = Vec::new();
    for b in basis {
        let mut w = b.clone();
        for o in &ortho {
            let c = dot(&w, o) / dot(o, o);
            w = diff(&w, &scale(o, &c));
        }
        if w.iter().any(|t| !Zero::is_zero(t)) {
            ortho.push(w);
        }
    }
    let mut r = v.to_vec();
    for o in &ortho {
        let c = dot(&r, o) / dot(o, o);
        r = diff(&r, &scale(o, &c));
    }
    r.iter().all(Zero::is_zero)
}

// ─────────────────────────── decomposition ───────────────────────────

/// Largest relative residual at which a decomposition counts as exact.
pub const STRUCTURE_TOLERANCE: f64 = 1e-10;
/// Largest relative residual of a conservation relation on a model's f_i
/// (the central differences are good to about 1e-8).
pub const CONSERVATION_TOLERANCE: f64 = 1e-6;
/// Values of η at which the coefficient functions are fitted.
pub const FIT_ETAS: usize = 24;
/// Configurations per η: two to fit, three more to check.
const FIT_CONFIGS: usize = 2;
const CHECK_CONFIGS: usize = 3;

/// A correlator expanded in its structures: the coefficient functions at
/// sample values of η.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct StructureFit {
    /// The structures, printed, in the order of the coefficients.
    pub structures: Vec<String>,
    /// Per η: (η, f_i(η), the largest relative residual at the check
    /// configurations of that η).
    pub rows: Vec<(f64, Vec<f64>, f64)>,
    /// Configurations used to fit and to check, in all.
    pub fitted_at: usize,
    pub checked_at: usize,
    /// The largest relative residual over every check configuration.
    pub residual: f64,
    /// The wall limit: x moved straight to the wall, K Σ_i f_i(η) S^i_nn
    /// times |s1 - s2|^(Δ̂1 + Δ̂2 - Δ) |p - s1|^(Δ + Δ̂1 - Δ̂2) |p - s2|^(Δ +
    /// Δ̂2 - Δ̂1) (p = x∥), extrapolated to y = 0 (Richardson in y²) with its
    /// error estimate; and the same number from the model's ⟨D(p) …⟩.
    pub wall_limit: Option<(f64, f64, f64)>,
    /// The conservation relations evaluated on the fitted f_i (f_i' by
    /// central differences): the largest |sum| over the largest term, and
    /// at how many values of η.
    pub conservation_check: Option<(f64, usize)>,
}

impl StructureFit {
    pub fn holds(&self) -> bool {
        self.residual <= STRUCTURE_TOLERANCE
            && self
                .conservation_check
                .map_or(true, |(r, _)| r <= CONSERVATION_TOLERANCE)
            && self.wall_limit.map_or(true, |(v, e, m)| {
                (v - m).abs() <= (10.0 * e).max(1e-8 * m.abs())
            })
    }
}

/// The prefactor K at a configuration (f64), for one bulk op and two
/// boundary scalars: y^(-Δ) Π (y/|x - s|²)^(Δ̂).
fn prefactor(setup: &Setup, cfg: &Config<f64>, dims: &[f64]) -> f64 {
    let d = setup.d;
    let p = setup.spinning()[0];
    let y = cfg[p][d - 1];
    let mut k = y.powf(-dims[p]);
    for (i, op) in setup.ops.iter().enumerate() {
        if op.boundary {
            let w = diff(&cfg[p], &cfg[i]);
            k *= (y / dot(&w, &w)).powf(dims[i]);
        }
    }
    k
}

/// Expands `g` (the correlator's components at a configuration, in the
/// slot order of [`components`]) in the structures `kept`, with a wall, one
/// bulk spinning op and two boundary scalars. `boundary_three` gives
/// (|s12| |s1p| |s2p|)^Δ ⟨D(p) …⟩ for p on the wall, when the model has it.
pub fn fit(
    setup: &Setup,
    kept: &[Structure],
    structures: &[String],
    g: &(dyn Fn(&Config<f64>) -> Result<Vec<f64>> + Sync),
    boundary_three: Option<&dyn Fn() -> Result<f64>>,
    relations: &[Relation],
    start: u64,
) -> Result<StructureFit> {
    let has_eta = setup.wall && setup.ops.iter().filter(|o| o.boundary).count() == 2;
    if !has_eta || setup.spinning().len() != 1 {
        return Err(numeric(
            "a decomposition into structures takes one bulk operator with spin and two boundary scalars next to a wall",
        ));
    }
    let dims: Vec<f64> = setup
        .ops
        .iter()
        .map(|o| o.dim.as_ref().and_then(ToPrimitive::to_f64))
        .collect::<Option<Vec<_>>>()
        .ok_or_else(|| numeric("every dimension must be a number"))?;
    let mut state = start;
    let n = kept.len();
    let mut rows = Vec::new();
    let mut worst = 0.0f64;
    let (mut fitted, mut checked) = (0, 0);
    let columns = |cfg: &Config<f64>| -> Vec<Vec<f64>> {
        let k = prefactor(setup, cfg, &dims);
        kept.iter()
            .map(|s| components(setup, cfg, s).iter().map(|v| v * k).collect())
            .collect()
    };
    let coefficients = |eta: f64, state: &mut u64| -> Result<(Vec<f64>, f64)> {
        let mut a: Vec<Vec<f64>> = Vec::new();
        let mut b: Vec<f64> = Vec::new();
        let mut configs = Vec::new();
        for _ in 0..FIT_CONFIGS + CHECK_CONFIGS {
            configs.push(
                config_at_eta(setup, eta, state)
                    .ok_or_else(|| numeric(format!("no configuration with η = {eta}")))?,
            );
        }
        for cfg in &configs[..FIT_CONFIGS] {
            let cols = columns(cfg);
            let vals = g(cfg)?;
            for (r, v) in vals.iter().enumerate() {
                a.push(cols.iter().map(|c| c[r]).collect());
                b.push(*v);
            }
        }
        let f = super::decompose::least_squares(&mut a, &mut b, n)?;
        let mut residual = 0.0f64;
        for cfg in &configs[FIT_CONFIGS..] {
            let cols = columns(cfg);
            let vals = g(cfg)?;
            let size = vals.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            for (r, v) in vals.iter().enumerate() {
                let model: f64 = cols.iter().zip(&f).map(|(c, x)| c[r] * x).sum();
                residual = residual.max((v - model).abs() / size.max(f64::MIN_POSITIVE));
            }
        }
        Ok((f, residual))
    };
    for k in 0..FIT_ETAS {
        let eta = (k as f64 + 0.5) / FIT_ETAS as f64;
        let (f, residual) = coefficients(eta, &mut state)?;
        fitted += FIT_CONFIGS;
        checked += CHECK_CONFIGS;
        worst = worst.max(residual);
        rows.push((eta, f, residual));
    }
    // The conservation relations on the model's f_i: f_i' by central
    // differences (step 1e-4 in η, error O(1e-8)), at η = 0.3 … 0.8.
    let conservation_check = if relations.is_empty() {
        None
    } else {
        let mut worst = 0.0f64;
        let etas = [0.3, 0.4, 0.5, 0.6, 0.7, 0.8];
        let step = 1e-4;
        for &eta in &etas {
            let (f, _) = coefficients(eta, &mut state)?;
            let (fp, _) = coefficients(eta + step, &mut state)?;
            let (fm, _) = coefficients(eta - step, &mut state)?;
            let horner = |c: &[f64]| c.iter().rev().fold(0.0, |acc, v| acc * eta + v);
            for rel in relations {
                let mut sum = 0.0;
                let mut size = 0.0f64;
                for (i, (pc, qc)) in rel.iter().enumerate() {
                    let deriv = (fp[i] - fm[i]) / (2.0 * step);
                    let a = horner(pc) * f[i];
                    let b = horner(qc) * deriv;
                    sum += a + b;
                    size = size.max(a.abs()).max(b.abs());
                }
                if size > 0.0 {
                    worst = worst.max(sum.abs() / size);
                }
            }
        }
        Some((worst, etas.len()))
    };
    // The wall limit: the nn component of each structure with every X = n.
    let p = setup.spinning()[0];
    let d = setup.d;
    let wall_limit = match boundary_three {
        None => None,
        Some(model) => {
            // x moves straight to the wall at fixed x∥: the decomposition's
            // nn component, K Σ f_i(η) S^i_nn, times the distances of the
            // boundary three-point function, Richardson in y².
            let base = config_at_eta(setup, 0.5, &mut state)
                .ok_or_else(|| numeric("no configuration near the wall"))?;
            let bdy: Vec<usize> = (0..setup.ops.len())
                .filter(|&k| setup.ops[k].boundary)
                .collect();
            let (i, j) = (bdy[0], bdy[1]);
            let dist = |a: &[f64], b: &[f64]| -> f64 {
                a.iter()
                    .zip(b)
                    .take(d - 1)
                    .map(|(x, y)| (x - y) * (x - y))
                    .sum::<f64>()
                    .sqrt()
            };
            let (a, b, c) = (
                dims[i] + dims[j] - dims[p],
                dims[p] + dims[i] - dims[j],
                dims[p] + dims[j] - dims[i],
            );
            let distances = dist(&base[i], &base[j]).powf(a)
                * dist(&base[p], &base[i]).powf(b)
                * dist(&base[p], &base[j]).powf(c);
            let y0 = base[p][d - 1] / 8.0;
            let mut table: Vec<f64> = Vec::new();
            for k in 0..5 {
                let mut cfg = base.clone();
                cfg[p][d - 1] = y0 / f64::from(1u32 << k);
                let eta = eta_value(setup, &cfg).unwrap_or(f64::NAN);
                let (f, _) = coefficients(eta, &mut state)?;
                let kf = prefactor(setup, &cfg, &dims);
                let nn: f64 = kept
                    .iter()
                    .zip(&f)
                    .map(|(s, x)| {
                        let comp = components(setup, &cfg, s);
                        let at = if setup.ops[p].spin == 1 {
                            d - 1
                        } else {
                            (d - 1) * d + d - 1
                        };
                        comp[at] * x
                    })
                    .sum();
                let h = kf * nn * distances;
                table.push(h);
            }
            let mut level = table;
            let mut last_two = (0.0, 0.0);
            for j in 1..level.len() {
                let factor = 4f64.powi(j as i32);
                level = level
                    .windows(2)
                    .map(|w| (factor * w[1] - w[0]) / (factor - 1.0))
                    .collect();
                if level.len() >= 2 {
                    last_two = (level[level.len() - 2], level[level.len() - 1]);
                } else {
                    last_two = (last_two.1, level[0]);
                }
            }
            let value = level[0];
            let error = (last_two.1 - last_two.0).abs();
            Some((value, error, model()?))
        }
    };
    Ok(StructureFit {
        structures: structures.to_vec(),
        rows,
        fitted_at: fitted,
        checked_at: checked,
        residual: worst,
        wall_limit,
        conservation_check,
    })
}

/// The exact value of a dimension term, with `d` the dimension.
fn exact(t: &crate::term::Term, d: usize) -> Option<BigRational> {
    use crate::term::Term;
    match t {
        Term::Num(r) => Some(r.clone()),
        Term::Sym(s) if s == crate::context::DIMENSION => {
            Some(BigRational::from_integer(BigInt::from(d)))
        }
        Term::Add(ts) => ts
            .iter()
            .try_fold(BigRational::zero(), |acc, t| Some(acc + exact(t, d)?)),
        Term::Mul(ts) => ts
            .iter()
            .try_fold(BigRational::one(), |acc, t| Some(acc * exact(t, d)?)),
        Term::Pow(b, e) => {
            let b = exact(b, d)?;
            let e = exact(e, d)?;
            if !e.is_integer() || Zero::is_zero(&b) {
                return None;
            }
            let k = e.to_integer().to_i32()?;
            Some(num_traits::pow::Pow::pow(b, k))
        }
        _ => None,
    }
}

/// The set-up of a correlator of the file: every insertion with its spin
/// (its number of indices), dimension and whether it is conserved; the
/// dimension must be a whole number.
pub fn setup_of(ctx: &crate::context::Context, corr: &crate::term::Term) -> Result<Setup> {
    let crate::term::Term::Corr(ops) = corr else {
        return Err(numeric("structures are listed for a correlator"));
    };
    let d = match ctx.dimension.as_ref().and_then(|t| exact(t, 0)) {
        Some(r)
            if r.is_integer()
                && r >= BigRational::from_integer(3.into())
                && r <= BigRational::from_integer(8.into()) =>
        {
            r.to_integer().to_usize().unwrap_or(3)
        }
        _ => return Err(numeric(
            "structures are listed in a numeric dimension from 3 to 8: declare `dimension 3`, say",
        )),
    };
    let ops = ops
        .iter()
        .map(|o| {
            let decl = ctx.operator(&o.name);
            Insertion {
                name: o.name.clone(),
                point: o.point.name.to_string(),
                boundary: ctx.is_boundary_point(&o.point),
                spin: o.indices.len(),
                dim: decl
                    .and_then(|dl| dl.attrs.get("dim"))
                    .and_then(|t| exact(t, d)),
                conserved: ctx.is_conserved(&o.name),
            }
        })
        .collect();
    Ok(Setup {
        d,
        wall: ctx.has_halfspace(),
        ops,
    })
}
