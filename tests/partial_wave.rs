//! The integral representation of a boundary-channel partial wave of a bulk
//! two-point function next to a wall, by quadrature over the wall, against
//! its block and shadow block (docs/conventions.md §9, derived there):
//!
//!   ∫ d^(d-1)s ⟨O(x1) Ô(s)⟩ ⟨Õ(s) O(x2)⟩
//!     = (4 y1 y2)^(-Δ) [A f_bdy(Δ̂; ξ) + B f_bdy(d - 1 - Δ̂; ξ)],
//!
//! with ⟨O(x) Ô(s)⟩ = (2y)^(Δ̂-Δ) |x - s|^(-2Δ̂) (the (2y) convention, §7), Õ
//! the shadow of dimension d - 1 - Δ̂, and, with n = d - 1,
//!
//!   A = 2^(n-2Δ̂) π^(n/2) Γ(n/2 - Δ̂)/Γ(n - Δ̂),
//!   B = 2^(2Δ̂-n) π^(n/2) Γ(Δ̂ - n/2)/Γ(Δ̂),
//!
//! read off from the two ways ξ → ∞ (one height to zero): the wall integral
//! near the projection of the lower point gives
//! ∫ d^n s (|s|² + y²)^(-a) = π^(n/2) Γ(a - n/2)/Γ(a) y^(n-2a) (common practice),
//! and the rest the other block (derived). Both sides are eigenfunctions of
//! the wall's Casimir with the same eigenvalue Δ̂(Δ̂ - n) (§9), so the two
//! limits fix them. The integral runs through `compare` in a `.ward` file,
//! by the boundary-plane quadrature with its error estimate, in d = 3 and 4;
//! A and B come from `numeric::special::gamma`.

use std::path::Path;

use wardsmith::diagnostic::Source;
use wardsmith::numeric::special::gamma;
use wardsmith::run::{run_source, Mode, Options};

/// The coefficients A (of the block) and B (of the shadow block).
fn coefficients(d: f64, dh: f64) -> (f64, f64) {
    let n = d - 1.0;
    let pi = std::f64::consts::PI.powf(n / 2.0);
    let a = 2f64.powf(n - 2.0 * dh) * pi * gamma(n / 2.0 - dh).unwrap() / gamma(n - dh).unwrap();
    let b = 2f64.powf(2.0 * dh - n) * pi * gamma(dh - n / 2.0).unwrap() / gamma(dh).unwrap();
    (a, b)
}

/// A file comparing the wall integral with `block` (a right side in A, B).
fn file(d: usize, delta: f64, dh: f64, a: f64, b: f64, points: &[&str; 2], block: &str) -> String {
    format!(
        "dimension {d}
halfspace y >= 0
model conformal
parameters Dl Dh A B
values Dl = {delta}, Dh = {dh}, A = {a:e}, B = {b:e}
points x1 x2
boundary points s
place x1 at ({})
place x2 at ({})
compare ∫[s in boundary] {{ (2 x1[n])^(Dh - Dl) |x1 - s|^(-2 Dh) (2 x2[n])^(d - 1 - Dh - Dl) |x2 - s|^(-2 (d - 1 - Dh)) }}
  = (4 x1[n] x2[n])^(-Dl) ({block})
",
        points[0], points[1]
    )
}

const BOTH: &str = "A f_bdy(Dh; xi(x1, x2)) + B f_bdy(d - 1 - Dh; xi(x1, x2))";

fn run(text: &str) -> (i32, String) {
    let source = Source::new("partial-wave.ward", text);
    let out = run_source(&source, Path::new("."), Mode::Check, &Options::default())
        .unwrap_or_else(|e| panic!("{}\n{text}", e.render()));
    (out.code, out.report)
}

/// The relative difference and the quadrature's error estimate relative to
/// the value, read from the report.
fn figures(report: &str) -> (f64, f64) {
    let line = report
        .lines()
        .find(|l| l.contains("relative difference"))
        .unwrap_or_else(|| panic!("{report}"));
    let number = |after: &str| -> f64 {
        let rest = line.split(after).nth(1).unwrap_or_else(|| panic!("{line}"));
        rest.trim_start()
            .split([' ', ',', '('])
            .next()
            .unwrap()
            .parse()
            .unwrap_or_else(|_| panic!("{line}"))
    };
    let left = number("left");
    (number("relative difference"), number("±") / left.abs())
}

#[test]
fn wall_integral_is_block_plus_shadow_block() {
    let configurations: [(usize, f64, f64, [&str; 2]); 6] = [
        (3, 1.1, 0.7, ["0, 0, 0.8", "0.9, 0.3, 0.5"]),
        (3, 0.6, 1.35, ["0.2, -0.4, 0.3", "-0.5, 0.6, 1.1"]),
        (3, 2.3, 0.3, ["0, 0, 1.2", "0.4, 0, 0.7"]),
        (4, 1.1, 1.3, ["0, 0, 0, 0.8", "0.9, 0.3, -0.2, 0.5"]),
        (4, 1.7, 0.8, ["0.1, 0.2, 0.3, 0.6", "-0.3, 0.5, 0.1, 0.9"]),
        (4, 0.9, 2.1, ["0, 0, 0, 0.5", "1.1, -0.2, 0.4, 0.7"]),
    ];
    for (d, delta, dh, points) in configurations {
        let (a, b) = coefficients(d as f64, dh);
        let text = file(d, delta, dh, a, b, &points, BOTH);
        let (code, report) = run(&text);
        assert_eq!(code, 0, "{report}");
        assert!(report.contains("compare agree"), "{report}");
        let (difference, estimate) = figures(&report);
        assert!(difference <= 1e-8, "d = {d}, Δ̂ = {dh}: {report}");
        assert!(
            estimate <= 1e-8,
            "d = {d}, Δ̂ = {dh}: the error estimate {estimate}"
        );
    }
}

#[test]
fn the_block_alone_or_swapped_coefficients_disagree() {
    let (d, delta, dh) = (3, 1.1, 0.7);
    let points = ["0, 0, 0.8", "0.9, 0.3, 0.5"];
    let (a, b) = coefficients(d as f64, dh);
    for (a, b, block) in [
        (a, b, "A f_bdy(Dh; xi(x1, x2))"),
        (b, a, BOTH),
        (a, -b, BOTH),
    ] {
        let (code, report) = run(&file(d, delta, dh, a, b, &points, block));
        assert_eq!(code, 1, "{report}");
        assert!(report.contains("compare DISAGREE"), "{report}");
    }
}
