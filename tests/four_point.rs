//! Four-point blocks without a wall (docs/conventions.md §13): the numeric
//! blocks against reference values, their normalisation, z and z̄ from u
//! and v, and the Casimir equation by finite differences.

use wardsmith::numeric::special::{four_point_block, z_zbar};

/// g_block(Δ, ℓ; z, z̄) summed from Dolan & Osborn 2001 (hep-th/0011040),
/// eqs. 2.10 (d = 2) and 2.11 (d = 4), in the normalisation of
/// docs/conventions.md §13, by mpmath 1.3 (hyp2f1 at 30 digits).
const REFERENCE: [(u32, f64, u32, f64, f64, f64); 6] = [
    (2, 1.3, 0, 0.5, 0.2, 0.297_892_467_433_099_646_26),
    (2, 4.5, 3, 0.9, 0.05, 1.919_301_516_739_688_046_1),
    (4, 2.2, 0, 0.4, 0.3, 0.155_805_131_566_177_527_57),
    (4, 5.5, 4, 0.95, 0.6, 170.128_016_363_869_467_43),
    (4, 3.0, 1, 0.2, 0.01, 0.000_522_639_598_806_379_349_71),
    (4, 7.25, 6, 0.7, 0.69, 20.644_221_861_343_277_722),
];

#[test]
fn blocks_match_reference_values() {
    for (d, delta, l, z, zb, want) in REFERENCE {
        let got = four_point_block(d, delta, l, z, zb).unwrap();
        // z - z̄ = 0.01 in the last row costs two digits.
        let tol = if (z - zb).abs() < 0.05 { 1e-11 } else { 1e-13 };
        assert!(
            ((got - want) / want).abs() < tol,
            "d = {d}, Δ = {delta}, ℓ = {l}, z = {z}, z̄ = {zb}: {got} vs {want}"
        );
        // Symmetric in z and z̄.
        let swapped = four_point_block(d, delta, l, zb, z).unwrap();
        assert!(((swapped - got) / got).abs() < tol);
    }
}

#[test]
fn blocks_are_normalised_in_the_ope_limit() {
    // g ~ z^((Δ+ℓ)/2) z̄^((Δ-ℓ)/2) for 0 < z̄ ≪ z ≪ 1 (docs/conventions.md §13):
    // corrections of relative order z and z̄/z.
    for d in [2, 4] {
        for (delta, l) in [(1.7, 0), (3.2, 1), (6.0, 2), (7.5, 5)] {
            let (z, zb) = (1e-4, 1e-8);
            let g = four_point_block(d, delta, l, z, zb).unwrap();
            let lead = z.powf((delta + f64::from(l)) / 2.0) * zb.powf((delta - f64::from(l)) / 2.0);
            assert!(
                (g / lead - 1.0).abs() < 1e-3,
                "d = {d}, Δ = {delta}, ℓ = {l}: {}",
                g / lead
            );
        }
    }
}

#[test]
fn z_and_zbar_come_back_from_u_and_v() {
    for (z, zb) in [(0.3, 0.1), (0.9, 0.0001), (0.5, 0.5), (0.99, 0.98)] {
        let (u, v) = (z * zb, (1.0 - z) * (1.0 - zb));
        let (a, b) = z_zbar(u, v).unwrap();
        assert!(
            (a - z).abs() < 1e-7 && (b - zb).abs() < 1e-7,
            "{z} {zb}: {a} {b}"
        );
    }
    // Complex-conjugate z: not real.
    assert!(z_zbar(0.25, 0.9).is_none());
}

#[test]
fn numeric_blocks_obey_the_casimir_equation() {
    // Dolan & Osborn 2004 (hep-th/0309180), eq. 2.10 for equal external
    // dimensions, with the factors of examples/four-point-blocks.ward:
    // 2 z²(1 - z)∂² - 2 z²∂ + (z̄) + 2(d - 2) z z̄/(z - z̄)((1 - z)∂_z - (1 - z̄)∂_z̄)
    // with eigenvalue Δ(Δ - d) + ℓ(ℓ + d - 2); derivatives by five-point
    // differences.
    let h = 1e-3;
    for d in [2u32, 4] {
        for (delta, l) in [(2.6, 0), (4.3, 2), (5.1, 3)] {
            let (z, zb) = (0.45, 0.2);
            let g = |a: f64, b: f64| four_point_block(d, delta, l, a, b).unwrap();
            let d1 = |f: &dyn Fn(f64) -> f64, x: f64| {
                (f(x - 2.0 * h) - 8.0 * f(x - h) + 8.0 * f(x + h) - f(x + 2.0 * h)) / (12.0 * h)
            };
            let d2 = |f: &dyn Fn(f64) -> f64, x: f64| {
                (-f(x - 2.0 * h) + 16.0 * f(x - h) - 30.0 * f(x) + 16.0 * f(x + h) - f(x + 2.0 * h))
                    / (12.0 * h * h)
            };
            let gz = d1(&|a| g(a, zb), z);
            let gzz = d2(&|a| g(a, zb), z);
            let gb = d1(&|b| g(z, b), zb);
            let gbb = d2(&|b| g(z, b), zb);
            let dd = f64::from(d);
            let lhs = 2.0 * z * z * (1.0 - z) * gzz - 2.0 * z * z * gz
                + 2.0 * zb * zb * (1.0 - zb) * gbb
                - 2.0 * zb * zb * gb
                + 2.0 * (dd - 2.0) * z * zb / (z - zb) * ((1.0 - z) * gz - (1.0 - zb) * gb);
            let c = delta * (delta - dd) + f64::from(l) * (f64::from(l) + dd - 2.0);
            let rhs = c * g(z, zb);
            assert!(
                (lhs - rhs).abs() < 1e-7 * rhs.abs().max(1.0),
                "d = {d}, Δ = {delta}, ℓ = {l}: {lhs} vs {rhs}"
            );
        }
    }
}

#[test]
fn blocks_outside_their_domain_are_errors() {
    assert!(four_point_block(4, 3.0, 0, 0.3, 0.3).is_err());
    assert!(four_point_block(3, 3.0, 0, 0.3, 0.2).is_err());
    assert!(four_point_block(2, 3.0, 0, 1.3, 0.2).is_err());
    assert!(four_point_block(2, 3.0, 0, 0.3, -0.2).is_err());
}
