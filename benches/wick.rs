//! Benchmarks of Wick contraction in the free-scalar model: C_T of the
//! free scalar in d = 3 and 4 (⟨T T⟩), C_D with each wall in d = 3 to 6
//! (⟨D D⟩) and ⟨D D D⟩ with each wall in d = 4, each a whole file through
//! `check` (the C_T and C_D files compare with the known value; ⟨D D D⟩ is
//! evaluated), and next to a reflecting wall (docs/conventions.md §11):
//! b1 from ⟨D D D⟩ at ρ = 1/3, and a 50-point scan of C_D(g) with the
//! wall coupled to χ. Positions are invented. `free_scalar_files` times
//! the slowest shipped files that use the free scalar, whole.
//!
//! Run with `cargo bench --bench wick`.

use std::path::Path;

use wardsmith::diagnostic::Source;
use wardsmith::run::{run_path, run_source, Mode, Options};

fn main() {
    divan::main();
}

/// ⟨T T⟩ against C_T = d/((d-1) S_d²) (Osborn & Petkou 1994, hep-th/9307010).
fn c_t(d: usize) -> String {
    let coords = |v: [&str; 6]| v[..d].join(", ");
    format!(
        "dimension {d}\npoints x1 x2\nplace x1 at ({})\nplace x2 at ({})\nmodel free-scalar\n\
         compare <T[mu,nu](x1) T[rho,sigma](x2)>\n\
         = {d}/({} S_d^2) |x1 - x2|^(-{}) (\n\
           1/2 (δ[mu,rho] - 2 (x1[mu] - x2[mu]) (x1[rho] - x2[rho]) |x1 - x2|^(-2))\n\
               (δ[nu,sigma] - 2 (x1[nu] - x2[nu]) (x1[sigma] - x2[sigma]) |x1 - x2|^(-2))\n\
         + 1/2 (δ[mu,sigma] - 2 (x1[mu] - x2[mu]) (x1[sigma] - x2[sigma]) |x1 - x2|^(-2))\n\
               (δ[nu,rho] - 2 (x1[nu] - x2[nu]) (x1[rho] - x2[rho]) |x1 - x2|^(-2))\n\
         - δ[mu,nu] δ[rho,sigma]/{d} )\n",
        coords(["3/10", "-1/5", "1/10", "1/7", "2/9", "-1/3"]),
        coords(["1", "1/2", "1/4", "-1/6", "3/8", "1/5"]),
        d - 1,
        2 * d,
    )
}

/// ⟨D D⟩ = C_D/|s1 - s2|^(2d) with C_D = 2/S_d² for either wall
/// (docs/conventions.md §4, derived).
fn c_d(wall: &str, d: usize) -> String {
    let zeros = |v: [&str; 5]| {
        let mut c: Vec<&str> = v[..d - 1].to_vec();
        c.push("0");
        c.join(", ")
    };
    format!(
        "dimension {d}\nhalfspace y >= 0\nboundary points s1 s2\nplace s1 at ({})\n\
         place s2 at ({})\nmodel free-scalar {wall}\n\
         compare <D(s1) D(s2)> = 2/S_d^2 |s1 - s2|^(-2 d)\n",
        zeros(["0", "0", "0", "0", "0"]),
        zeros(["1", "1/2", "-1/4", "1/3", "2/7"]),
    )
}

/// ⟨D D D⟩ with a wall in d = 4, evaluated.
fn ddd_file(wall: &str) -> String {
    format!(
        "dimension 4\nhalfspace y >= 0\nboundary points s1 s2 s3\nplace s1 at (0, 0, 0, 0)\n\
         place s2 at (1, 1/2, -1/4, 0)\nplace s3 at (-1/3, 2/5, 1, 0)\nmodel free-scalar {wall}\n\
         evaluate <D(s1) D(s2) D(s3)>\n"
    )
}

fn check(bencher: divan::Bencher, text: String) {
    let source = Source::new("wick.ward", text);
    bencher.bench(|| {
        let out =
            run_source(&source, Path::new("."), Mode::Check, &Options::default()).expect("valid");
        assert_eq!(out.code, 0, "{}", out.report);
        out
    });
}

#[divan::bench(args = [3, 4])]
fn c_t_free_scalar(bencher: divan::Bencher, d: usize) {
    check(bencher, c_t(d));
}

#[divan::bench(args = [3, 4, 5, 6])]
fn c_d_dirichlet(bencher: divan::Bencher, d: usize) {
    check(bencher, c_d("dirichlet", d));
}

#[divan::bench(args = [3, 4, 5, 6])]
fn c_d_neumann(bencher: divan::Bencher, d: usize) {
    check(bencher, c_d("neumann", d));
}

#[divan::bench(args = ["dirichlet", "neumann"])]
fn c_ddd(bencher: divan::Bencher, wall: &str) {
    check(bencher, ddd_file(wall));
}

/// b1 from ⟨D D D⟩ next to the wall with reflection coefficient ρ = 1/3,
/// compared with (2/35)((1 - ρ)/2)³ + (2/45)((1 + ρ)/2)³ (docs/conventions.md §10, §11).
#[divan::bench]
fn c_ddd_reflection(bencher: divan::Bencher) {
    check(
        bencher,
        "dimension 4\nhalfspace y >= 0\nboundary points s1 s2 s3\nplace s1 at (0, 0, 0, 0)\n\
         place s2 at (1, 1/2, -1/4, 0)\nplace s3 at (-1/3, 2/5, 1, 0)\n\
         model free-scalar reflection 1/3\n\
         compare b1(s1, s2, s3) = 2/35 (1/3)^3 + 2/45 (2/3)^3\n"
            .to_string(),
    );
}

/// C_D(g) = (1 + ρ²)/S_d², ρ = (2 - g² S_d)/(2 + g² S_d), at 50 couplings
/// (docs/conventions.md §11), one job.
#[divan::bench]
fn scan_c_d_coupling(bencher: divan::Bencher) {
    let source = Source::new(
        "wick.ward",
        "dimension 4\nhalfspace y >= 0\nparameters g\nboundary points s1 s2\n\
         place s1 at (0, 0, 0, 0)\nplace s2 at (1, 1/2, -1/4, 0)\n\
         model free-scalar neumann coupling g\n\
         let rho = (2 - g^2 S_d)/(2 + g^2 S_d)\n\
         scan g from 0 to 3 steps 50: C_D(s1, s2) = (1 + rho^2)/S_d^2\n"
            .to_string(),
    );
    let options = Options {
        jobs: 1,
        ..Options::default()
    };
    bencher.bench(|| {
        let out = run_source(&source, Path::new("."), Mode::Check, &options).expect("valid");
        assert_eq!(out.code, 0, "{}", out.report);
        out
    });
}

/// Shipped files whose correlators are Wick expansions of the free scalar
/// (⟨D D⟩ and ⟨D D D⟩ with a Neumann wall, next to a reflecting wall, ⟨T D D⟩
/// decomposed in structures and as hemisphere fluxes, the symbolic-d
/// derivation of C_D), each checked whole.
#[divan::bench(args = [
    "tests/cases/numeric/anomaly-b-neumann.ward",
    "tests/cases/numeric/reflection-anomaly.ward",
    "tests/cases/numeric/tdd-neumann-d3.ward",
    "tests/cases/numeric/tdd-hemisphere-neumann-d3.ward",
    "examples/displacement-neumann.ward",
])]
fn free_scalar_files(bencher: divan::Bencher, file: &str) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join(file);
    bencher.bench(|| {
        let out = run_path(&path, Mode::Check, &Options::default()).expect("valid");
        assert_eq!(out.code, 0, "{}", out.report);
        out
    });
}
