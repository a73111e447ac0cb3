//! The free scalar next to a reflecting wall (docs/conventions.md §11):
//! ⟨φ φ⟩ = G(x - x') + ρ G(x - x̄'), and the wall coupled with strength g
//! to a boundary generalised free field χ of the marginal dimension
//! (Behan, Di Pietro, Lauria & van Rees 2020, arXiv:2009.03336, study this
//! family; ρ(g) derived in the conventions, §11).
//!
//! - `plus_and_minus_one_are_the_walls_exactly`: at ρ = ±1, and at g = 0
//!   from either side, every correlator (φ, φ², T, D, φ̂, ∂_nφ, T_nμ at the
//!   wall, ⟨D D D⟩) is exactly the Neumann or Dirichlet one: their
//!   difference normalises to 0.
//! - `chi_is_the_unit_generalised_free_field_at_zero_coupling`: ⟨χ χ⟩ =
//!   1/|s - s'|^{2Δ_χ}, ⟨χ φ⟩ = 0 at g = 0 (derived).
//! - `boundary_condition_holds_inside_correlators`: ∂_n⟨φ(x) X⟩ at y = 0 is
//!   g⟨χ(x∥) X⟩ (Neumann side) and ⟨φ(x) X⟩ at y = 0 is -g⟨χ(x∥) X⟩
//!   (Dirichlet side), X with φ, φ², T and χ, at seeded points (derived:
//!   the equations of motion of the coupled action).
//! - `parallel_momentum_flux_is_one_minus_rho_squared`: ⟨T_na(s) φ φ⟩ at
//!   the wall is (1 - ρ²) times a function of the points alone (derived,
//!   §11), exactly in ρ; ⟨T_na(s) φ²⟩ vanishes for every ρ.
//! - `hemisphere_ward_identity_fails_by_the_flux_into_the_wall`: the
//!   translation Ward identity around χ by the hemisphere flux fails at
//!   g ≠ 0 (the disc on the wall carries T_na), W5 for the normal
//!   translation holds.
//! - `boundary_channel_holds_the_two_blocks`: `decompose` finds exactly the
//!   boundary blocks d/2 - 1 and d/2 in ⟨φ φ⟩ with μ² = 1 + ρ and
//!   (1 - ρ)(d - 2)/4 (units of C_φ), d = 3, 4, 5.

use std::sync::Arc;

use wardsmith::context::Context;
use wardsmith::diagnostic::Source;
use wardsmith::lower::{lower, Family, ItemKind, ModelChoice, NumericSpec};
use wardsmith::normal::normalize_pointwise as normalize;
use wardsmith::numeric::eval::compile;
use wardsmith::numeric::models::{apply, sphere_area, Model, SPHERE_AREA};
use wardsmith::numeric::session::build_model;
use wardsmith::numeric::Values;
use wardsmith::syntax::parse_file;
use wardsmith::term::{Index, Point, Term};

/// The declarations, the model choice and numeric set-up, and the
/// `simplify` expressions of `text`.
fn file(text: &str) -> (Arc<Context>, NumericSpec, Vec<Term>) {
    let source = Source::new("reflection.ward", text);
    let parsed = parse_file(&source).unwrap_or_else(|e| panic!("{}", e.render()));
    let program = lower(&source, &parsed).unwrap_or_else(|e| panic!("{}", e.render()));
    let terms = program
        .items
        .iter()
        .map(|item| match &item.kind {
            ItemKind::Simplify { expr, .. } => expr.clone(),
            _ => panic!("only `simplify` statements here"),
        })
        .collect();
    (program.ctx.clone(), program.numeric.clone(), terms)
}

fn model(ctx: &Context, spec: &NumericSpec, choice: ModelChoice) -> Box<dyn Model + Send + Sync> {
    build_model(ctx, &choice, spec).unwrap_or_else(|e| panic!("{}", e.render()))
}

fn explicit(model: &dyn Model, ctx: &Context, t: &Term) -> Term {
    let applied = apply(model, ctx, t).unwrap_or_else(|e| panic!("{}", e.render()));
    normalize(ctx, &applied).unwrap_or_else(|e| panic!("{}", e.render()))
}

fn free(dirichlet: Option<bool>, fields: &[(&str, &str)], family: Option<Family>) -> ModelChoice {
    ModelChoice::FreeScalar {
        dirichlet,
        complex: false,
        unimproved: false,
        fields: fields
            .iter()
            .map(|(a, b)| (a.to_string(), b.to_string()))
            .collect(),
        family,
    }
}

const FIELDS: [(&str, &str); 6] = [
    ("P", "phi"),
    ("Q", "phi2"),
    ("H", "boundary-phi"),
    ("N", "boundary-dphi"),
    ("F", "boundary-tn"),
    ("K", "boundary-phi2"),
];

fn declarations(d: usize) -> String {
    format!(
        "dimension {d}\nhalfspace y >= 0\nparallel a\nparameters g\n\
         scalar P dim d/2 - 1\nscalar Q dim d - 2\n\
         boundary scalar H dim d/2 - 1\nboundary scalar N dim d/2\n\
         boundary scalar K dim d - 2\nboundary vector F dim d\n\
         points x1 x2 x3\nboundary points s1 s2 s3\n"
    )
}

/// The correlators every model must get right.
fn correlators(d: usize) -> Vec<&'static str> {
    let mut out = vec![
        "<P(x1) P(x2)>",
        "<Q(x1) Q(x2)>",
        "<Q(x1)>",
        "<T[mu,nu](x1)>",
        "<T[mu,nu](x1) P(x2) P(x3)>",
        "<T[mu,nu](x1) Q(x2)>",
        "<D(s1) D(s2)>",
        "<D(s1) Q(x1)>",
        "<D(s1) P(x1) P(x2)>",
        "<H(s1) P(x1)>",
        "<N(s1) P(x1)>",
        "<H(s1) H(s2)>",
        "<N(s1) N(s2)>",
        "<K(s1) K(s2)>",
        "<F[mu](s1) P(x1) P(x2)>",
        "<F[a](s1) Q(x1)>",
        "<F[mu](s1) D(s2)>",
    ];
    if d == 4 {
        out.push("<D(s1) D(s2) D(s3)>");
    }
    out
}

// docs/conventions.md §11 (derived): ρ = ±1 and g = 0 are the fixed walls.
#[test]
fn plus_and_minus_one_are_the_walls_exactly() {
    for d in [3, 4] {
        let mut text = declarations(d);
        for c in correlators(d) {
            text.push_str(&format!("simplify {c}\n"));
        }
        let (ctx, spec, terms) = file(&text);
        for (dirichlet, rho) in [(false, 1), (true, -1)] {
            let wall = model(&ctx, &spec, free(Some(dirichlet), &FIELDS, None));
            let others = [
                free(None, &FIELDS, Some(Family::Reflection(Term::int(rho)))),
                free(
                    Some(dirichlet),
                    &FIELDS,
                    Some(Family::Coupling {
                        dirichlet,
                        g: Term::zero(),
                    }),
                ),
            ];
            for other in others {
                let other = model(&ctx, &spec, other);
                for (t, c) in terms.iter().zip(correlators(d)) {
                    let a = explicit(wall.as_ref(), &ctx, t);
                    let b = explicit(other.as_ref(), &ctx, t);
                    let diff = normalize(&ctx, &Term::Add(vec![a, b.negated()])).unwrap();
                    assert!(
                        diff.is_zero(),
                        "d = {d}, ρ = {rho}: {c} differs from the wall's by {diff:?} ({})",
                        other.describe()
                    );
                }
            }
        }
    }
}

/// Seeded positions: bulk points at heights 0.3 to 1.3, boundary points on
/// the wall (splitmix64, Steele, Lea & Flood 2014).
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }

    fn point(&mut self, d: usize, boundary: bool) -> Vec<f64> {
        let mut p: Vec<f64> = (0..d).map(|_| 2.0 * self.next() - 1.0).collect();
        p[d - 1] = if boundary { 0.0 } else { 0.3 + self.next() };
        p
    }
}

fn values(d: usize, g: f64, points: &[(&str, Vec<f64>)]) -> Values {
    let mut v = Values {
        dim: d,
        ..Values::default()
    };
    v.scalars.insert(SPHERE_AREA.to_string(), sphere_area(d));
    v.scalars.insert("d".to_string(), d as f64);
    v.tensors.insert("g".to_string(), vec![g]);
    for (n, p) in points {
        v.points.insert(n.to_string(), p.clone());
    }
    v
}

fn eval(ctx: &Context, t: &Term, free: &[(String, usize)], v: &Values) -> f64 {
    compile(ctx, t, free, v.dim)
        .unwrap_or_else(|e| panic!("{}", e.render()))
        .eval(v)
        .unwrap_or_else(|e| panic!("{}", e.render()))
}

// docs/conventions.md §11 (derived): χ is the unit-normalised generalised
// free field at g = 0, and does not see φ.
#[test]
fn chi_is_the_unit_generalised_free_field_at_zero_coupling() {
    for d in [3usize, 4, 5] {
        for dirichlet in [false, true] {
            let dim = if dirichlet { "d/2 - 1" } else { "d/2" };
            let text = format!(
                "dimension {d}\nhalfspace y >= 0\nscalar P dim d/2 - 1\nboundary scalar C dim {dim}\n\
                 points x1\nboundary points s1 s2\n\
                 simplify <C(s1) C(s2)>\nsimplify <C(s1) P(x1)>\nsimplify <C(s1) D(s2)>\n"
            );
            let (ctx, spec, terms) = file(&text);
            let m = model(
                &ctx,
                &spec,
                free(
                    Some(dirichlet),
                    &[("P", "phi"), ("C", "chi")],
                    Some(Family::Coupling {
                        dirichlet,
                        g: Term::zero(),
                    }),
                ),
            );
            let two = explicit(m.as_ref(), &ctx, &terms[0]);
            let delta = if dirichlet { d as i64 - 2 } else { d as i64 };
            let s = |n: &str| Point::named(if n == "s1" { 1 } else { 2 }, n);
            let gff = Term::Pow(
                Box::new(Term::Dist(s("s1"), s("s2"))),
                Box::new(Term::int(-delta)),
            );
            let mut rng = Rng(17 + d as u64);
            for _ in 0..4 {
                let v = values(
                    d,
                    0.0,
                    &[
                        ("x1", rng.point(d, false)),
                        ("s1", rng.point(d, true)),
                        ("s2", rng.point(d, true)),
                    ],
                );
                let (a, b) = (eval(&ctx, &two, &[], &v), eval(&ctx, &gff, &[], &v));
                assert!(
                    (a - b).abs() <= 1e-12 * b.abs(),
                    "d = {d}, dirichlet {dirichlet}: <χ χ> = {a}, GFF {b}"
                );
            }
            assert!(explicit(m.as_ref(), &ctx, &terms[1]).is_zero());
            assert!(explicit(m.as_ref(), &ctx, &terms[2]).is_zero());
        }
    }
}

// docs/conventions.md §11 (derived): the boundary condition of the coupled
// wall inside correlators, ∂_nφ = g χ (Neumann side, from S ⊃ g∫φ̂χ) and
// φ̂ = -g χ (Dirichlet side, from S ⊃ g∫χ∂_nφ), at seeded points and
// couplings, in d = 3 and 4.
#[test]
fn boundary_condition_holds_inside_correlators() {
    let others = [
        "P(x2)",
        "Q(x2)",
        "C(s2)",
        "P(x2) C(s2)",
        "T[mu,nu](x2)",
        "P(x2) P(x3)",
    ];
    for d in [3usize, 4] {
        for dirichlet in [false, true] {
            let dim = if dirichlet { "d/2 - 1" } else { "d/2" };
            let mut text = format!(
                "dimension {d}\nhalfspace y >= 0\nparameters g\nscalar P dim d/2 - 1\n\
                 scalar Q dim d - 2\nboundary scalar C dim {dim}\n\
                 points x x2 x3\nboundary points s s2\n"
            );
            for o in others {
                text.push_str(&format!("simplify <P(x) {o}>\nsimplify <C(s) {o}>\n"));
            }
            let (ctx, spec, terms) = file(&text);
            let g = Term::Param("g".into(), vec![]);
            let m = model(
                &ctx,
                &spec,
                free(
                    Some(dirichlet),
                    &[("P", "phi"), ("Q", "phi2"), ("C", "chi")],
                    Some(Family::Coupling { dirichlet, g }),
                ),
            );
            let x = Point::named(0, "x");
            let mut rng = Rng(101 + d as u64 + 7 * dirichlet as u64);
            for (k, o) in others.iter().enumerate() {
                let bulk = explicit(m.as_ref(), &ctx, &terms[2 * k]);
                // Neumann side: ∂_n of the bulk field; Dirichlet side: its value.
                let lhs = if dirichlet {
                    bulk
                } else {
                    normalize(&ctx, &Term::Der(Index::N, x.clone(), Box::new(bulk))).unwrap()
                };
                let chi = explicit(m.as_ref(), &ctx, &terms[2 * k + 1]);
                let sign = if dirichlet { -1.0 } else { 1.0 };
                for _ in 0..3 {
                    let gv = 2.0 * rng.next() - 0.5;
                    let s = rng.point(d, true);
                    let mut points = vec![
                        ("s", s.clone()),
                        ("x", s),
                        ("x2", rng.point(d, false)),
                        ("x3", rng.point(d, false)),
                        ("s2", rng.point(d, true)),
                    ];
                    // x on the wall, at s.
                    points[1].1[d - 1] = 0.0;
                    let v = values(d, gv, &points);
                    let free: Vec<Vec<(String, usize)>> = if o.contains("T[") {
                        (0..d)
                            .flat_map(|i| {
                                (0..d).map(move |j| {
                                    vec![("mu".to_string(), i), ("nu".to_string(), j)]
                                })
                            })
                            .collect()
                    } else {
                        vec![vec![]]
                    };
                    for f in free {
                        let a = eval(&ctx, &lhs, &f, &v);
                        let b = sign * gv * eval(&ctx, &chi, &f, &v);
                        assert!(
                            (a - b).abs() <= 1e-10 * (a.abs() + b.abs()) + 1e-13,
                            "d = {d}, dirichlet {dirichlet}, g = {gv}, X = {o} {f:?}: {a} vs {b}"
                        );
                    }
                }
            }
        }
    }
}

// docs/conventions.md §11 (derived): ⟨T_na(s) X⟩ at the wall has one leg ∝
// (1 + ρ)/2 and one ∝ (1 - ρ)/2 in every term, so it is (1 - ρ²) times a
// function of the points; exactly, with ρ a parameter.
#[test]
fn parallel_momentum_flux_is_one_minus_rho_squared() {
    for d in [3usize, 4] {
        let text = format!(
            "dimension {d}\nhalfspace y >= 0\nparallel a\nparameters r\nscalar P dim d/2 - 1\n\
             scalar Q dim d - 2\nboundary vector F dim d\npoints x1 x2\nboundary points s\n\
             simplify <F[a](s) P(x1) P(x2)>\nsimplify <F[a](s) Q(x1)>\nsimplify <F[n](s) Q(x1)>\n"
        );
        let (ctx, spec, terms) = file(&text);
        let r = Term::Param("r".into(), vec![]);
        let fields = [("P", "phi"), ("Q", "phi2"), ("F", "boundary-tn")];
        let family = model(
            &ctx,
            &spec,
            free(None, &fields, Some(Family::Reflection(r.clone()))),
        );
        let half = model(
            &ctx,
            &spec,
            free(None, &fields, Some(Family::Reflection(Term::zero()))),
        );
        // ⟨T_na(s) φ²(x)⟩ vanishes for every ρ: the two legs' terms cancel
        // at the conformal ξ.
        assert!(explicit(family.as_ref(), &ctx, &terms[1]).is_zero());
        for (k, t) in terms.iter().enumerate().take(1) {
            let exact = explicit(family.as_ref(), &ctx, t);
            let at_zero = explicit(half.as_ref(), &ctx, t);
            assert!(!at_zero.is_zero(), "d = {d}: term {k} vanishes at ρ = 0");
            // (1 - ρ²) ⟨…⟩|_{ρ=0} - ⟨…⟩ = 0.
            let one_minus = Term::Add(vec![
                Term::one(),
                Term::Mul(vec![Term::int(-1), r.clone(), r.clone()]),
            ]);
            let diff = normalize(
                &ctx,
                &Term::Add(vec![Term::Mul(vec![one_minus, at_zero]), exact.negated()]),
            )
            .unwrap();
            assert!(diff.is_zero(), "d = {d}, term {k}: remainder {diff:?}");
        }
        // The normal component is the displacement: not ∝ (1 - ρ²).
        let tnn = explicit(family.as_ref(), &ctx, &terms[2]);
        let ones = [1, -1].map(|rho| {
            explicit(
                model(
                    &ctx,
                    &spec,
                    free(None, &fields, Some(Family::Reflection(Term::int(rho)))),
                )
                .as_ref(),
                &ctx,
                &terms[2],
            )
        });
        assert!(!tnn.is_zero() && ones.iter().all(|t| !t.is_zero()));
    }
}

// docs/conventions.md §8, §11 (derived): the translation Ward identity
// around a boundary insertion, by the hemisphere flux, leaves out the disc
// on the wall, which carries T_na. At g = 0 it holds; at g = 3/5 it fails by
// the parallel momentum that flows into the wall, while W5 for the normal
// translation (D = T_nn) holds at every g.
#[test]
fn hemisphere_ward_identity_fails_by_the_flux_into_the_wall() {
    use std::path::Path;
    use wardsmith::run::{run_source, Mode, Options};
    let text = |g: &str| {
        format!(
            "dimension 3\nhalfspace y >= 0\nparameters g\nboundary scalar C dim 3/2\n\
             scalar P dim 1/2\nscalar Q dim 1\npoints x x1\nboundary points s1\n\
             place s1 at (0, 0, 0)\nplace x1 at (1/2, -1/3, 3/5)\n\
             model free-scalar neumann coupling g with C = chi, P = phi, Q = phi2\n\
             killing tr translation a parallel\nvalues a = (1, 1/2, 0), g = {g}\n\
             compare ∫[x∥ in boundary] {{ <D(x∥) Q(x1)> }} = ∂[n](x1) <Q(x1)>\n\
             compare ∮[x on ball(s1, 1/5)] {{ N[mu] tr[nu](x) <T[mu,nu](x) C(s1) P(x1)> }}\n\
                   = - a[mu] ∂[mu](s1) <C(s1) P(x1)>\n"
        )
    };
    let run = |g: &str| {
        let source = Source::new("hemisphere.ward", text(g));
        run_source(&source, Path::new("."), Mode::Check, &Options::default())
            .unwrap_or_else(|e| panic!("{}", e.render()))
    };
    let coupled = run("3/5");
    assert!(
        coupled.report.contains("line 14: compare agree"),
        "{}",
        coupled.report
    );
    assert!(
        coupled.report.contains("line 15: compare DISAGREE"),
        "{}",
        coupled.report
    );
    let free = run("0");
    assert_eq!(free.code, 0, "{}", free.report);
}

/// The JSON items of kind `decompose` of a file's report, and the exit code.
fn decompositions(text: &str) -> (Vec<serde_json::Value>, i32) {
    use std::path::Path;
    use wardsmith::run::{run_source, Mode, Options};
    let source = Source::new("decompose.ward", text);
    let opts = Options {
        json: true,
        ..Options::default()
    };
    let out = run_source(&source, Path::new("."), Mode::Check, &opts)
        .unwrap_or_else(|e| panic!("{}", e.render()));
    let doc: serde_json::Value = serde_json::from_str(&out.report).unwrap();
    let items = doc["items"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|i| i["kind"] == "decompose")
        .cloned()
        .collect();
    (items, out.code)
}

// docs/conventions.md §9, §11 (derived): in the boundary channel ⟨φ φ⟩
// holds exactly the two blocks Δ̂ = d/2 - 1 and d/2, with μ² = 1 + ρ and
// (1 - ρ)(d - 2)/4 in units of C_φ: (1 ± ρ)/2 times the Neumann and
// Dirichlet values 2 and (d - 2)/2 (Liendo, Rastelli & van Rees 2012,
// arXiv:1210.4258, for the walls). Either block alone does not fit.
#[test]
fn boundary_channel_holds_the_two_blocks() {
    for d in [3usize, 4, 5] {
        let c_phi = 1.0 / ((d as f64 - 2.0) * sphere_area(d));
        for rho in ["-3/5", "1/5", "9/10"] {
            let r: f64 = {
                let (n, m) = rho.split_once('/').unwrap();
                n.parse::<f64>().unwrap() / m.parse::<f64>().unwrap()
            };
            let text = format!(
                "dimension {d}\nhalfspace y >= 0\nscalar P dim d/2 - 1\npoints x1 x2\n\
                 model free-scalar reflection {rho} with P = phi\n\
                 decompose <P(x1) P(x2)> in boundary blocks d/2 - 1, d/2\n"
            );
            let (items, code) = decompositions(&text);
            assert_eq!(code, 0, "{text}");
            let mu: Vec<f64> = items[0]["coefficients"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap() / c_phi)
                .collect();
            let want = [1.0 + r, (1.0 - r) * (d as f64 - 2.0) / 4.0];
            for (got, want) in mu.iter().zip(want) {
                assert!(
                    (got - want).abs() < 1e-9,
                    "d = {d}, ρ = {rho}: μ² = {mu:?}, expected {want}"
                );
            }
            assert!(items[0]["residual"].as_f64().unwrap() < 1e-12);
            for alone in ["d/2 - 1", "d/2"] {
                let text = text.replace("d/2 - 1, d/2", alone);
                let (_, code) = decompositions(&text);
                assert_ne!(code, 0, "d = {d}, ρ = {rho}: {alone} alone fits");
            }
        }
    }
}
