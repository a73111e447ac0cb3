//! The second-order double integral of `perturb` (docs/conventions.md §17)
//! on the integrand of the reflection family (§11), against closed forms
//! derived by Fourier analysis along the wall.
//!
//! The connected correlator of ⟨φ(x1) φ(x2)⟩ with O = φ̂χ at z and z' is
//! P1(z) |z - z'|^{-d} P2(z') + (z ↔ z'), P_i(z) = 2 C_φ |x_i - z|^{2-d} the
//! Neumann bulk-to-boundary propagator. Along the wall P_i has the partial
//! Fourier transform e^{-k y_i}/k (the propagator of §11 at y' = 0, ρ = 1),
//! and the finite part of |u|^{-d} on the (d-1)-dimensional wall has
//! -(S_d/2) k (§11, common practice), so the inner integral over z' is
//! (S_d/2) ∂_{y_i} P_i(z) = -y_i/|x_i - z|^d, and the outer one is the
//! order-g² term of the exact family, 2δ₂/g² = -2|x1 - x̄2|^{2-d}/(d - 2)
//! (derived, §11, §17). Here the integrand is written without the factor
//! 4C_φ², so the inner value is -(d - 2)(S_d/2)(y2 r1^{2-d} r2^{-d} +
//! y1 r2^{2-d} r1^{-d}), r_i = |x_i - z|, and the double integral is
//! -(d - 2) S_d²/2 |x1 - x̄2|^{2-d}.

use std::collections::BTreeMap;

use wardsmith::diagnostic::Source;
use wardsmith::lower::{lower, ItemKind};
use wardsmith::normal::normalize_pointwise as normalize;
use wardsmith::numeric::eval::{compile, Program};
use wardsmith::numeric::models::sphere_area;
use wardsmith::numeric::perturb::Double;
use wardsmith::numeric::Values;
use wardsmith::syntax::parse_file;

/// The integrand and its residue G(z, z) compiled, with the positions of
/// reflection-second-order-d3/d4.ward.
fn setup(d: usize) -> (Program, Program, Values) {
    let text = format!(
        "dimension {d}\nhalfspace y >= 0\npoints x1 x2\nboundary points z1 z2\n\
         simplify |x1 - z1|^(2 - d) |z1 - z2|^(-d) |x2 - z2|^(2 - d) \
         + |x2 - z1|^(2 - d) |z1 - z2|^(-d) |x1 - z2|^(2 - d)\n\
         simplify 2 |x1 - z1|^(2 - d) |x2 - z1|^(2 - d)\n"
    );
    let source = Source::new("perturb.ward", &text);
    let parsed = parse_file(&source).unwrap_or_else(|e| panic!("{}", e.render()));
    let program = lower(&source, &parsed).unwrap_or_else(|e| panic!("{}", e.render()));
    let ctx = program.ctx.clone();
    let mut compiled = program.items.iter().map(|item| match &item.kind {
        ItemKind::Simplify { expr, .. } => {
            let t = normalize(&ctx, expr).unwrap_or_else(|e| panic!("{}", e.render()));
            compile(&ctx, &t, &[], d).unwrap_or_else(|e| panic!("{}", e.render()))
        }
        _ => panic!("only `simplify` here"),
    });
    let full = compiled.next().unwrap();
    let residue = compiled.next().unwrap();
    let (x1, x2) = if d == 3 {
        (vec![-0.25, 1.0 / 3.0, 0.9], vec![0.2, -1.0 / 3.0, 0.5])
    } else {
        (
            vec![-0.25, 1.0 / 3.0, 1.0 / 7.0, 0.9],
            vec![0.2, -1.0 / 3.0, 1.0 / 6.0, 0.5],
        )
    };
    let values = Values {
        dim: d,
        scalars: BTreeMap::new(),
        tensors: BTreeMap::new(),
        points: BTreeMap::from([("x1".to_string(), x1), ("x2".to_string(), x2)]),
    };
    (full, residue, values)
}

/// The double integral's pieces on the integrand of [`setup`]: the
/// singular family |z1 - z2|^{-d} with its residue, the insertions x1, x2.
fn double<'p>(d: usize, full: &'p Program, residue: &'p Program, values: &Values) -> Double<'p> {
    Double {
        full,
        singular: vec![(-(d as f64), residue)],
        first: "z1",
        second: "z2",
        insertions: vec![values.points["x1"].clone(), values.points["x2"].clone()],
    }
}

fn dist(p: &[f64], q: &[f64]) -> f64 {
    p.iter()
        .zip(q)
        .map(|(a, b)| (a - b) * (a - b))
        .sum::<f64>()
        .sqrt()
}

/// The inner finite part at wall points near the insertions and far from
/// them (up to 24 times their height) against the closed form
/// -(d - 2)(S_d/2)(y2 r1^{2-d} r2^{-d} + y1 r2^{2-d} r1^{-d}), to the
/// absolute accuracy `tol` times its size: the estimate covers the actual
/// error.
fn inner_integral_against_its_closed_form(d: usize, tol: f64) {
    {
        let (full, residue, values) = setup(d);
        let double = double(d, &full, &residue, &values);
        let (x1, x2) = (&values.points["x1"], &values.points["x2"]);
        let (y1, y2) = (x1[d - 1], x2[d - 1]);
        let sd = sphere_area(d);
        let mut local = values.clone();
        for (k, r) in [0.0, 0.3, 1.7, 12.0].iter().enumerate() {
            // A direction that is not special.
            let mut z = vec![0.0; d];
            z[0] = 0.2 + r * (0.7 + 0.1 * k as f64).cos();
            z[1] = -1.0 / 3.0 + r * (0.7 + 0.1 * k as f64).sin();
            let (r1, r2) = (dist(x1, &z), dist(x2, &z));
            let exact = -(d as f64 - 2.0)
                * 0.5
                * sd
                * (y2 * r1.powf(2.0 - d as f64) * r2.powf(-(d as f64))
                    + y1 * r2.powf(2.0 - d as f64) * r1.powf(-(d as f64)));
            let got = double
                .inner(&z, &mut local, tol * exact.abs(), 0.0)
                .unwrap_or_else(|e| panic!("{}", e.render()));
            let actual = (got.value - exact).abs();
            assert!(
                actual <= got.error + 1e-13 * got.magnitude && actual < 10.0 * tol * exact.abs(),
                "d = {d}, z = {z:?}: {} ± {:.1e} against {exact} (off by {actual:.1e})",
                got.value,
                got.error
            );
        }
    }
}

/// d = 3: the near part by the radial rule about z (docs/conventions.md
/// §17), to 1e-7.
#[test]
fn inner_integral_is_the_normal_derivative_of_the_propagator_d3() {
    inner_integral_against_its_closed_form(3, 1e-7);
}

/// d = 4, to 1e-6 (each part of an inner integral may take 4 000 000
/// evaluations; 400 000 were not enough at 24 times the height).
#[test]
fn inner_integral_is_the_normal_derivative_of_the_propagator_d4() {
    inner_integral_against_its_closed_form(4, 1e-6);
}

/// The double integral in d = 3 to a loose 1e-2 (seconds in the test
/// profile; the accuracies the statement would need are measured in
/// docs/conventions.md §17): the error estimate (outer rule plus the inner
/// bound) covers the actual error, which is below the tolerance asked.
#[test]
fn double_integral_is_the_order_g_squared_term_of_the_exact_family() {
    {
        let d = 3usize;
        let (full, residue, values) = setup(d);
        let double = double(d, &full, &residue, &values);
        let (x1, x2) = (&values.points["x1"], &values.points["x2"]);
        let mut image = x2.clone();
        image[d - 1] = -image[d - 1];
        let sd = sphere_area(d);
        let exact = -(d as f64 - 2.0) * sd * sd / 2.0 * dist(x1, &image).powf(2.0 - d as f64);
        let tol = 1e-2;
        let r = double
            .integrate(&values, tol, 1e-3 * tol)
            .unwrap_or_else(|e| panic!("{}", e.render()));
        let estimate = r.finite.error + r.inner_error;
        let actual = (r.finite.value - exact).abs();
        assert!(
            actual <= estimate && actual <= tol * exact.abs(),
            "d = {d}: {} ± {estimate:.1e} against {exact} (off by {actual:.1e})",
            r.finite.value
        );
    }
}

/// A wrong first-order expectation (the sign flipped) is refuted; the file
/// is not a snapshot case because the report prints each order's time.
#[test]
fn a_wrong_first_order_is_refuted() {
    use wardsmith::run::{run_path, Mode, Options};
    let out = run_path(
        std::path::Path::new("tests/cases/perturb/first-order-wrong-sign.ward"),
        Mode::Check,
        &Options::default(),
    )
    .unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(out.code, 1, "{}", out.report);
    assert!(out.report.contains("disagree"), "{}", out.report);
}

/// Three couplings, 1/10, 1/20, 1/40, against the exact family expanded to
/// order g² (tests/cases/perturb/second-order-three-couplings-d3/d4.ward,
/// derived, docs/conventions.md §17): each expectation agrees under the
/// agreement rule, which the gate on the second order reports as UNKNOWN
/// with its value ("the value is shown, not confirmed"); a miss would say
/// "differs" or "disagree". Not numeric cases (those must check clean).
fn three_couplings_agree(path: &str) {
    use wardsmith::run::{run_path, Mode, Options};
    let out = run_path(std::path::Path::new(path), Mode::Check, &Options::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(
        out.report
            .matches("the value is shown, not confirmed")
            .count(),
        3,
        "{}",
        out.report
    );
    assert!(
        !out.report.contains("disagree") && !out.report.contains("differs"),
        "{}",
        out.report
    );
}

/// d = 3 at 1e-3 (about 2 s in a release build).
#[test]
fn second_order_agrees_with_the_exact_family_at_three_couplings_d3() {
    three_couplings_agree("tests/cases/perturb/second-order-three-couplings-d3.ward");
}

/// d = 4 at 1e-3: about 90 s in a release build (9·10⁸ evaluations), far
/// longer in the test profile.
#[test]
#[ignore = "release only: about 90 s with `cargo test --release --test perturb -- --ignored`"]
fn second_order_agrees_with_the_exact_family_at_three_couplings_d4() {
    three_couplings_agree("tests/cases/perturb/second-order-three-couplings-d4.ward");
}
