//! Tensor structures of correlators with spinning insertions
//! (docs/conventions.md §16) through the command-line path: counts by
//! rank against the symmetry left by the points, exact conservation
//! relations, and ⟨T D D⟩ of the free scalar decomposed into its
//! structures. Sources are named in the case files.

use std::path::Path;

use wardsmith::outcome::{Finding, StructuresFound};
use wardsmith::run::{check_path, Mode, Options};

fn found(path: &str) -> Vec<StructuresFound> {
    let out = check_path(Path::new(path), Mode::Check, &Options::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    out.statements
        .into_iter()
        .map(|s| match s.finding {
            Finding::Structures(f) => f,
            other => panic!("{path}: {other:?}"),
        })
        .collect()
}

#[test]
fn counts_next_to_the_wall() {
    // ℓ + 1 = 3 for distinct boundary scalars, ⌊ℓ/2⌋ + 1 = 2 for identical
    // ones, 1 with one boundary scalar (derived from the residual symmetry,
    // docs/conventions.md §16).
    let f = found("tests/cases/numeric/structures-wall-d3.ward");
    let counts: Vec<usize> = f.iter().map(|f| f.listing.structures.len()).collect();
    assert_eq!(counts, [2, 3, 1, 1]);
    assert_eq!(f[0].listing.rank, 2);
    assert!(f[0]
        .listing
        .exchange
        .as_deref()
        .unwrap()
        .contains("3 without"));
    assert!(f.iter().all(|f| f.holds));
    // ⟨T D⟩: conserved as it stands (Δ̂ = d); ⟨T A⟩ with Δ̂ = 2 ≠ 3:
    // (Δ̂ - d)(d - 1)/d f1 = -2/3 f1 = 0 (derived; Billò et al. 2016 for
    // Δ̂ = d, from memory).
    assert_eq!(f[2].listing.conservation, ["X[s1]·div: 0 = 0"]);
    assert_eq!(f[3].listing.conservation, ["X[s1]·div: (- 2/3) f1 = 0"]);
    // ⟨T D D⟩: one relation per building block, each first order in η.
    assert_eq!(f[0].listing.conservation.len(), 2);
    assert!(f[0].listing.conservation[0].contains("f1'(η)"));
}

#[test]
fn counts_without_a_wall() {
    // One each for ⟨T O O⟩, ⟨T O P⟩, ⟨J O P⟩, ⟨J J⟩, ⟨T T⟩; none for ⟨J O O⟩
    // (common practice, Osborn & Petkou 1994, from memory).
    let f = found("tests/cases/numeric/structures-no-wall-d4.ward");
    let counts: Vec<usize> = f.iter().map(|f| f.listing.structures.len()).collect();
    assert_eq!(counts, [1, 1, 1, 0, 1, 1]);
    // Conserved for equal dimensions only.
    assert_eq!(f[0].listing.conservation, ["Z[x1,x2]·div: 0 = 0"]);
    assert!(!f[1].listing.conservation[0].ends_with(": 0 = 0"));
    assert!(!f[2].listing.conservation[0].ends_with(": 0 = 0"));
}

#[test]
fn t_d_d_of_the_free_scalar_decomposes_exactly() {
    // Wick's theorem with image propagators; the wall limit against the
    // model's ⟨D D D⟩ (common practice: T_nn → D at the wall).
    for path in [
        "tests/cases/numeric/tdd-dirichlet-d3.ward",
        "tests/cases/numeric/tdd-dirichlet-d4.ward",
        "tests/cases/numeric/tdd-neumann-d3.ward",
    ] {
        let f = found(path);
        let fit = f[0].fit.as_ref().expect("a decomposition");
        assert!(fit.residual < 1e-10, "{path}: {}", fit.residual);
        assert_eq!(fit.structures.len(), 2);
        // The exact conservation relations hold on the model's f_i (f_i' by
        // central differences, good to about 1e-8).
        let (r, n) = fit.conservation_check.expect("relations checked");
        assert!(r < 1e-6 && n >= 6, "{path}: {r}");
        let (v, e, m) = fit.wall_limit.expect("a wall limit");
        assert!(
            (v - m).abs() < 1e-5 * m.abs() && e.is_finite(),
            "{path}: {v} {e} {m}"
        );
    }
}
