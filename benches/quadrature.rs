//! Benchmarks of the adaptive surface quadrature: Gauss's law for the
//! Coulomb field x/|x|^d through a unit sphere whose centre is half a radius
//! from the source, to 10⁻¹⁰ relative, in d = 3, 4 (DESIGN.md, performance
//! goals: sphere-flux quadrature of W4 to 10⁻¹⁰ well under a second).
//!
//! Run with `cargo bench --bench quadrature`. The node count, error estimate
//! and true error of each case are printed once before timing, so both
//! figures come from one run.

use wardsmith::numeric::quadrature::{integrate, Estimate, Surface, Tolerance};

fn main() {
    for d in DIMS {
        for kind in KINDS {
            let got = flux(d, kind);
            let want = area(d);
            eprintln!(
                "d = {d}, {kind:>12}: {:>7} nodes, error estimate {:.1e}, true error {:.1e}{}",
                got.nodes,
                got.error / want,
                (got.value - want).abs() / want,
                if got.converged {
                    ""
                } else {
                    " (not converged)"
                }
            );
        }
    }
    divan::main();
}

const DIMS: [usize; 2] = [3, 4];
const KINDS: [&str; 3] = ["plain", "along axis", "two sources"];

/// The flux through the unit sphere centred half a radius from the origin:
/// "plain" with the poles on the y axis, "along axis" with them toward the
/// source, "two sources" adds a second unit source outside, 1.5 radii from
/// the centre in another direction (its flux is 0).
fn flux(d: usize, kind: &str) -> Estimate {
    let dir: Vec<f64> = (0..d).map(|i| 1.0 + 0.37 * i as f64).collect();
    let norm = dir.iter().map(|a| a * a).sum::<f64>().sqrt();
    let centre: Vec<f64> = dir.iter().map(|a| 0.5 * a / norm).collect();
    let toward: Vec<f64> = centre.iter().map(|c| -c).collect();
    let mut outside = centre.clone();
    outside[0] -= 1.5;
    let sphere = match kind {
        "plain" => Surface::sphere(&centre, 1.0),
        _ => Surface::sphere_along(&centre, 1.0, &toward),
    }
    .expect("valid sphere");
    let tol = Tolerance::relative(1e-10);
    let origin = vec![0.0; d];
    if kind == "two sources" {
        integrate(
            &sphere,
            |x, n| coulomb(&origin, x, n) + coulomb(&outside, x, n),
            tol,
        )
    } else {
        integrate(&sphere, |x, n| coulomb(&origin, x, n), tol)
    }
}

/// (x - q)·n / |x - q|^d.
fn coulomb(q: &[f64], x: &[f64], n: &[f64]) -> f64 {
    let (mut r2, mut flux) = (0.0, 0.0);
    for i in 0..x.len() {
        let r = x[i] - q[i];
        r2 += r * r;
        flux += r * n[i];
    }
    flux / r2.powi(x.len() as i32).sqrt()
}

/// S_d = 2π^{d/2}/Γ(d/2) for d = 3, 4 (common practice).
fn area(d: usize) -> f64 {
    use std::f64::consts::PI;
    if d == 3 {
        4.0 * PI
    } else {
        2.0 * PI * PI
    }
}

#[divan::bench(args = DIMS)]
fn coulomb_flux_plain(d: usize) -> Estimate {
    flux(divan::black_box(d), "plain")
}

#[divan::bench(args = DIMS)]
fn coulomb_flux_along_axis(d: usize) -> Estimate {
    flux(divan::black_box(d), "along axis")
}

#[divan::bench(args = DIMS)]
fn coulomb_flux_two_sources(d: usize) -> Estimate {
    flux(divan::black_box(d), "two sources")
}

/// The W4 flux checks of a whole file (parse, model, symbolic work,
/// compilation, quadrature): all four conformal Killing families through a
/// sphere around x1, d = 3, 4, 6 (`tests/cases/numeric/flux-d*.ward`).
#[divan::bench(args = ["flux-d3", "flux-d4", "flux-d6"], sample_count = 5)]
fn w4_flux_file(bencher: divan::Bencher, name: &str) {
    use std::path::Path;
    use wardsmith::diagnostic::Source;
    use wardsmith::run::{run_source, Mode, Options};
    let path = format!("tests/cases/numeric/{name}.ward");
    let text = std::fs::read_to_string(&path).expect("case file exists");
    let source = Source::new(path, text);
    bencher.bench(|| {
        let out =
            run_source(&source, Path::new("."), Mode::Check, &Options::default()).expect("valid");
        assert_eq!(out.code, 0);
        out
    });
}
