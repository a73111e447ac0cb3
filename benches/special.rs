//! Benchmark of the special functions for conformal blocks: the time of one
//! ₂F₁ evaluation in each region of the real axis, the same against the
//! plain defining series summed to the same accuracy where that converges,
//! and the two blocks of a bulk two-point function near a wall.
//!
//! - `hyp2f1`: `numeric::special::hyp2f1` at one point of each region (the
//!   plain series, Pfaff, the connection formula with c - a - b generic or
//!   whole, z → 1, z → -∞, a polynomial).
//! - `plain_series`: Σ (a)_k (b)_k/((c)_k k!) z^k term by term until a term
//!   is below 2^-56 of the sum past the largest term — what one would write
//!   without the transformations. Only where |z| < 1; its error against a
//!   closed form is printed before timing (it loses digits where the terms
//!   alternate, and needs ~40/(1 - z) terms near z = 1).
//! - `bulk_block`, `boundary_block`: the blocks at a few cross-ratios.
//! - `compiled_hyp2f1_region(_bounded)`: `F21(a, b; c; z)` compiled from a
//!   term, at the same points, plain and with the running error bound.
//! - `block_files`: whole `.ward` files with ₂F₁: the Casimir claims and
//!   the integral representation of a partial wave.
//!
//! Run with `cargo bench --bench special`.

use std::fmt;

use divan::black_box;
use wardsmith::numeric::special::{
    boundary_block, bulk_block, four_point_block, four_point_block_polar, hyp2f1,
};

fn main() {
    eprintln!(
        "case                               value            hyp2f1 err  plain err   plain terms"
    );
    for case in CASES {
        let got = hyp2f1(case.a, case.b, case.c, case.z).expect("defined");
        let want = (case.exact)(case.z);
        let plain = if case.z.abs() < 1.0 {
            let (v, n) = plain_series(case.a, case.b, case.c, case.z);
            format!("{:.1e}  {n:>10}", ((v - want) / want).abs())
        } else {
            "     (diverges)".to_string()
        };
        eprintln!(
            "{:<32} {want:>16.9e}  {:.1e}   {plain}",
            case.name,
            ((got - want) / want).abs()
        );
    }
    divan::main();
}

/// One point of one region, with a closed form to judge both sums by.
struct Case {
    name: &'static str,
    a: f64,
    b: f64,
    c: f64,
    z: f64,
    exact: fn(f64) -> f64,
}

impl fmt::Display for Case {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name)
    }
}

/// F(1, 1; 2; z) = -ln(1 - z)/z (DLMF 15.4.1).
fn log1(z: f64) -> f64 {
    -(-z).ln_1p() / z
}

/// F(1/2, 1; 3/2; -x²) = arctan(x)/x at z = -x² (DLMF 15.4.3).
fn atan1(z: f64) -> f64 {
    let x = (-z).sqrt();
    x.atan() / x
}

/// F(a, 1/2 + a; 1 + 2a; z) = (1/2 + √(1 - z)/2)^(-2a) at a = 0.3 (DLMF 15.4.13).
fn quad03(z: f64) -> f64 {
    (0.5 + 0.5 * (1.0 - z).sqrt()).powf(-0.6)
}

/// F(-12, 12; 1/2; z) = T_12(1 - 2z), the Chebyshev polynomial (DLMF
/// §18.5(iii)), = cos(12 arccos(1 - 2z)) for 0 ≤ z ≤ 1.
fn cheb12(z: f64) -> f64 {
    let x = 1.0 - 2.0 * z;
    if x.abs() <= 1.0 {
        (12.0 * x.acos()).cos()
    } else {
        (12.0 * x.abs().acosh()).cosh()
    }
}

const CASES: [Case; 10] = [
    Case {
        name: "series z = 0.3",
        a: 1.0,
        b: 1.0,
        c: 2.0,
        z: 0.3,
        exact: log1,
    },
    Case {
        name: "series z = 0.3, generic",
        a: 0.3,
        b: 0.8,
        c: 1.6,
        z: 0.3,
        exact: quad03,
    },
    Case {
        name: "Pfaff z = -0.7",
        a: 0.5,
        b: 1.0,
        c: 1.5,
        z: -0.7,
        exact: atan1,
    },
    Case {
        name: "connection z = 0.9, c-a-b = 1/2",
        a: 0.3,
        b: 0.8,
        c: 1.6,
        z: 0.9,
        exact: quad03,
    },
    Case {
        name: "connection z = 0.9, c-a-b = 0",
        a: 1.0,
        b: 1.0,
        c: 2.0,
        z: 0.9,
        exact: log1,
    },
    Case {
        name: "log case z = 0.999",
        a: 1.0,
        b: 1.0,
        c: 2.0,
        z: 0.999,
        exact: log1,
    },
    Case {
        name: "log case z = 1 - 1e-8",
        a: 1.0,
        b: 1.0,
        c: 2.0,
        z: 1.0 - 1e-8,
        exact: log1,
    },
    Case {
        name: "z = -7.5 (b - a = 1/2)",
        a: 0.5,
        b: 1.0,
        c: 1.5,
        z: -7.5,
        exact: atan1,
    },
    Case {
        name: "z = -1e6 (b - a = 1/2)",
        a: 0.5,
        b: 1.0,
        c: 1.5,
        z: -1e6,
        exact: atan1,
    },
    Case {
        name: "polynomial degree 12, z = 0.3",
        a: -12.0,
        b: 12.0,
        c: 0.5,
        z: 0.3,
        exact: cheb12,
    },
];

/// Cases of the comparison: the plain series converges there.
const SERIES_CASES: [usize; 7] = [0, 1, 2, 3, 4, 5, 9];

/// The defining series, stopped when a term past the largest is below
/// 2^-56 of the sum; the number of terms it took.
fn plain_series(a: f64, b: f64, c: f64, z: f64) -> (f64, usize) {
    let (mut t, mut s) = (1.0f64, 1.0f64);
    for k in 0..10_000_000usize {
        let kf = k as f64;
        let ratio = (a + kf) * (b + kf) * z / ((c + kf) * (kf + 1.0));
        t *= ratio;
        s += t;
        if t == 0.0 || (ratio.abs() < 1.0 && t.abs() < s.abs() * 1.4e-17) {
            return (s, k + 1);
        }
    }
    (s, 10_000_000)
}

#[divan::bench(args = CASES.iter())]
fn hyp2f1_region(case: &Case) -> f64 {
    hyp2f1(
        black_box(case.a),
        black_box(case.b),
        black_box(case.c),
        black_box(case.z),
    )
    .expect("defined")
}

#[divan::bench(args = SERIES_CASES.iter().map(|&i| &CASES[i]))]
fn plain_series_region(case: &Case) -> f64 {
    plain_series(
        black_box(case.a),
        black_box(case.b),
        black_box(case.c),
        black_box(case.z),
    )
    .0
}

const XIS: [f64; 3] = [0.05, 1.0, 20.0];

/// f_bulk(Δ = 3.3; ξ) in d = 3, and f_bdy at Δ̂ = 2.7 and at the unitarity
/// bound Δ̂ = 1/2.
#[divan::bench(args = XIS)]
fn bulk_block_d3(xi: f64) -> f64 {
    bulk_block(3.0, black_box(3.3), black_box(xi)).expect("defined")
}

#[divan::bench(args = XIS)]
fn boundary_block_d3(xi: f64) -> f64 {
    boundary_block(3.0, black_box(2.7), black_box(xi)).expect("defined")
}

#[divan::bench(args = XIS)]
fn boundary_block_d3_unitarity_bound(xi: f64) -> f64 {
    boundary_block(3.0, black_box(0.5), black_box(xi)).expect("defined")
}

/// The four-point s-channel block g_{Δ,ℓ} (Δ = 5.3, ℓ = 2) in d = 2 and 4,
/// at real z = 0.3, z̄ = 0.1 and at the Euclidean |z| = 0.2, arg z = 1.
#[divan::bench(args = [2, 4])]
fn four_point_block_real(d: u32) -> f64 {
    four_point_block(d, black_box(5.3), 2, black_box(0.3), black_box(0.1)).expect("defined")
}

#[divan::bench(args = [2, 4])]
fn four_point_block_euclidean(d: u32) -> f64 {
    four_point_block_polar(d, black_box(5.3), 2, black_box(0.2), black_box(1.0)).expect("defined")
}

// ───────────── ₂F₁ in the language: compiled programs and claims ─────────────

/// `F21(a, b; c; z)` compiled from a term (what `evaluate`, `compare` and
/// quadrature run), the same points as `hyp2f1_region`: the program's
/// overhead over the direct call.
#[divan::bench(args = CASES.iter())]
fn compiled_hyp2f1_region(bencher: divan::Bencher, case: &Case) {
    let (program, values) = compiled(case);
    bencher.bench(|| program.eval(black_box(&values)).expect("defined"));
}

/// The same with the running error bound (what a judged value runs).
#[divan::bench(args = CASES.iter())]
fn compiled_hyp2f1_region_bounded(bencher: divan::Bencher, case: &Case) {
    let (program, values) = compiled(case);
    bencher.bench(|| program.eval_bounded(black_box(&values)).expect("defined"));
}

fn compiled(
    case: &Case,
) -> (
    wardsmith::numeric::eval::Program,
    wardsmith::numeric::Values,
) {
    use wardsmith::term::Term;
    let ctx = wardsmith::context::Context::default();
    let sym = |s: &str| Term::Sym(s.into());
    let term = Term::hyp2f1(0, sym("a"), sym("b"), sym("c"), sym("z"));
    let program = wardsmith::numeric::eval::compile(&ctx, &term, &[], 3).expect("compiles");
    let values = wardsmith::numeric::Values {
        dim: 3,
        scalars: [("a", case.a), ("b", case.b), ("c", case.c), ("z", case.z)]
            .into_iter()
            .map(|(k, v)| (k.to_string(), v))
            .collect(),
        ..Default::default()
    };
    (program, values)
}

/// Whole files (parse, lower, differentiate, normal form with the
/// hypergeometric equation, e-graph, report): the Casimir claims in ξ (the
/// test case with five claims, the example with two and a slip), in
/// coordinates (four claims), and the integral representation of a
/// boundary partial wave (one wall quadrature against two blocks, d = 3).
#[divan::bench(args = [
    "tests/cases/integrated/casimir-wall-blocks.ward",
    "examples/wall-casimir.ward",
    "tests/cases/integrated/casimir-coordinates.ward",
    "examples/partial-wave.ward",
    "examples/four-point-blocks.ward",
])]
fn block_files(bencher: divan::Bencher, path: &str) {
    use wardsmith::run::{run_source, Mode, Options};
    let text = std::fs::read_to_string(path).expect("case file exists");
    let source = wardsmith::diagnostic::Source::new(path, text);
    bencher.bench(|| {
        let out = run_source(
            &source,
            std::path::Path::new("."),
            Mode::Check,
            &Options::default(),
        )
        .expect("valid");
        assert_eq!(out.code, 0);
        out
    });
}
