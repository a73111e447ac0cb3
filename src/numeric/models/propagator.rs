//! Closed-form derivatives of the two terms of the free scalar's
//! propagator by images (docs/conventions.md §4, §11), built directly as
//! terms, so that the normaliser multiplies out a few products instead of
//! applying the Leibniz and chain rules to a power of a sum.
//!
//! With p = 2 - d, the direct term is |w|^p with w = x - x', the image term
//! |w|^p with w = x - R x', R = diag(1, …, 1, -1) the reflection in the wall,
//! so that |x - R x'|² = |x - x'|² + 4 y y'. For s = w·w, ∂_i s = 2 w_i and
//! ∂_i ∂_j s = 2 δ_ij, and Faà di Bruno's formula for f(s) = s^{p/2} gives
//! (common practice)
//!
//!   ∂_{i_1} … ∂_{i_k} |w|^p = Σ_M p (p - 2) … (p - 2m + 2) |w|^{p - 2m}
//!                                 Π_{(i j) ∈ M} δ_ij Π_{i ∉ M} w_i,
//!
//! the sum over the partial matchings M of the k indices, m the number of
//! blocks (pairs and single indices) of M; e.g. ∂_μ ∂_ν |w|^p =
//! p |w|^{p-2} δ_μν + p (p - 2) |w|^{p-4} w_μ w_ν. A derivative in the
//! second point x' is -∂_w for the direct term and -R ∂_w for the image
//! term: on an index j of x' the image term's δ_ij with an index i of x
//! becomes R_ij = δ_ij - 2 n_i n_j, its w_j becomes (R w)_j, and two indices
//! of x' keep δ (R R = 1). In coordinates, for the image term,
//! w_i = x_i - x'_i + 2 n_i y' and (R w)_i = x_i - x'_i - 2 n_i y.
//!
//! The unit test at the end of this file compares every formula with
//! finite differences of the propagator at seeded random points.

use super::{add, dist_pow, minus, mul, normal_coord, pow, rational};
use crate::term::{Index, Point, Term};

/// Which term of the propagator.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Part {
    /// |x - x'|^{2-d}.
    Direct,
    /// |x - x̄'|^{2-d}, x̄' the mirror image of x' in the wall y = 0.
    Image,
}

/// One derivative index and the end it acts on (`false` x, `true` x').
type Slot<'a> = (&'a Index, bool);

/// ∂_{i_1}(x) … ∂_{i_k}(x) ∂_{j_1}(x') … ∂_{j_l}(x') of the direct or the
/// image term, |x - x'|^{2-d} or |x - x̄'|^{2-d}, with x at `x` and x' at
/// `y` and d the dimension (a number or the symbol d).
pub(crate) fn derivative(
    part: Part,
    x: &Point,
    y: &Point,
    at_x: &[Index],
    at_y: &[Index],
    d: &Term,
) -> Term {
    let slots: Vec<Slot> = at_x
        .iter()
        .map(|i| (i, false))
        .chain(at_y.iter().map(|j| (j, true)))
        .collect();
    let mut terms = Vec::new();
    let mut pairs = Vec::new();
    let mut singles = Vec::new();
    matchings(
        &slots,
        0,
        &mut vec![false; slots.len()],
        &mut pairs,
        &mut singles,
        &mut |pairs, singles| {
            let blocks = pairs.len() + singles.len();
            let mut factors = Vec::with_capacity(blocks + 2);
            // p (p - 2) … (p - 2m + 2), p = 2 - d.
            for k in 0..blocks as i64 {
                factors.push(minus(Term::int(2 - 2 * k), d.clone()));
            }
            factors.push(base_power(part, x, y, d, blocks as i64));
            for &(s, t) in pairs {
                factors.push(pair(part, slots[s], slots[t]));
            }
            for &s in singles {
                factors.push(component(part, x, y, slots[s]));
            }
            terms.push(mul(factors));
        },
    );
    let sum = add(terms);
    if at_y.len() % 2 == 1 {
        mul(vec![Term::int(-1), sum])
    } else {
        sum
    }
}

/// What [`matchings`] calls with each matching: its pairs and its single
/// slots.
type Found<'a> = dyn FnMut(&[(usize, usize)], &[usize]) + 'a;

/// Calls `found` with every partial matching of the slots from `next` on
/// that are not yet `used`: the pairs and the single slots.
fn matchings(
    slots: &[Slot],
    next: usize,
    used: &mut Vec<bool>,
    pairs: &mut Vec<(usize, usize)>,
    singles: &mut Vec<usize>,
    found: &mut Found,
) {
    let Some(first) = (next..slots.len()).find(|&k| !used[k]) else {
        found(pairs, singles);
        return;
    };
    used[first] = true;
    singles.push(first);
    matchings(slots, first + 1, used, pairs, singles, found);
    singles.pop();
    for partner in first + 1..slots.len() {
        if used[partner] {
            continue;
        }
        used[partner] = true;
        pairs.push((first, partner));
        matchings(slots, first + 1, used, pairs, singles, found);
        pairs.pop();
        used[partner] = false;
    }
    used[first] = false;
}

/// |w|^{2 - d - 2m}: |x - x'|^{2-d-2m}, or (|x - x'|² + 4 y y')^{(2-d)/2 - m}.
fn base_power(part: Part, x: &Point, y: &Point, d: &Term, m: i64) -> Term {
    match part {
        Part::Direct => dist_pow(x, y, minus(Term::int(2 - 2 * m), d.clone())),
        Part::Image => {
            let square = add(vec![
                dist_pow(x, y, Term::int(2)),
                mul(vec![Term::int(4), normal_coord(x), normal_coord(y)]),
            ]);
            let half = mul(vec![rational(1, 2), minus(Term::int(2), d.clone())]);
            let e = if m == 0 {
                half
            } else {
                add(vec![half, Term::int(-m)])
            };
            pow(square, e)
        }
    }
}

/// The factor of a matched pair: δ_ij, or R_ij = δ_ij - 2 n_i n_j between
/// the two ends in the image term.
fn pair(part: Part, (i, i_at_y): Slot, (j, j_at_y): Slot) -> Term {
    let kron = Term::Kron(i.clone(), j.clone());
    if part == Part::Image && i_at_y != j_at_y {
        add(vec![
            kron,
            mul(vec![
                Term::int(-2),
                Term::Normal(i.clone()),
                Term::Normal(j.clone()),
            ]),
        ])
    } else {
        kron
    }
}

/// The factor of a single index: w_i, or (R w)_i on x' in the image term.
fn component(part: Part, x: &Point, y: &Point, (i, at_y): Slot) -> Term {
    let difference = minus(
        Term::Comp(x.clone(), i.clone()),
        Term::Comp(y.clone(), i.clone()),
    );
    match part {
        Part::Direct => difference,
        Part::Image => {
            // w_i = (x - x')_i + 2 n_i y', (R w)_i = (x - x')_i - 2 n_i y.
            let (k, height) = if at_y { (-2, x) } else { (2, y) };
            add(vec![
                difference,
                mul(vec![
                    Term::int(k),
                    Term::Normal(i.clone()),
                    normal_coord(height),
                ]),
            ])
        }
    }
}

#[cfg(test)]
mod tests {
    //! The closed forms against central finite differences of the
    //! propagator |x - x'|^{2-d} + c |x - x̄'|^{2-d} (c = 1 Neumann, -1
    //! Dirichlet, or a reflection coefficient ρ) at seeded random points,
    //! d = 3…6, every derivative structure with up to two derivatives at
    //! each end (common practice: a closed form and a difference quotient
    //! of the same function agree to the quotient's error; here nested
    //! central differences with one Richardson step, error O(h⁴)).

    use super::*;
    use std::collections::BTreeMap;

    /// Seeded points from the crate's splitmix64 (`numeric::splitmix`).
    struct Rng(u64);
    impl Rng {
        fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
            lo + (hi - lo) * crate::numeric::splitmix(&mut self.0)
        }
    }

    /// The value of a term built by [`derivative`], with the points at
    /// `coords` and every named index at the direction `names` gives it
    /// (the normal direction is the last one).
    fn value(
        t: &Term,
        coords: &BTreeMap<String, Vec<f64>>,
        names: &BTreeMap<String, usize>,
        d: usize,
    ) -> f64 {
        let dir = |i: &Index| match i {
            Index::N => d - 1,
            Index::Named(n) => names[n],
        };
        match t {
            Term::Num(q) => {
                use num_traits::ToPrimitive;
                q.to_f64().unwrap()
            }
            Term::Add(ts) => ts.iter().map(|t| value(t, coords, names, d)).sum(),
            Term::Mul(ts) => ts.iter().map(|t| value(t, coords, names, d)).product(),
            Term::Pow(b, e) => value(b, coords, names, d).powf(value(e, coords, names, d)),
            Term::Dist(p, q) => {
                let (p, q) = (
                    &coords[p.name.as_ref() as &str],
                    &coords[q.name.as_ref() as &str],
                );
                p.iter()
                    .zip(q)
                    .map(|(a, b)| (a - b) * (a - b))
                    .sum::<f64>()
                    .sqrt()
            }
            Term::Comp(p, i) => coords[p.name.as_ref() as &str][dir(i)],
            Term::Kron(i, j) => f64::from(u8::from(dir(i) == dir(j))),
            Term::Normal(i) => f64::from(u8::from(dir(i) == d - 1)),
            other => panic!("unexpected {other:?}"),
        }
    }

    /// The propagator without C_φ.
    fn propagator(x: &[f64], y: &[f64], c: f64) -> f64 {
        let d = x.len();
        let p = 2.0 - d as f64;
        let direct: f64 = x.iter().zip(y).map(|(a, b)| (a - b) * (a - b)).sum();
        let mut image = 0.0;
        for k in 0..d {
            let mirrored = if k == d - 1 { -y[k] } else { y[k] };
            image += (x[k] - mirrored) * (x[k] - mirrored);
        }
        direct.powf(p / 2.0) + c * image.powf(p / 2.0)
    }

    /// Nested central differences: the derivatives `dirs` (point 0 or 1,
    /// direction) of the propagator.
    fn difference(x: &[f64], y: &[f64], c: f64, dirs: &[(usize, usize)], h: f64) -> f64 {
        let Some((&(point, k), rest)) = dirs.split_first() else {
            return propagator(x, y, c);
        };
        let shifted = |s: f64| {
            let (mut x, mut y) = (x.to_vec(), y.to_vec());
            if point == 0 {
                x[k] += s;
            } else {
                y[k] += s;
            }
            difference(&x, &y, c, rest, h)
        };
        (shifted(h) - shifted(-h)) / (2.0 * h)
    }

    fn point(name: &str) -> Point {
        Point {
            rank: 0,
            par: false,
            name: name.into(),
        }
    }

    /// Every derivative list on one end with up to two entries from the
    /// named indices i, j (x) or k, l (x'), the normal n and the index s
    /// summed within that end (`s s`) or across both ends (`t`).
    fn lists(own: [&str; 2]) -> Vec<Vec<Index>> {
        let named = |n: &str| Index::Named(n.to_string());
        let mut single = vec![named(own[0]), Index::N, named("t")];
        let mut out = vec![vec![]];
        out.extend(single.iter().map(|i| vec![i.clone()]));
        single.push(named(own[1]));
        for (a, i) in single.iter().enumerate() {
            for j in &single[a..] {
                if *i == named("t") && *j == named("t") {
                    continue;
                }
                out.push(vec![i.clone(), j.clone()]);
            }
        }
        out.push(vec![named("s"), named("s")]);
        out
    }

    #[test]
    fn closed_forms_match_finite_differences() {
        let mut rng = Rng(20261203);
        let mut checked = 0usize;
        for d in 3..=6usize {
            let dim = Term::int(d as i64);
            let (px, py) = (point("x"), point("y"));
            for c in [1.0, -1.0, rng.uniform(-1.0, 1.0)] {
                for at_x in lists(["i", "j"]) {
                    for at_y in lists(["k", "l"]) {
                        // `t` once at each end or not at all; `s s` at one end.
                        let count = |n: &str| {
                            at_x.iter()
                                .chain(&at_y)
                                .filter(|i| **i == Index::Named(n.to_string()))
                                .count()
                        };
                        if count("t") == 1 || count("s") > 2 {
                            continue;
                        }
                        // Points at least 0.8 apart, 0.3 to 1.3 above the wall.
                        let mut random_point = || -> Vec<f64> {
                            (0..d)
                                .map(|k| {
                                    if k == d - 1 {
                                        rng.uniform(0.3, 1.3)
                                    } else {
                                        rng.uniform(-1.0, 1.0)
                                    }
                                })
                                .collect()
                        };
                        let (x, y) = loop {
                            let (x, y) = (random_point(), random_point());
                            let r2: f64 = x.iter().zip(&y).map(|(a, b)| (a - b) * (a - b)).sum();
                            if r2 >= 0.64 {
                                break (x, y);
                            }
                        };
                        let closed = add(vec![
                            derivative(Part::Direct, &px, &py, &at_x, &at_y, &dim),
                            mul(vec![
                                Term::Num(num_rational::BigRational::from_float(c).unwrap()),
                                derivative(Part::Image, &px, &py, &at_x, &at_y, &dim),
                            ]),
                        ]);
                        let coords = BTreeMap::from([
                            ("x".to_string(), x.clone()),
                            ("y".to_string(), y.clone()),
                        ]);
                        // Free names at random directions; summed ones over all.
                        let mut names = BTreeMap::new();
                        for n in ["i", "j", "k", "l"] {
                            names.insert(
                                n.to_string(),
                                (crate::numeric::splitmix(&mut rng.0) * d as f64) as usize % d,
                            );
                        }
                        let summed: Vec<&str> =
                            ["s", "t"].into_iter().filter(|n| count(n) == 2).collect();
                        let mut closed_sum = 0.0;
                        let mut diff_sum = 0.0;
                        let mut scale = 0.0;
                        let assignments = d.pow(summed.len() as u32);
                        for a in 0..assignments {
                            let mut rest = a;
                            for n in &summed {
                                names.insert(n.to_string(), rest % d);
                                rest /= d;
                            }
                            let dir = |i: &Index| match i {
                                Index::N => d - 1,
                                Index::Named(n) => names[n],
                            };
                            let dirs: Vec<(usize, usize)> = at_x
                                .iter()
                                .map(|i| (0, dir(i)))
                                .chain(at_y.iter().map(|j| (1, dir(j))))
                                .collect();
                            // One Richardson step: error O(h⁴).
                            let fd = (4.0 * difference(&x, &y, c, &dirs, 1e-3)
                                - difference(&x, &y, c, &dirs, 2e-3))
                                / 3.0;
                            closed_sum += value(&closed, &coords, &names, d);
                            diff_sum += fd;
                            scale += fd.abs();
                        }
                        let tolerance = 1e-4 * (1.0 + scale);
                        assert!(
                            (closed_sum - diff_sum).abs() <= tolerance,
                            "d = {d}, c = {c}, ∂x {at_x:?}, ∂y {at_y:?}: closed form {closed_sum}, differences {diff_sum}"
                        );
                        checked += 1;
                    }
                }
            }
        }
        assert!(checked > 500, "{checked}");
    }
}
