//! Four-point blocks without a wall (docs/conventions.md §14): the numeric
//! blocks against reference values, their normalisation, z and z̄ from u
//! and v, and the Casimir equation by finite differences.

// Reference values are written with the digits mpmath printed.
#![allow(clippy::excessive_precision)]

use wardsmith::numeric::special::{four_point_block, z_zbar};

/// g_block(Δ, ℓ; z, z̄) summed from Dolan & Osborn 2001 (hep-th/0011040),
/// eqs. 2.10 (d = 2) and 2.11 (d = 4), in the normalisation of
/// docs/conventions.md §14, by mpmath 1.3 (hyp2f1 at 30 digits).
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
    // g ~ z^((Δ+ℓ)/2) z̄^((Δ-ℓ)/2) for 0 < z̄ ≪ z ≪ 1 (docs/conventions.md §14):
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

#[test]
fn blocks_at_euclidean_configurations_match_reference_values() {
    use wardsmith::numeric::special::four_point_block_polar;
    // z = r e^(iθ), z̄ = z*: the formulas of Dolan & Osborn 2001 summed by
    // mpmath 1.3 with complex z (30 digits).
    for (d, delta, l, r, theta, want) in [
        (4, 3.3, 2, 0.3, 1.0, -0.007_561_384_963_081_407_353_1),
        (2, 2.5, 0, 0.4, 2.5, 0.069_635_146_965_291_051_567),
        (4, 6.0, 4, 0.2, 0.3, 0.000_359_639_754_260_864_407_26),
    ] {
        let got = four_point_block_polar(d, delta, l, r, theta).unwrap();
        assert!(
            ((got - want) / want).abs() < 1e-13,
            "d = {d}, Δ = {delta}, ℓ = {l}: {got} vs {want}"
        );
    }
}

/// The JSON item of the one `decompose` of a file, and the exit code.
fn decompose(text: &str) -> (serde_json::Value, i32) {
    use std::path::Path;
    use std::sync::Arc;
    use wardsmith::diagnostic::Source;
    use wardsmith::run::{run_source, Mode, Options};
    let source = Arc::new(Source::new("gff.ward", text));
    let opts = Options {
        json: true,
        ..Options::default()
    };
    let out = run_source(&source, Path::new("."), Mode::Check, &opts)
        .unwrap_or_else(|e| panic!("{}", e.render()));
    let doc: serde_json::Value = serde_json::from_str(&out.report).unwrap();
    let item = doc["items"]
        .as_array()
        .unwrap()
        .iter()
        .find(|i| i["kind"] == "decompose")
        .cloned()
        .unwrap_or_else(|| panic!("{}", out.report));
    (item, out.code)
}

/// (a)_n.
fn pochhammer(a: f64, n: u32) -> f64 {
    (0..n).map(|k| a + f64::from(k)).product()
}

/// The squared OPE coefficients of the double-twist operators
/// [φφ]_{n,ℓ}, Δ = 2Δφ + 2n + ℓ, in the generalised free field
/// ⟨φφφφ⟩ = 1 + u^Δφ + (u/v)^Δφ, h = d/2 (Fitzpatrick & Kaplan 2011,
/// arXiv:1111.6972, eq. 2.26 — written from memory; the equation number is
/// the one usually cited, not confirmed here):
///
///   P_{n,ℓ} = [1 + (-1)^ℓ] (Δφ - h + 1)_n² (Δφ)_{n+ℓ}²
///             / [n! ℓ! (ℓ + h)_n (2Δφ + n - 2h + 1)_n (2Δφ + 2n + ℓ - 1)_ℓ (2Δφ + n + ℓ - h)_n],
///
/// in the normalisation g ~ z^((Δ+ℓ)/2) z̄^((Δ-ℓ)/2) of docs/conventions.md
/// §14 (it gives P_{0,0} = 2, the leading 2u^Δφ of G).
fn gff_coefficient(d: u32, dphi: f64, n: u32, l: u32) -> f64 {
    let h = f64::from(d) / 2.0;
    let lf = f64::from(l);
    let sign = if l % 2 == 0 { 2.0 } else { 0.0 };
    let factorial = |m: u32| pochhammer(1.0, m);
    sign * pochhammer(dphi - h + 1.0, n).powi(2) * pochhammer(dphi, n + l).powi(2)
        / (factorial(n)
            * factorial(l)
            * pochhammer(lf + h, n)
            * pochhammer(2.0 * dphi + f64::from(n) - 2.0 * h + 1.0, n)
            * pochhammer(2.0 * dphi + 2.0 * f64::from(n) + lf - 1.0, l)
            * pochhammer(2.0 * dphi + f64::from(n) + lf - h, n))
}

#[test]
fn the_generalised_free_field_decomposes_with_its_published_coefficients() {
    // Five twists 2Δφ + 2n and the even spins to 12: 35 blocks, solved
    // order by order in the series of G and the blocks in z, z̄ (exact
    // rationals: Δφ is), checked at Euclidean configurations where the
    // towers' truncation is below 1e-12. The least-squares fit this
    // replaces gave the first six to 4e-13, 3e-11, 3.4e-10, 2e-8, 3e-8,
    // 6.5e-7 at worst over the four cases; the series solve gives them to
    // rounding of the closed form (1e-12 asked here).
    for (d, dphi) in [(4u32, 1.5), (4, 1.2), (2, 0.7), (2, 1.3)] {
        let text = format!(
            "dimension {d}\nparameters u v Dphi\nmodel conformal\nvalues Dphi = {dphi}\n\
             decompose 1 + u^Dphi + (u/v)^Dphi in s-channel blocks twist 2 Dphi to 2 Dphi + 8 step 2, spin 0 to 12 step 2\n"
        );
        let (item, code) = decompose(&text);
        assert_eq!(code, 0, "{item}");
        assert_eq!(item["channel"], "s_channel");
        assert_eq!(item["method"], "series", "{item}");
        assert_eq!(item["unmatched"], 0, "{item}");
        assert_eq!(item["exact"][0], "1", "{item}");
        assert!(item["residual"].as_f64().unwrap() < 1e-11, "{item}");
        let dims = item["dims"].as_array().unwrap();
        let spins = item["spins"].as_array().unwrap();
        let coefficients = item["coefficients"].as_array().unwrap();
        let index = |n: u32, l: u32| -> usize {
            let want = 2.0 * dphi + f64::from(2 * n + l);
            (0..dims.len())
                .find(|&k| {
                    (dims[k].as_f64().unwrap() - want).abs() < 1e-12
                        && spins[k].as_u64() == Some(u64::from(l))
                })
                .unwrap_or_else(|| panic!("no block n = {n}, ℓ = {l}"))
        };
        for (n, l) in [
            (0, 0),
            (0, 2),
            (1, 0),
            (0, 4),
            (1, 2),
            (2, 0),
            (1, 4),
            (2, 2),
            (3, 0),
        ] {
            let got = coefficients[index(n, l)].as_f64().unwrap();
            let want = gff_coefficient(d, dphi, n, l);
            assert!(
                ((got - want) / want).abs() < 1e-12,
                "d = {d}, Δφ = {dphi}, n = {n}, ℓ = {l}: {got} vs {want}"
            );
        }
        if (d, dphi) == (4, 1.5) {
            // Exact: 2 and 45/64 (examples/four-point-blocks.ward).
            assert_eq!(item["exact"][1 + index(0, 0)], "2");
            assert_eq!(item["exact"][1 + index(0, 2)], "45/64");
        }
    }
}

#[test]
fn an_irrational_dimension_falls_back_on_the_fit() {
    // S_d/S_d = 1 keeps π in G: not a rational series, so least squares.
    let text = "dimension 4\nparameters u v\nmodel conformal\n\
        decompose 1 + S_d/S_d u^(3/2) + (u/v)^(3/2) in s-channel blocks twist 3 to 11 step 2, spin 0 to 12 step 2\n";
    let (item, code) = decompose(text);
    assert_eq!(code, 0, "{item}");
    assert_eq!(item["method"], "fit", "{item}");
    let c = item["coefficients"].as_array().unwrap();
    assert!((c[0].as_f64().unwrap() - 2.0).abs() < 1e-10, "{item}");
}

/// g_block(Δ, ℓ, Δ12, Δ34; z, z̄) from Dolan & Osborn 2001 (hep-th/0011040),
/// eqs. 2.10-2.11 with a = -Δ12/2, b = Δ34/2, by mpmath 1.3 (30 digits).
/// d, Δ, ℓ, Δ12, Δ34, z, z̄, value.
type Mixed = (u32, f64, u32, f64, f64, f64, f64, f64);

const MIXED: [Mixed; 3] = [
    (
        4,
        3.3,
        2,
        0.4,
        -0.7,
        0.3,
        0.1,
        0.018_257_909_518_716_846_853_49,
    ),
    (
        2,
        2.5,
        1,
        1.1,
        0.3,
        0.6,
        0.2,
        0.265_917_711_997_437_598_531_3,
    ),
    (
        4,
        5.2,
        0,
        -0.5,
        0.5,
        0.45,
        0.2,
        0.006_577_736_675_826_940_865_007,
    ),
];

#[test]
fn blocks_with_unequal_external_dimensions() {
    use wardsmith::numeric::special::{
        four_point_block_mixed, four_point_block_polar_mixed, Externals,
    };
    for (d, delta, l, d12, d34, z, zb, want) in MIXED {
        let ext = Externals {
            delta12: d12,
            delta34: d34,
        };
        let got = four_point_block_mixed(d, delta, l, ext, z, zb).unwrap();
        assert!(
            ((got - want) / want).abs() < 1e-13,
            "d = {d}, Δ = {delta}, ℓ = {l}: {got} vs {want}"
        );
    }
    // z = 0.3 e^(i), z̄ = z*: mpmath 1.3 with complex z.
    let ext = Externals {
        delta12: 0.4,
        delta34: -0.7,
    };
    let got = four_point_block_polar_mixed(4, 3.3, 2, ext, 0.3, 1.0).unwrap();
    let want = -0.007_597_786_731_109_175_098_989;
    assert!(((got - want) / want).abs() < 1e-13, "{got} vs {want}");
    // The Casimir equation (Dolan & Osborn 2004, hep-th/0309180, eqs.
    // 2.10-2.11, from memory) by five-point differences: 2 D_z + 2 D_z̄ +
    // 2(d - 2) z z̄/(z - z̄)((1 - z)∂_z - (1 - z̄)∂_z̄), D_x = x²(1 - x)∂²
    // - (a + b + 1) x²∂ - a b x.
    let h = 1e-3;
    for (d, delta, l, d12, d34, z, zb, _) in MIXED {
        let ext = Externals {
            delta12: d12,
            delta34: d34,
        };
        let (a, b) = ext.ab();
        let g = |p: f64, q: f64| four_point_block_mixed(d, delta, l, ext, p, q).unwrap();
        let d1 = |f: &dyn Fn(f64) -> f64, x: f64| {
            (f(x - 2.0 * h) - 8.0 * f(x - h) + 8.0 * f(x + h) - f(x + 2.0 * h)) / (12.0 * h)
        };
        let d2 = |f: &dyn Fn(f64) -> f64, x: f64| {
            (-f(x - 2.0 * h) + 16.0 * f(x - h) - 30.0 * f(x) + 16.0 * f(x + h) - f(x + 2.0 * h))
                / (12.0 * h * h)
        };
        let (gz, gzz) = (d1(&|p| g(p, zb), z), d2(&|p| g(p, zb), z));
        let (gb, gbb) = (d1(&|q| g(z, q), zb), d2(&|q| g(z, q), zb));
        let g0 = g(z, zb);
        let dx = |x: f64, f1: f64, f2: f64| {
            x * x * (1.0 - x) * f2 - (a + b + 1.0) * x * x * f1 - a * b * x * g0
        };
        let dd = f64::from(d);
        let lhs = 2.0 * dx(z, gz, gzz)
            + 2.0 * dx(zb, gb, gbb)
            + 2.0 * (dd - 2.0) * z * zb / (z - zb) * ((1.0 - z) * gz - (1.0 - zb) * gb);
        let c = delta * (delta - dd) + f64::from(l) * (f64::from(l) + dd - 2.0);
        assert!(
            (lhs - c * g0).abs() < 1e-7 * (c * g0).abs().max(1e-3),
            "d = {d}, Δ = {delta}, ℓ = {l}: {lhs} vs {}",
            c * g0
        );
    }
}

#[test]
fn unequal_external_dimensions_decompose() {
    // ⟨φ1 φ2 φ1 φ2⟩ = 1/(x13^(2Δ1) x24^(2Δ2)) of two generalised free
    // fields: with the prefactor of Dolan & Osborn 2001 (hep-th/0011040,
    // eq. 2.1), Δ12 = Δ34 = Δ1 - Δ2, it is G = u^((Δ1 + Δ2)/2) (derived
    // here), expanded in the double twists Δ1 + Δ2 + 2n + ℓ of every spin.
    // Δ1 = 6/5, Δ2 = 1/2: the series solve (exact) and the least-squares
    // fit (with S_d/S_d, not a rational series) agree, and the leading
    // coefficient is 1 (the normalisation g ~ z^((Δ+ℓ)/2) z̄^((Δ-ℓ)/2)).
    for d in [2u32, 4] {
        let series = format!(
            "dimension {d}\nparameters u v\nmodel conformal\n\
             decompose u^(17/20) in s-channel blocks twist 17/10 to 17/10 + 8 step 2, spin 0 to 10, delta12 = 7/10, delta34 = 7/10\n"
        );
        let (exact, code) = decompose(&series);
        assert_eq!(code, 0, "{exact}");
        assert_eq!(exact["method"], "series", "{exact}");
        assert_eq!(exact["unmatched"], 0, "{exact}");
        assert!(exact["residual"].as_f64().unwrap() < 1e-11, "{exact}");
        assert_eq!(exact["exact"][0], "0");
        assert_eq!(exact["exact"][1], "1");
        let fitted = series.replace("decompose u^", "decompose S_d/S_d u^");
        let (fit, code) = decompose(&fitted);
        assert_eq!(code, 0, "{fit}");
        assert_eq!(fit["method"], "fit");
        let a = exact["coefficients"].as_array().unwrap();
        let b = fit["coefficients"].as_array().unwrap();
        // The lowest twist's first spins (the fit's best determined).
        for k in 0..3 {
            let (x, y) = (a[k].as_f64().unwrap(), b[k].as_f64().unwrap());
            assert!(
                (x - y).abs() < 1e-6 * x.abs().max(1e-3),
                "d = {d}, block {k}: {x} vs {y}"
            );
        }
    }
}

#[test]
fn real_configurations_fit_too_and_a_wrong_tower_fails() {
    // G written in z and zb: fitted at real z, z̄ (less well conditioned).
    let text = "dimension 4\nparameters z zb\nmodel conformal\n\
        decompose 1 + (z zb)^(3/2) + (z zb/((1 - z) (1 - zb)))^(3/2) in s-channel blocks twist 3 to 9 step 2, spin 0 to 8 step 2\n";
    let (item, code) = decompose(text);
    assert_eq!(code, 0, "{item}");
    let c = item["coefficients"].as_array().unwrap();
    assert!((c[0].as_f64().unwrap() - 2.0).abs() < 1e-9, "{item}");
    // Twists shifted by one: no expansion.
    let wrong = text.replace("twist 3 to 9", "twist 4 to 10");
    let (item, code) = decompose(&wrong);
    assert_eq!(code, 1, "{item}");
}

#[test]
fn the_equal_dimension_casimir_is_refuted_on_mixed_blocks() {
    // tests/cases/numeric/four-point-casimir-mixed-d4.ward proves the
    // Casimir with the a b and (a + b) terms; without them (the operator of
    // equal external dimensions) the claim is refuted by its remainder's
    // value (docs/conventions.md §12).
    use std::path::Path;
    use std::sync::Arc;
    use wardsmith::diagnostic::Source;
    use wardsmith::run::{run_source, Mode, Options};
    let text = "dimension 4\npositive z zb Delta l\nparameters D12 D34\n\
        let g(z, zb) = g_block(Delta, l, D12, D34; z, zb)\n\
        claim 2 z^2 (1 - z) g[2,0](z, zb) - 2 z^2 g[1,0](z, zb)\n\
            + 2 zb^2 (1 - zb) g[0,2](z, zb) - 2 zb^2 g[0,1](z, zb)\n\
            + 4 z zb/(z - zb) ((1 - z) g[1,0](z, zb) - (1 - zb) g[0,1](z, zb))\n\
          = (Delta (Delta - 4) + l (l + 2)) g(z, zb)\n";
    let source = Arc::new(Source::new("slip.ward", text));
    let out = run_source(&source, Path::new("."), Mode::Check, &Options::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(out.code, 1);
    assert!(out.report.contains("claim NOT PROVED"), "{}", out.report);
}

#[test]
fn odd_spins_of_identical_scalars_are_exactly_absent() {
    // Identical scalars exchange no odd spin in the s-channel (Bose
    // symmetry; common practice): asked for spins 0 to 3, the series solve
    // gives exactly 0 for ℓ = 1 and 3, and the report says so in words;
    // the even spins carry Fitzpatrick & Kaplan's exact fractions
    // (gff_coefficient above; 525/8192 at n = 1, ℓ = 2, Δφ = 3/2, d = 4).
    use std::path::Path;
    use wardsmith::diagnostic::Source;
    use wardsmith::run::{run_source, Mode, Options};
    let text = "dimension 4\nparameters u v Dphi\nmodel conformal\nvalues Dphi = 3/2\n\
                decompose 1 + u^Dphi + (u/v)^Dphi in s-channel blocks twist 2 Dphi to 2 Dphi + 2 step 2, spin 0 to 3\n";
    let (item, code) = decompose(text);
    assert_eq!(code, 0, "{item}");
    assert_eq!(item["method"], "series", "{item}");
    let spins = item["spins"].as_array().unwrap();
    let exact = item["exact"].as_array().unwrap();
    for (k, l) in spins.iter().enumerate() {
        if l.as_u64().unwrap() % 2 == 1 {
            assert_eq!(exact[1 + k], "0", "{item}");
        }
    }
    assert!((gff_coefficient(4, 1.5, 1, 2) - 525.0 / 8192.0).abs() < 1e-15);
    let source = Source::new("odd.ward", text);
    let out = run_source(&source, Path::new("."), Mode::Check, &Options::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    assert!(
        out.report.contains("ℓ = 1: λ² = 0 (exactly)\n"),
        "{}",
        out.report
    );
    assert!(
        out.report.contains("ℓ = 2: λ² = 525/8192 ("),
        "{}",
        out.report
    );
}
