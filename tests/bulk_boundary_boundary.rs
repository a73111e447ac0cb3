//! The boundary-channel block of a bulk–boundary–boundary function of
//! scalars ⟨O(x) Ô1(s1) Ô2(s2)⟩ (docs/conventions.md §15, derived here):
//!
//!   f_bdy3(Δ̂, δ̂; χ) = χ^(Δ̂/2) ₂F₁((Δ̂ + δ̂)/2, (Δ̂ - δ̂)/2; Δ̂ + (3 - d)/2; χ),
//!
//! checked three ways: against the direct sum over the boundary descendants
//! of Ô, against its Casimir equation by finite differences, and on the free
//! scalar, whose ⟨φ² φ̂ φ̂⟩ is a power of χ that the tower Δ̂ = 2α + 2m
//! reproduces with the coefficients of the inversion identity below.

use wardsmith::numeric::special::boundary_three_point_block as block;
use wardsmith::run::{run_source, Mode, Options};

/// Pochhammer (a)_m.
fn poch(a: f64, m: usize) -> f64 {
    (0..m).map(|k| a + k as f64).product()
}

/// The direct sum over descendants (derived here, docs/conventions.md §15):
/// O(x) ⊃ (2y)^(Δ̂-Δ) Σ_m (-1)^m y^(2m) (∇²)^m Ô(x∥)/(m! 4^m (Δ̂ + 1 - n/2)_m),
/// n = d - 1 (the coefficients fixed by ⟨O Ô⟩ = (2y)^(Δ̂-Δ)/(y² + r²)^Δ̂ with
/// ⟨Ô Ô⟩ = r^(-2Δ̂)), applied to ⟨Ô(x∥) Ô1(0) Ô2(∞)⟩ = r^(-2a), a = (Δ̂ + δ̂)/2,
/// with (∇²)^m r^(-2a) = 4^m (a)_m (a + 1 - n/2)_m r^(-2a-2m). In the frame
/// s1 = 0, s2 = ∞ the block is f = y^Δ̂ R^δ̂ r^(-2a) Σ_m …, R² = y² + r².
fn descendant_sum(d: f64, dh: f64, d12: f64, y: f64, r: f64) -> f64 {
    let n = d - 1.0;
    let a = 0.5 * (dh + d12);
    let t = -(y * y) / (r * r);
    let mut sum = 0.0;
    let mut term = 1.0;
    for m in 0..400usize {
        if m > 0 {
            let k = (m - 1) as f64;
            term *= (a + k) * (a + 1.0 - 0.5 * n + k) / ((k + 1.0) * (dh + 1.0 - 0.5 * n + k)) * t;
        }
        sum += term;
        if term.abs() < 1e-18 * sum.abs() {
            break;
        }
    }
    let big_r = (y * y + r * r).sqrt();
    y.powf(dh) * big_r.powf(d12) * r.powf(-2.0 * a) * sum
}

#[test]
fn block_is_the_sum_over_boundary_descendants() {
    let mut worst = 0.0f64;
    // (d, Δ̂, δ̂): any values; the wall limit is reached at y/r small.
    for &(d, dh, d12) in &[
        (3.0, 0.7, 0.0),
        (3.0, 1.9, 0.4),
        (4.0, 1.3, -1.0),
        (4.0, 3.25, 0.6),
        (5.0, 2.2, 1.1),
        (6.0, 4.0, -0.3),
    ] {
        for &(y, r) in &[(0.1, 1.0), (0.3, 0.8), (0.5, 1.1), (0.9, 1.6)] {
            let chi = y * y / (y * y + r * r);
            let f = block(d, dh, d12, chi).expect("a value");
            let s = descendant_sum(d, dh, d12, y, r);
            worst = worst.max((f - s).abs() / s.abs());
        }
    }
    assert!(worst < 1e-13, "worst relative difference {worst:e}");
}

#[test]
fn block_solves_its_casimir_equation() {
    // 4 χ² (1 - χ) f'' + 2 χ (3 - d - 2χ) f' + δ̂² χ f = Δ̂ (Δ̂ - d + 1) f
    // (derived here; proved symbolically in
    // tests/cases/integrated/casimir-bulk-boundary-boundary.ward).
    for &(d, dh, d12) in &[(3.0, 1.4, 0.3), (4.0, 2.5, -0.8), (5.0, 3.1, 0.0)] {
        for &chi in &[0.1, 0.35, 0.7] {
            let h = 1e-4;
            let f = |x: f64| block(d, dh, d12, x).expect("a value");
            let (fm, f0, fp) = (f(chi - h), f(chi), f(chi + h));
            let d1 = (fp - fm) / (2.0 * h);
            let d2 = (fp - 2.0 * f0 + fm) / (h * h);
            let lhs = 4.0 * chi * chi * (1.0 - chi) * d2
                + 2.0 * chi * (3.0 - d - 2.0 * chi) * d1
                + d12 * d12 * chi * f0;
            let rhs = dh * (dh - d + 1.0) * f0;
            assert!(
                (lhs - rhs).abs() < 1e-6 * rhs.abs().max(f0.abs()),
                "d = {d}, Δ̂ = {dh}, δ̂ = {d12}, χ = {chi}: {lhs} ≠ {rhs}"
            );
        }
    }
}

/// χ^α = Σ_m A_m f_bdy3(2α + 2m, δ̂; χ),
/// A_m = (-1)^m (α + δ̂/2)_m (α - δ̂/2)_m/(m! (c + m - 1)_m), c = 2α + (3 - d)/2:
/// the inverse of the hypergeometric expansion Σ_m (-1)^m (a)_m (b)_m
/// x^m ₂F₁(a + m, b + m; c + 2m; x)/(m! (c + m - 1)_m) = 1 (from memory;
/// checked here to 1e-13).
fn tower_coefficient(d: f64, alpha: f64, d12: f64, m: usize) -> f64 {
    let c = 2.0 * alpha + 0.5 * (3.0 - d);
    let sign = if m % 2 == 0 { 1.0 } else { -1.0 };
    let fact: f64 = (1..=m).map(|k| k as f64).product();
    sign * poch(alpha + 0.5 * d12, m) * poch(alpha - 0.5 * d12, m)
        / (fact * poch(c + m as f64 - 1.0, m))
}

#[test]
fn a_power_of_chi_is_a_tower_of_blocks() {
    for &(d, alpha, d12) in &[
        (3.0, 0.5, 0.0),
        (4.0, 1.0, 0.0),
        (4.0, 2.0, 0.0),
        (5.0, 1.5, -1.0),
    ] {
        for &chi in &[0.05, 0.2, 0.5] {
            let sum: f64 = (0..80)
                .map(|m| {
                    tower_coefficient(d, alpha, d12, m)
                        * block(d, 2.0 * alpha + 2.0 * m as f64, d12, chi).expect("a value")
                })
                .sum();
            let want = chi.powf(alpha);
            assert!(
                (sum - want).abs() < 1e-13 * want,
                "d = {d}, α = {alpha}: {sum} ≠ {want}"
            );
        }
    }
}

/// The coefficients `decompose` reports for a file, in order.
fn coefficients(text: &str) -> (Vec<f64>, Vec<f64>, f64) {
    let source = wardsmith::diagnostic::Source::new("test.ward", text.to_string());
    let out = run_source(
        &source,
        std::path::Path::new("."),
        Mode::Check,
        &Options::default(),
    )
    .unwrap_or_else(|e| panic!("{}", e.render()));
    let checked = out.checked.expect("an outcome");
    for s in &checked.statements {
        if let wardsmith::outcome::Finding::Decompose(d) = &s.finding {
            return (
                d.fit.coefficients.clone(),
                d.fit.spread.clone(),
                d.fit.residual,
            );
        }
    }
    panic!("no decomposition in\n{}", out.report);
}

/// The free scalar with C_φ = 1/((d - 2) S_d) (docs/conventions.md §4).
fn c_phi(d: f64) -> f64 {
    let s_d = 2.0 * std::f64::consts::PI.powf(0.5 * d)
        / wardsmith::numeric::special::gamma(0.5 * d).expect("Γ");
    1.0 / ((d - 2.0) * s_d)
}

#[test]
fn free_scalar_phi_squared_with_two_wall_values() {
    // Neumann: ⟨φ² φ̂ φ̂⟩ = 2 (2 C_φ)² |x - s1|^(2-d) |x - s2|^(2-d)
    // + ⟨φ²⟩⟨φ̂ φ̂⟩, ⟨φ²⟩ = C_φ (2y)^(2-d), ⟨φ̂ φ̂⟩ = 2 C_φ s12^(2-d); so
    // F = 2 C_φ² + 8 C_φ² 2^(d-2) χ^(d/2-1): the boundary identity (Δ̂ = 0,
    // f_bdy3 = 1) and the tower Δ̂ = d - 2 + 2m, δ̂ = 0, with
    // 8 C_φ² 2^(d-2) A_m, α = d/2 - 1 (derived here from the image
    // propagators, docs/conventions.md §4 and §15).
    // Dirichlet: ⟨φ(x) ∂_nφ(s)⟩ = 2 (d - 2) C_φ y |x - s|^(-d),
    // ⟨∂_nφ ∂_nφ⟩ = 2 (d - 2) C_φ s12^(-d), ⟨φ²⟩ = -C_φ (2y)^(2-d):
    // F = -2 (d - 2) C_φ² + 8 (d - 2)² C_φ² 2^(d-2) χ^(d/2), the tower
    // Δ̂ = d + 2m.
    for &d in &[3u32, 4, 5] {
        let df = f64::from(d);
        let c2 = c_phi(df).powi(2);
        for (wall, boundary, dim, alpha, scale, identity) in [
            (
                "neumann",
                "boundary-phi",
                "d/2 - 1",
                0.5 * df - 1.0,
                1.0,
                2.0 * c2,
            ),
            (
                "dirichlet",
                "boundary-dphi",
                "d/2",
                0.5 * df,
                (df - 2.0) * (df - 2.0),
                -2.0 * (df - 2.0) * c2,
            ),
        ] {
            let list: Vec<String> = std::iter::once("0".to_string())
                .chain((0..20).map(|m| format!("{}", 2.0 * alpha + 2.0 * m as f64)))
                .collect();
            let text = format!(
                "dimension {d}\nhalfspace y >= 0\nscalar Q dim d - 2\nboundary scalar H dim {dim}\n\
                 points x\nboundary points s1 s2\n\
                 model free-scalar {wall} with Q = phi2, H = {boundary}\n\
                 decompose <Q(x) H(s1) H(s2)> in boundary blocks {}\n",
                list.join(", ")
            );
            let (c, spread, residual) = coefficients(&text);
            assert!(residual < 1e-9, "{wall}, d = {d}: residual {residual:e}");
            assert!(
                (c[0] - identity).abs() < 1e-11 * identity.abs(),
                "{wall}, d = {d}: identity {} against {identity}",
                c[0]
            );
            let norm = 8.0 * c2 * 2f64.powf(df - 2.0) * scale;
            // Measured (Chebyshev values of χ in [0.001, 0.3], 21 blocks):
            // 1e-13 to 1e-11, 1e-10 to 1e-8, 1e-7 relative for m = 0, 1, 2.
            for (m, tolerance) in [(0, 1e-10), (1, 1e-7), (2, 1e-5)] {
                let want = norm * tower_coefficient(df, alpha, 0.0, m);
                let err = (c[m + 1] - want).abs() / want.abs();
                assert!(
                    err < tolerance,
                    "{wall}, d = {d}, m = {m}: {} against {want} (spread {:e})",
                    c[m + 1],
                    spread[m + 1]
                );
            }
        }
    }
}

#[test]
fn the_cross_ratio_chi_prints_recombined_and_refuses_misplaced_points() {
    // `chi(x, s1, s2)` as a function's argument prints back as itself (as
    // `xi(x1, x2)` does), and reads back to the same normal form.
    let text = "dimension 3\nhalfspace y >= 0\npoints x\nboundary points s1 s2\n\
                function F\nsimplify F(chi(x, s1, s2)) + F'(chi(x, s1, s2))\n";
    let source = wardsmith::diagnostic::Source::new("chi.ward", text.to_string());
    let out = run_source(
        &source,
        std::path::Path::new("."),
        Mode::Simplify,
        &Options::default(),
    )
    .unwrap_or_else(|e| panic!("{}", e.render()));
    assert!(
        out.report.contains("F(chi(x, s1, s2))") && out.report.contains("F'(chi(x, s1, s2))"),
        "{}",
        out.report
    );
    // A boundary point first, or a bulk point among the last two: errors
    // at the argument.
    for bad in ["chi(s1, x, s2)", "chi(x, s1, s1)", "chi(x, s1)"] {
        let text = format!(
            "dimension 3\nhalfspace y >= 0\npoints x\nboundary points s1 s2\n\
             function F\nsimplify F({bad})\n"
        );
        let source = wardsmith::diagnostic::Source::new("chi.ward", text);
        assert!(
            run_source(
                &source,
                std::path::Path::new("."),
                Mode::Simplify,
                &Options::default()
            )
            .is_err(),
            "{bad}"
        );
    }
}
