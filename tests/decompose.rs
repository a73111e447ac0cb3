//! Block expansions of two-point functions next to a wall (`decompose`),
//! through the library's command-line path with the JSON report read back.
//!
//! - The free scalar with a Neumann or Dirichlet wall, d = 3, 4, 5: in the
//!   boundary channel one block (Δ̂ = d/2 - 1 with μ² = 2, Neumann; Δ̂ = d/2
//!   with μ² = (d - 2)/2, Dirichlet), in the bulk channel the identity and
//!   one block of dimension d - 2 with λa = ±1, each in units of the
//!   identity's coefficient (Liendo, Rastelli & van Rees 2012,
//!   arXiv:1210.4258, the free scalar; McAvity & Osborn 1995,
//!   cond-mat/9505127). The identity's coefficient is the model's C_φ =
//!   1/((d - 2) S_d) (docs/conventions.md §4).
//! - The generalised free field with either image sign, d = 3 and 4,
//!   Δ = 13/10: the boundary channel is the tower Δ̂ = Δ + n with only even
//!   n (sign +) or only odd n (sign -); the coefficients are checked
//!   against exact series matching of G(ξ) = 1 ± (ξ/(1 + ξ))^Δ in 1/ξ
//!   (SymPy 1.14, rational arithmetic; the script is reproduced below).
//! - A wrong dimension does not fit (exit 1), and crossing holds: both
//!   channels fit the same G.

use std::path::Path;
use std::sync::Arc;

use wardsmith::diagnostic::Source;
use wardsmith::run::{run_source, Mode, Options};

/// The JSON items of a file's report and the exit code.
fn run(text: &str) -> (Vec<serde_json::Value>, i32) {
    let source = Arc::new(Source::new("decompose.ward", text));
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
        .filter(|i| i["kind"] == "decompose" || i["statement"] == "decompose")
        .cloned()
        .collect();
    (items, out.code)
}

fn numbers(v: &serde_json::Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn sphere_area(d: u32) -> f64 {
    2.0 * std::f64::consts::PI.powf(f64::from(d) / 2.0) / gamma_half(d)
}

/// Γ(d/2) for whole d ≥ 1 (common practice: Γ(1/2) = √π, Γ(1) = 1,
/// Γ(x + 1) = x Γ(x)).
fn gamma_half(d: u32) -> f64 {
    let mut x = if d % 2 == 0 { 1.0 } else { 0.5 };
    let mut g = if d % 2 == 0 {
        1.0
    } else {
        std::f64::consts::PI.sqrt()
    };
    while x < f64::from(d) / 2.0 - 1e-9 {
        g *= x;
        x += 1.0;
    }
    g
}

#[test]
fn free_scalar_in_both_channels() {
    for d in [3u32, 4, 5] {
        let c_phi = 1.0 / ((f64::from(d) - 2.0) * sphere_area(d));
        for (wall, sign, hat, mu2) in [
            ("neumann", 1.0, "d/2 - 1", 2.0),
            ("dirichlet", -1.0, "d/2", (f64::from(d) - 2.0) / 2.0),
        ] {
            let text = format!(
                "dimension {d}\nhalfspace y >= 0\nscalar P dim d/2 - 1\npoints x1 x2\n\
                 model free-scalar {wall} with P = phi\n\
                 decompose <P(x1) P(x2)> in boundary blocks {hat}\n\
                 decompose <P(x1) P(x2)> in bulk blocks d - 2\n"
            );
            let (items, code) = run(&text);
            assert_eq!(code, 0, "{text}");
            let boundary = numbers(&items[0]["coefficients"]);
            assert!(
                (boundary[0] / c_phi - mu2).abs() < 1e-10,
                "d = {d}, {wall}: μ² = {}",
                boundary[0] / c_phi
            );
            let identity = items[1]["identity"].as_f64().unwrap();
            assert!(
                (identity / c_phi - 1.0).abs() < 1e-10,
                "identity {identity}"
            );
            let bulk = numbers(&items[1]["coefficients"]);
            assert!(
                (bulk[0] / identity - sign).abs() < 1e-9,
                "d = {d}, {wall}: λa = {}",
                bulk[0] / identity
            );
            for item in &items {
                assert!(item["residual"].as_f64().unwrap() < 1e-12);
            }
        }
    }
}

/// Boundary-channel coefficients of G(ξ) = 1 ± (ξ/(1 + ξ))^Δ, Δ = 13/10,
/// n = 0 … 5, from exact series matching in z = 1/ξ (SymPy 1.14):
///
/// ```text
/// g_k = [k = 0] + s binomial(-Δ, k)
/// F_n(z) = 2F1(Δ + n, Δ + n + 1 - d/2; 2Δ + 2n + 2 - d; -z)
/// μ_n = g_n - Σ_{m<n} μ_m [z^(n-m)] F_m
/// ```
const GFF_TOWER: [(u32, f64, [f64; 6]); 4] = [
    (3, 1.0, [2.0, 0.0, 0.46, 0.0, 0.041925, 0.0]),
    (3, -1.0, [0.0, 1.3, 0.0, 0.143, 0.0, 0.01188525]),
    (
        4,
        1.0,
        [2.0, 0.0, 0.2803125, 0.0, 0.017_099_618_675_595_236, 0.0],
    ),
    (
        4,
        -1.0,
        [
            0.0,
            1.3,
            0.0,
            0.068_520_833_333_333_34,
            0.0,
            0.004_292_904_267_504_699,
        ],
    ),
];

#[test]
fn generalised_free_field_tower() {
    for (d, sign, want) in GFF_TOWER {
        let wall = if sign > 0.0 { "neumann" } else { "dirichlet" };
        let text = format!(
            "dimension {d}\nhalfspace y >= 0\nscalar O dim Delta\nvalues Delta = 13/10\n\
             points x1 x2\nmodel gff {wall}\n\
             decompose <O(x1) O(x2)> in boundary blocks Delta to Delta + 13\n"
        );
        let (items, code) = run(&text);
        assert_eq!(code, 0, "{text}");
        let got = numbers(&items[0]["coefficients"]);
        // Solved order by order in the series in 1/ξ (exact rationals), so
        // every member is the closed form's; checked at values of ξ where
        // the tower's truncation is below 1e-12. (The least-squares fit
        // this replaces determined only the first two to 1e-10.)
        assert_eq!(items[0]["method"], "series", "{}", items[0]);
        assert_eq!(items[0]["unmatched"], 0);
        assert!(
            items[0]["residual"].as_f64().unwrap() < 1e-11,
            "{}",
            items[0]
        );
        for n in 0..6 {
            assert!(
                (got[n] - want[n]).abs() <= 1e-10 * want[n].abs().max(1.0),
                "d = {d}, sign {sign}, n = {n}: {} against {}",
                got[n],
                want[n]
            );
        }
        if (d, sign) == (3, 1.0) {
            // 0.46 and 0.041925 exactly.
            assert_eq!(items[0]["exact"][2], "23/50");
            assert_eq!(items[0]["exact"][4], "1677/40000");
        }
    }
}

#[test]
fn generalised_free_field_bulk_channel_by_series() {
    // G = 1 ± (ξ/(1 + ξ))^Δ in the bulk channel: the identity and the tower
    // 2Δ + n (LRvR 2012, arXiv:1210.4258: the generalised free field's bulk
    // channel holds the identity and [OO]_n). Exact, so the identity is 1
    // and no term is left unmatched below the top of the tower.
    let text = "dimension 3\nhalfspace y >= 0\nscalar O dim Delta\nvalues Delta = 13/10\n\
                points x1 x2\nmodel gff neumann\n\
                decompose <O(x1) O(x2)> in bulk blocks 2 Delta to 2 Delta + 20\n";
    let (items, code) = run(text);
    assert_eq!(code, 0, "{}", items[0]);
    assert_eq!(items[0]["method"], "series");
    assert_eq!(items[0]["exact"][0], "1");
    // The first block: ξ^Δ of (ξ/(1 + ξ))^Δ, coefficient 1.
    assert_eq!(items[0]["exact"][1], "1");
    assert!(
        items[0]["residual"].as_f64().unwrap() < 1e-11,
        "{}",
        items[0]
    );
}

#[test]
fn a_wrong_dimension_does_not_fit() {
    let text = "dimension 3\nhalfspace y >= 0\nscalar P dim 1/2\npoints x1 x2\n\
                model free-scalar neumann with P = phi\n\
                decompose <P(x1) P(x2)> in boundary blocks 3/2\n";
    let (items, code) = run(text);
    assert_eq!(code, 1);
    assert_eq!(items[0]["holds"], false);
    assert!(items[0]["residual"].as_f64().unwrap() > 0.1);
}

#[test]
fn a_wrong_tower_does_not_fit() {
    // The generalised free field's boundary channel needs Δ̂ = Δ; a tower
    // without it, or one starting elsewhere, leaves a large residual
    // however many members it has.
    let text = "dimension 3\nhalfspace y >= 0\nscalar O dim Delta\nvalues Delta = 13/10\n\
                points x1 x2\nmodel gff neumann\n\
                decompose <O(x1) O(x2)> in boundary blocks Delta + 1 to Delta + 14\n\
                decompose <O(x1) O(x2)> in boundary blocks 1/3 to 1/3 + 20\n\
                decompose <O(x1) O(x2)> in bulk blocks 2 Delta + 1 to 2 Delta + 27 step 2\n";
    let (items, code) = run(text);
    assert_eq!(code, 1);
    for item in &items {
        assert_eq!(item["holds"], false, "{item}");
        assert!(item["residual"].as_f64().unwrap() > 1e-3, "{item}");
    }
}

#[test]
fn an_empty_tower_is_unknown_and_the_file_goes_on() {
    let text = "dimension 3\nhalfspace y >= 0\nscalar P dim 1/2\npoints x1 x2\n\
                model free-scalar neumann with P = phi\n\
                decompose <P(x1) P(x2)> in boundary blocks 5 to 1\n\
                decompose <P(x1) P(x2)> in boundary blocks 1/2\n";
    let (items, code) = run(text);
    assert_eq!(code, 1);
    assert_eq!(items[0]["status"], "unknown");
    assert_eq!(items[0]["kind"], "failed");
    assert_eq!(items[1]["status"], "confirmed");
}
