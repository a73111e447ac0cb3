//! Derivatives of explicit functions as distributions, and the verdicts
//! that rest on them: a claim is proved as distributions (contact terms
//! included), proved away from coincident points (named), or not proved.
//! Each check names its source.

use std::sync::Arc;

use wardsmith::diagnostic::Source;
use wardsmith::egraph::Limits;
use wardsmith::engine::{Engine, Verdict};
use wardsmith::lower::{lower, ItemKind};
use wardsmith::rules::RuleBook;
use wardsmith::syntax::parse_file;
use wardsmith::term::print::{Printer, Style};

/// What checking one claim found, in a form tests can compare.
#[derive(Debug, PartialEq, Eq)]
enum Found {
    Proved,
    /// Proved away from these coincidences (`x ≠ x1`, sorted).
    Away(Vec<String>),
    /// Not proved, with the remainder as printed (ASCII).
    NotProved(String),
}

/// The verdict on every `claim` of a file.
fn claims(text: &str) -> Vec<Found> {
    let source = Source::new("distributions.ward", text);
    let file = parse_file(&source).unwrap_or_else(|e| panic!("{}", e.render()));
    let program = lower(&source, &file).unwrap_or_else(|e| panic!("{}", e.render()));
    let book = Arc::new(RuleBook::shipped().unwrap_or_else(|e| panic!("{}", e.render())));
    let engine = Engine::new(program.ctx.clone(), book, Limits::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    let printer = Printer::new(&program.ctx, Style::Ascii);
    program
        .items
        .iter()
        .filter_map(|item| match &item.kind {
            ItemKind::Claim { lhs, rhs, .. } => Some(
                match engine
                    .check(lhs, rhs)
                    .unwrap_or_else(|e| panic!("{}", e.render()))
                {
                    Verdict::Proved(_) => Found::Proved,
                    Verdict::ProvedAway(s) => {
                        let mut pairs: Vec<String> = s
                            .caveats
                            .iter()
                            .map(|c| match &c.at {
                                wardsmith::normal::Singular::Point(p) => {
                                    let mut two = [c.var.name.to_string(), p.name.to_string()];
                                    two.sort();
                                    format!("{} != {}", two[0], two[1])
                                }
                                wardsmith::normal::Singular::Zeros(t) => {
                                    format!("{} != 0", printer.term(t))
                                }
                            })
                            .collect();
                        pairs.sort();
                        pairs.dedup();
                        Found::Away(pairs)
                    }
                    Verdict::NotProved(s) => Found::NotProved(printer.term(&s.term)),
                },
            ),
            _ => None,
        })
        .collect()
}

fn dimensions() -> [&'static str; 4] {
    ["3", "4", "6", "d"]
}

/// Gauss's law for the Green's function of the Laplacian (common practice;
/// any text on potential theory): ∂² |x - p|^(2-d) = -(d - 2) S_d δ(x - p),
/// and ∂_μ{(x - p)_μ |x - p|^(-d)} = S_d δ(x - p). Proved as distributions
/// for symbolic d and in d = 3, 4, 6; the pointwise "= 0" is refuted with
/// the δ-function as remainder.
#[test]
fn gauss_law_holds_as_distributions_and_its_pointwise_form_is_refuted() {
    for d in dimensions() {
        let power = if d == "d" {
            "2 - d".to_string()
        } else {
            format!("{}", 2 - d.parse::<i64>().unwrap_or(0))
        };
        let text = format!(
            "dimension {d}\npoints x p\n\
             claim ∂[mu](x) ∂[mu](x) {{ |x - p|^({power}) }} = - (d - 2) S_d δ(x - p)\n\
             claim ∂[mu](x) {{ (x[mu] - p[mu]) |x - p|^(-d) }} = S_d δ(x - p)\n\
             claim ∂[mu](x) ∂[mu](x) {{ |x - p|^({power}) }} = 0\n\
             claim ∂[mu](x) {{ (x[mu] - p[mu]) |x - p|^(-d) }} = 0\n\
             claim ∂[mu](x) {{ (x[mu] - p[mu]) |x - p|^(-d) }} = 2 S_d δ(x - p)\n"
        );
        let found = claims(&text);
        assert_eq!(found[0], Found::Proved, "d = {d}");
        assert_eq!(found[1], Found::Proved, "d = {d}");
        for (k, wrong) in found[2..].iter().enumerate() {
            match wrong {
                Found::NotProved(r) => assert!(r.contains("delta(x - p)"), "d = {d}, {k}: {r}"),
                other => panic!("d = {d}: a false claim gave {other:?}"),
            }
        }
    }
}

/// The two claims of the first report, in d = 3: ∂²|x - x1|^(-1) = 0 is
/// false (the tool's own flux gives -4π), ∂²|x - x1|^(-1) = -S_d δ(x - x1)
/// is true (Gauss's law, common practice).
#[test]
fn the_laplacian_of_the_coulomb_potential_carries_its_delta() {
    let found = claims(
        "dimension 3\npoints x x1\n\
         claim ∂[mu](x) ∂[mu](x) { |x - x1|^(-1) } = 0\n\
         claim ∂[mu](x) ∂[mu](x) { |x - x1|^(-1) } = - S_d δ(x - x1)\n",
    );
    assert_eq!(found[0], Found::NotProved("- S_d delta(x - x1)".into()));
    assert_eq!(found[1], Found::Proved);
}

/// Where the singularity is not locally integrable, the contact terms
/// depend on a scheme (common practice: distributions defined up to local
/// terms): a symbolic power |x - p|^(-2 Δ) gives "proved away from
/// coincident points", naming them, and never "proved".
#[test]
fn scheme_dependent_derivatives_hold_only_away_from_the_coincidence() {
    let found = claims(
        "dimension d\nparameters Delta\npoints x p\n\
         claim ∂[mu](x) { |x - p|^(-2 Delta) } = -2 Delta (x[mu] - p[mu]) |x - p|^(-2 Delta - 2)\n\
         claim ∂[mu](x) ∂[mu](x) { |x - p|^(-2 d) } = 2 d (d + 2) |x - p|^(-2 d - 2)\n\
         claim ∂[mu](x) { |x - p|^(-2 Delta) } = 0\n",
    );
    assert_eq!(found[0], Found::Away(vec!["p != x".into()]));
    // -2d (-2d - 2 + d) = 2d (d + 2): the pointwise value; the degree -2d
    // is below 1 - d, so nothing more is claimed.
    assert_eq!(found[1], Found::Away(vec!["p != x".into()]));
    assert!(matches!(found[2], Found::NotProved(_)), "{:?}", found[2]);
}

/// A contraction over indices along the wall is not a squared distance:
/// (x1 - s1)_a (x1 - s1)_a = |x1 - s1|² - x1_n² for a boundary point s1
/// (common practice). The claim without the normal part is refuted with
/// exactly that remainder; with it, proved. Perturbing the index kind
/// (bulk index instead) makes the first claim true.
#[test]
fn parallel_contractions_keep_the_normal_part() {
    let text = "dimension d\nhalfspace y >= 0\nparallel a\npoints x1 x2\nboundary points s1\n\
         claim (x1[a] - s1[a]) (x1[a] - s1[a]) = |x1 - s1|^2\n\
         claim (x1[a] - s1[a]) (x1[a] - s1[a]) = |x1 - s1|^2 - x1[n]^2\n\
         claim (x1[mu] - s1[mu]) (x1[mu] - s1[mu]) = |x1 - s1|^2\n\
         claim ∂[a](x1) { ∂[a](x1) { |x1 - x2|^(-1) } } = - (d - 4) |x1 - x2|^(-3) - 3 (x1[n] - x2[n])^2 |x1 - x2|^(-5)\n\
         claim ∂[a](x1) { ∂[a](x1) { |x1 - x2|^(-1) } } = |x1 - x2|^(-3)\n";
    let found = claims(text);
    assert_eq!(found[0], Found::NotProved("- x1[n]^2".into()));
    assert_eq!(found[1], Found::Proved);
    assert_eq!(found[2], Found::Proved);
    // Pointwise only: d - 1 directions along the wall, degree -3.
    assert_eq!(found[3], Found::Away(vec!["x1 != x2".into()]));
    assert!(matches!(found[4], Found::NotProved(_)), "{:?}", found[4]);
}

/// (a^m)^p = a^(mp) only for a base that is never negative (common
/// practice): (g²)^(1/2) = |g|, not g, for a parameter of unknown sign;
/// declared positive, the powers compose.
#[test]
fn powers_of_powers_compose_only_for_positive_bases() {
    let found = claims(
        "dimension d\nparameters g h\npositive r\n\
         claim (g^2)^(1/2) = g\n\
         claim (g^2)^(3/2) = g^3\n\
         claim (g g)^h = g^(2 h)\n\
         claim (r^2)^(1/2) = r\n\
         claim (r r)^h = r^(2 h)\n\
         claim (g^2)^2 = g^4\n",
    );
    for (k, f) in found[..3].iter().enumerate() {
        assert!(matches!(f, Found::NotProved(_)), "{k}: {f:?}");
    }
    assert_eq!(&found[3..], &[Found::Proved, Found::Proved, Found::Proved]);
}

/// The height above the wall vanishes on it: x[n] δ(y(x)) = 0 (common
/// practice). A dilatation flux around a bulk point near the wall is the
/// dilatation Ward identity (W4 of the project's conventions), with no
/// leftover wall term; a normal translation needs the ball clear of the
/// wall, else the displacement operator enters (W5).
#[test]
fn balls_clear_of_the_wall_carry_no_wall_term() {
    let base = "dimension d\nhalfspace y >= 0\nscalar O dim Delta\npoints x x1\nparameters r\n\
         killing scale dilatation lambda\nkilling push translation n\n";
    let dilatation = "claim ∮[x on ball(x1, r)] { N[mu] scale[nu](x) <T[mu,nu](x) O(x1)> }\n\
         = - lambda x1[mu] ∂[mu](x1) <O(x1)> - Delta lambda <O(x1)>\n";
    let translation =
        "claim ∮[x on ball(x1, r)] { N[mu] push[nu](x) <T[mu,nu](x) O(x1)> } = - ∂[n](x1) <O(x1)>\n";
    let found = claims(&format!("{base}{dilatation}{translation}"));
    assert_eq!(found[0], Found::Proved);
    match &found[1] {
        Found::NotProved(r) => assert!(r.contains("D(x||)") || r.contains("D("), "{r}"),
        other => panic!("{other:?}"),
    }
    let found = claims(&format!(
        "{base}place ball(x1, r) inside halfspace\n{dilatation}{translation}"
    ));
    assert_eq!(found, vec![Found::Proved, Found::Proved]);
}

/// Runs a file as `wardsmith check` does.
fn check_file(path: &str) -> (String, i32) {
    let out = wardsmith::run::run_path(
        std::path::Path::new(path),
        wardsmith::run::Mode::Check,
        &wardsmith::run::Options::default(),
    )
    .unwrap_or_else(|e| panic!("{}", e.render()));
    (out.report, out.code)
}

/// A derivation that writes the free propagator and then drops the
/// δ-function of its Laplacian (`= 0 by differentiate`) is blamed at that
/// step, and the step before it, which is right, is proved with the
/// model's correlator in place (Gauss's law; C_φ = 1/((d - 2) S_d), common
/// practice).
#[test]
fn the_step_that_drops_a_delta_function_takes_the_blame() {
    let (report, code) = check_file("tests/cases/simplify/derivation-differentiate-slip.ward");
    assert_eq!(code, 1, "{report}");
    assert!(
        report.contains(
            "step 1 (line 16): proved by normalisation, with the model's correlators in place"
        ),
        "{report}"
    );
    assert!(
        report.contains(
            "step 2 (line 17): NOT PROVED: the term with δ(x - x1) is missing from this step"
        ),
        "{report}"
    );
}

/// The saved derivation of the ⟨T O O⟩ coefficient is proved symbolically
/// for symbolic d, with no step left to numerics: the Ward identity by the
/// rules, the conformal form with the model's correlator in place, and its
/// flux through the sphere in closed form, which meets the contact terms
/// for a = -d Δ/((d - 1) S_d) (Osborn & Petkou 1994, hep-th/9307010). The
/// last step holds away from x1 = x2, where its right side, a derivative
/// of |x1 - x2|^(-2Δ), is defined only up to contact terms.
#[test]
fn the_coupling_derivation_is_proved_without_numbers() {
    let (report, code) = check_file("examples/coupling-derivation.ward");
    assert_eq!(code, 0, "{report}");
    assert!(!report.contains("numerically"), "{report}");
    assert!(
        report.contains("step 3 (line 32): proved away from coincident points (x1 ≠ x2)"),
        "{report}"
    );
    assert!(
        report.ends_with("2 proved, 1 proved away from coincident points, 0 not proved\n"),
        "{report}"
    );
}

/// `solve` gives the ⟨T O O⟩ coefficient exactly for symbolic d and Δ:
/// a = -d Δ/((d - 1) S_d) (Osborn & Petkou 1994, hep-th/9307010).
#[test]
fn solve_gives_the_coupling_exactly() {
    let (report, _) = check_file("tests/cases/numeric/solve-coupling-symbolic-d.ward");
    assert!(
        report.contains("a = - Delta d/(S_d (d - 1))  exactly"),
        "{report}"
    );
}
