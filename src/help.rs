//! The help pages of the command line: the conventions every command's
//! `--help` ends with, and `wardsmith help language`, one line per
//! statement kind of a `.ward` file with an example that parses.
//!
//! Kept here, not in `main.rs`, so that tests can check the pages against
//! the grammar: every statement keyword has an entry, and every example
//! parses.

/// One statement kind of a `.ward` file.
pub struct Entry {
    /// The keyword the statement starts with.
    pub keyword: &'static str,
    /// A complete example, on one line.
    pub example: &'static str,
    /// What it does, in a few words.
    pub meaning: &'static str,
}

/// Every statement kind, in the order a file usually has them.
pub const STATEMENTS: &[Entry] = &[
    Entry {
        keyword: "dimension",
        example: "dimension d",
        meaning: "space-time dimension: a number (`dimension 4`) or the symbol d",
    },
    Entry {
        keyword: "halfspace",
        example: "halfspace y >= 0",
        meaning: "a flat wall at y = 0; enables n, D, x∥, δ(y(x)), boundary operators",
    },
    Entry {
        keyword: "scalar",
        example: "scalar O dim Delta, charge 1",
        meaning: "a bulk scalar primary; a new name in `dim` declares a parameter",
    },
    Entry {
        keyword: "vector",
        example: "vector J dim d - 1, conserved",
        meaning: "a bulk operator with one index, J[mu](x) (spin 1); `conserved` marks a current",
    },
    Entry {
        keyword: "tensor",
        example: "tensor W dim 4, spin 2",
        meaning: "a symmetric traceless tensor of spin ℓ, W[mu,nu](x); wall indices if boundary",
    },
    Entry {
        keyword: "boundary",
        example: "boundary scalar psi dim 3",
        meaning: "`boundary scalar`, `boundary points`: living on the wall",
    },
    Entry {
        keyword: "points",
        example: "points x x1 x2",
        meaning: "insertion points (`boundary points s1` for points on the wall)",
    },
    Entry {
        keyword: "parameters",
        example: "parameters g a[mu]",
        meaning: "symbols used in coefficients; with indices, vectors and tensors (`omega[mu,nu]`; parallel indices make them parallel to the wall)",
    },
    Entry {
        keyword: "positive",
        example: "positive r",
        meaning: "parameters known to be positive: (r^2)^(1/2) = r",
    },
    Entry {
        keyword: "parallel",
        example: "parallel a b",
        meaning: "indices running along the wall (d - 1 values)",
    },
    Entry {
        keyword: "function",
        example: "function F",
        meaning: "an unknown function: F(xi(x1, x2)), F'(u); of several variables F(u, v), F[1,0](u, v)",
    },
    Entry {
        keyword: "let",
        example: "let G = |x1 - x2|^(-2 Delta)",
        meaning: "a named scalar expression; `let f(t) = …` a function, f''(u) its derivatives",
    },
    Entry {
        keyword: "rules",
        example: "rules \"extra.rules\"",
        meaning: "load Ward rules from a file, relative to this one",
    },
    Entry {
        keyword: "killing",
        example: "killing eps special b",
        meaning: "a conformal Killing vector: translation, rotation, dilatation, special",
    },
    Entry {
        keyword: "classify",
        example: "classify eps",
        meaning: "print whether the wall preserves or breaks it (ε_n = 0 on the wall)",
    },
    Entry {
        keyword: "simplify",
        example: "simplify <T[mu,mu](x) O(x1)> expect - Delta δ(x - x1) <O(x1)>",
        meaning: "print the normal form; with `expect`, check it",
    },
    Entry {
        keyword: "claim",
        example: "claim ∂[mu](x) <T[mu,nu](x) O(x1)> = - δ(x - x1) ∂[nu](x1) <O(x1)>",
        meaning: "check an identity, as distributions",
    },
    Entry {
        keyword: "derivation",
        example: "derivation trace <T[mu,mu](x) O(x1)> = - Delta δ(x - x1) <O(x1)> by ward-trace end",
        meaning: "a hand derivation, one `= STEP [by RULE]` per line; each step checked",
    },
    Entry {
        keyword: "slip",
        example: "slip claim <T[mu,mu](x) O(x1)> = δ(x - x1) <O(x1)>",
        meaning: "before `claim` or `derivation`: a slip kept on purpose; passes when refuted",
    },
    Entry {
        keyword: "place",
        example: "place x2 outside ball(x1, r)",
        meaning: "where a point lies (`inside`, `on`); `place x1 at (0, 1/2, 3)` for numbers, `place x1 at (0, 0, h)` to move with a parameter that `values` or `scan` sets",
    },
    Entry {
        keyword: "model",
        example: "model conformal",
        meaning: "correlators for numeric work: `conformal`, `gff`, `free-scalar dirichlet`, `free-scalar complex neumann with J = current, K = boundary-current`; `free-scalar with P = phi2, S = stress` maps declared operators to the free scalar's composites (`stress`: a `tensor … spin 2` standing for its stress tensor)",
    },
    Entry {
        keyword: "coefficient",
        example: "coefficient <O O> = 1",
        meaning: "a coefficient of the conformal model (`<T J J> = b`: the free coefficient of ⟨T J J⟩ of a conserved current; the Ward identity fixes the other from `<J J>`)",
    },
    Entry {
        keyword: "values",
        example: "values Delta = 1.3, b = (1, 0, 0)",
        meaning: "numeric values of declared parameters",
    },
    Entry {
        keyword: "sample",
        example: "sample 5 seed 42",
        meaning: "numeric work on 5 seeded random positions of the points not placed",
    },
    Entry {
        keyword: "tolerance",
        example: "tolerance 1e-8",
        meaning: "the relative accuracy asked of quadrature in fluxes and plane integrals",
    },
    Entry {
        keyword: "evaluate",
        example: "evaluate <O(x1) O(x2)>",
        meaning: "print the numeric value on the model",
    },
    Entry {
        keyword: "compare",
        example: "compare <O(x1) O(x2)> = |x1 - x2|^(-2 Delta)",
        meaning: "check both sides agree numerically (fluxes by quadrature)",
    },
    Entry {
        keyword: "flux",
        example: "flux ∂[mu](x) { <T[mu,nu](x) O(x1)> } = - δ(x - x1) ∂[nu](x1) <O(x1)> radius 1/5",
        meaning: "check a local identity by its flux around each insertion",
    },
    Entry {
        keyword: "solve",
        example: "solve a from ∮[x on ball(x1, 1/5)] { N[mu] <T[mu,mu](x) O(x1) O(x2)> } = a",
        meaning: "print the value of a parameter entering linearly",
    },
    Entry {
        keyword: "scan",
        example: "scan Delta from 1 to 2 steps 11: <O(x1) O(x2)> = |x1 - x2|^(-2 Delta) into \"two-point\"",
        meaning: "both sides as a parameter runs; a table, and two-point.csv/.svg",
    },
    Entry {
        keyword: "decompose",
        example: "decompose <O(x1) O(x2)> in boundary blocks Delta to Delta + 8 step 2 into \"channel\"",
        meaning: "a two-point function next to the wall in one channel's blocks (bulk: a list of dimensions, identity included; boundary: a list or a tower; `<O(x) H1(s1) H2(s2)>` in boundary blocks fits F(χ) of a bulk–boundary–boundary function); `in s-channel blocks twist 2 Dphi to 2 Dphi + 8 step 2, spin 0 to 12 step 2`: a four-point function in u, v (or z, zb) in d = 2, 4",
    },
    Entry {
        keyword: "structures",
        example: "structures <T[mu,nu](x) D(s1) D(s2)>",
        meaning: "the independent tensor structures of a correlator with spinning insertions (rank at random configurations against the count the symmetry predicts), its cross-ratios, and for one conserved insertion the exact differential relations among the coefficient functions; `decompose <…> in structures into \"name\"`: the model's correlator expanded in them, f_i(η) in name.csv/.svg, and the wall limit against ⟨D …⟩ (docs/conventions.md §16)",
    },
    Entry {
        keyword: "perturb",
        example: "perturb <P(x1) P(x2)> by g H C on boundary z1 z2 to order 2 expect order 1 = 0",
        meaning: "conformal perturbation theory in g ∫ H C over the wall (H C: boundary scalars of the unperturbed model, at one point): the corrections of order g and g² as wall integrals of the model's connected correlators (bulk insertions only), with error estimates; at second order the cutoff |z - z'| > ε, the power divergences and the coefficient of ln(1/ε) reported apart from the finite part; `expect order n = E`, `expect total = E` compared (docs/conventions.md §17)",
    },
];

/// What `wardsmith help language` prints after the statements.
const EXPRESSIONS: &str = "\
Expressions:
  <T[mu,nu](x) O(x1)>     a correlator (also ⟨ ⟩); T is the stress tensor, D the displacement
  ∂[mu](x) <…>            a derivative (ASCII del); its body is bracketed: <…>, {…}, (…) or a ∂
  δ(x - x1), δ(y(x))      δ-functions at a point and on the wall (ASCII delta)
  δ[mu,nu], n[mu]         Kronecker delta, unit normal; n is also an index: T[mu,n]
  x1[mu], x1[n], x∥       coordinates; x1[n] is the distance to the wall; x∥ is par(x)
  x1[0], T[0,2](x), ∂[2](x1)   components, counted from 0, the normal one last (numeric statements only)
  |x1 - x2|^(-2 Delta)    distances and lengths |x1|, to any power
  xi(x1, x2)              the cross-ratio (x1 - x2)²/(4 y1 y2)
  C_D(s1, s2), b2(s1, s2) the displacement's two-point coefficient; b1, b2 in d = 4
  u(x1, x2, x3, x4)       cross-ratios of four points, also v(…) (docs/conventions.md §12)
  F21(a, b; c; z)         the hypergeometric function ₂F₁ (also written so); F21'(…) in z
  f_bulk(Delta; xi)       the wall blocks f_bulk(Δ; ξ), f_bdy(Δ̂; ξ) (docs/conventions.md §9)
  f_bdy3(Dhat, dh12; chi) the boundary-channel block of ⟨O Ô1 Ô2⟩ (docs/conventions.md §15)
  g_block(Delta, l; z, zb)  the four-point s-channel block in d = 2, 4 (docs/conventions.md §14)
  eps[nu](x)              a declared Killing vector's components
  ∫[x in space] { … }     integrals over space, halfspace, boundary, ball(x1, r) (ASCII int)
  ∮[x on ball(x1, r)] { N[mu] … }   a flux through a sphere, outward normal N (ASCII oint)
  S_d                     the area 2π^(d/2)/Γ(d/2) of the unit sphere
  pi, π                   the number π, in a whole dimension; printed through S_d (S_d/4 in d = 3)
  1.5e-3                  numbers: whole, decimal, or with a power of ten

A name and its bracket are written together (O(x1), F(u)); a space before a
bracket multiplies: g (a + b). A repeated index is summed. # starts a comment.";

/// The page `wardsmith help language` prints.
pub fn language() -> String {
    let width = STATEMENTS
        .iter()
        .map(|e| e.keyword.len())
        .max()
        .unwrap_or(0);
    let mut out = String::from(
        "The .ward language: one statement after another, each starting with its\n\
         keyword; line breaks are free. Statements, with an example each:\n\n",
    );
    for e in STATEMENTS {
        out.push_str(&format!(
            "  {:width$}  {}\n      {}\n",
            e.keyword, e.meaning, e.example
        ));
    }
    out.push('\n');
    out.push_str(EXPRESSIONS);
    out.push_str("\n\nThe walk from a first file to a saved derivation: docs/tutorial.md.\n");
    out
}

/// The conventions every command's `--help` ends with.
pub const CONVENTIONS: &str = "\
Conventions: Euclidean R^d with metric δ_{μν}, path-integral weight e^{-S};
T^{μν} = -(2/√g) δS/δg_{μν}; minimal contact-term scheme. With `halfspace y >= 0`
the boundary is y = 0, n is the unit normal pointing into the bulk, x∥ is the
projection of x onto the boundary, and D(x∥) = T_nn(x∥, y → 0+) is the
displacement operator; T is extended by zero below the wall, so ∂_μ T_μν
carries δ(y) n_ν D. A boundary point moves only along the wall: ∂_n at a
boundary point is zero (writing ∂[n](s1) is an input error), and a bulk index
of a derivative at a boundary point is projected onto the wall. Derivatives
of explicit functions carry their δ-function terms (Gauss's law); where those
need a scheme the result holds away from coincident points, and says so.
Every sign and factor: docs/conventions.md. The statements: `wardsmith help
language`.

Exit codes: 0 every claim holds, 1 some claim is not proved, 2 the input is wrong.";

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diagnostic::Source;

    #[test]
    fn every_statement_keyword_has_an_entry() {
        for keyword in crate::syntax::STATEMENT_STARTS {
            assert!(
                STATEMENTS.iter().any(|e| e.keyword == *keyword),
                "no help entry for `{keyword}`"
            );
        }
        for e in STATEMENTS {
            assert!(
                crate::syntax::STATEMENT_STARTS.contains(&e.keyword),
                "`{}` is not a statement keyword",
                e.keyword
            );
        }
    }

    #[test]
    fn every_example_parses_and_starts_with_its_keyword() {
        for e in STATEMENTS {
            // The page is printed through clap, which wraps at 100 columns.
            assert!(e.example.chars().count() <= 90, "too long: {}", e.example);
            assert!(e.example.starts_with(e.keyword), "{}", e.example);
            let source = Source::new("help", e.example);
            if let Err(err) = crate::syntax::parse_file(&source) {
                panic!("{}: {}", e.example, err.render());
            }
        }
    }
}
