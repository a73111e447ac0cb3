//! Terms as LaTeX, for pasting into a paper: ∂^{(x)}_\mu, δ^{(d)}(x - x_1),
//! ⟨…⟩, fractions for negative powers, Greek names as Greek letters and
//! trailing digits as subscripts. Output only; it is not read back.

use num_rational::BigRational;
use num_traits::{One, Signed, Zero};

use super::{Index, Integral, Op, Point, Region, Term};
use crate::context::Context;

/// A term in LaTeX.
pub fn latex(ctx: &Context, t: &Term) -> String {
    let mut out = String::new();
    sum(ctx, &tidy(t), &mut out);
    out
}

/// The shape of a term as typed (sums of sums, products of products,
/// `1/2` as `1 · 2^-1`) flattened for display: nested sums and products
/// spliced, numbers multiplied into one leading coefficient, and the
/// inverse of a product split into inverses of its factors.
fn tidy(t: &Term) -> Term {
    match t {
        Term::Add(ts) => {
            let mut out = Vec::new();
            for t in ts.iter().map(tidy) {
                match t {
                    Term::Add(inner) => out.extend(inner),
                    t => out.push(t),
                }
            }
            // Numbers added up where they stood: `Δ/2 - 2`, not `Δ/2 - 1 - 1`.
            let mut constant: Option<(usize, BigRational)> = None;
            let mut kept = Vec::with_capacity(out.len());
            for t in out {
                match (t, &mut constant) {
                    (Term::Num(c), Some((_, sum))) => *sum += c,
                    (Term::Num(c), None) => {
                        constant = Some((kept.len(), c.clone()));
                        kept.push(Term::Num(c));
                    }
                    (t, _) => kept.push(t),
                }
            }
            if let Some((k, c)) = constant {
                kept[k] = Term::Num(c);
            }
            let mut out: Vec<Term> = kept
                .into_iter()
                .filter(|t| !matches!(t, Term::Num(c) if c.is_zero()))
                .collect();
            if out.is_empty() {
                out.push(Term::zero());
            }
            match out.len() {
                1 => out.pop().unwrap_or_else(Term::zero),
                _ => Term::Add(out),
            }
        }
        Term::Mul(fs) => {
            let mut coefficient = BigRational::one();
            let mut out = Vec::new();
            let mut push = |f: Term, out: &mut Vec<Term>| match f {
                Term::Num(c) => coefficient *= c,
                f => out.push(f),
            };
            for f in fs.iter().map(tidy) {
                match f {
                    Term::Mul(inner) => inner.into_iter().for_each(|f| push(f, &mut out)),
                    f => push(f, &mut out),
                }
            }
            if coefficient.is_zero() {
                return Term::zero();
            }
            if !coefficient.is_one() || out.is_empty() {
                out.insert(0, Term::Num(coefficient));
            }
            match out.len() {
                1 => out.pop().unwrap_or_else(Term::one),
                _ => Term::Mul(out),
            }
        }
        Term::Pow(b, e) => {
            let (b, e) = (tidy(b), tidy(e));
            match (b, e) {
                (Term::Num(c), Term::Num(q)) if q == -BigRational::one() && !c.is_zero() => {
                    Term::Num(c.recip())
                }
                (Term::Mul(fs), Term::Num(q)) if q.is_negative() => tidy(&Term::Mul(
                    fs.into_iter()
                        .map(|f| Term::Pow(Box::new(f), Box::new(Term::Num(q.clone()))))
                        .collect(),
                )),
                (b, e) => Term::Pow(Box::new(b), Box::new(e)),
            }
        }
        Term::Der(i, p, body) => Term::Der(i.clone(), p.clone(), Box::new(tidy(body))),
        Term::Integral(i) => Term::Integral(Box::new(Integral {
            body: tidy(&i.body),
            ..(**i).clone()
        })),
        other => other.clone(),
    }
}

fn sum(ctx: &Context, t: &Term, out: &mut String) {
    let terms: Vec<&Term> = match t {
        Term::Add(ts) if !ts.is_empty() => ts.iter().collect(),
        _ => vec![t],
    };
    for (i, term) in terms.iter().enumerate() {
        let shown =
            super::factor::with_cross_ratios(&super::factor::factored(term), &ctx.cross_ratios);
        let (negative, magnitude) = split_sign(&shown);
        match (i, negative) {
            (0, true) => out.push('-'),
            (0, false) => {}
            (_, true) => out.push_str(" - "),
            (_, false) => out.push_str(" + "),
        }
        match &magnitude {
            Term::Add(_) if !negative => sum(ctx, &magnitude, out),
            _ => product(ctx, &magnitude, out),
        }
    }
}

fn product(ctx: &Context, t: &Term, out: &mut String) {
    let factors: Vec<Term> = match t {
        Term::Mul(fs) => fs.clone(),
        other => vec![other.clone()],
    };
    let mut coefficient: Option<BigRational> = None;
    let mut numer: Vec<Term> = Vec::new();
    let mut denom: Vec<Term> = Vec::new();
    for f in factors {
        match f {
            Term::Pow(b, e) if matches!(*e, Term::Num(ref q) if q.is_negative()) => {
                let Term::Num(q) = *e else { continue };
                let q = -q;
                denom.push(if q.is_one() {
                    *b
                } else {
                    Term::Pow(b, Box::new(Term::Num(q)))
                });
            }
            Term::Num(c) if coefficient.is_none() => coefficient = Some(c),
            other => numer.push(other),
        }
    }
    // Correlators, derivatives, integrals and distributions follow the
    // fraction of scalars instead of sitting in its numerator.
    let (mut numer, trailing): (Vec<Term>, Vec<Term>) =
        numer.into_iter().partition(|f| !is_operator(f));
    let mut parts: Vec<String> = Vec::new();
    // A fractional coefficient goes into the fraction: \frac{3 x}{4 y}.
    if let Some(c) = coefficient
        .clone()
        .filter(|c| !c.is_integer() && !denom.is_empty())
    {
        if !c.numer().is_one() {
            numer.insert(0, Term::Num(BigRational::from_integer(c.numer().clone())));
        }
        denom.insert(0, Term::Num(BigRational::from_integer(c.denom().clone())));
        coefficient = None;
    }
    // A whole coefficient joins the numerator too: \frac{2 g}{d - 1}.
    if let Some(c) = coefficient
        .clone()
        .filter(|c| c.is_integer() && !c.is_one() && !denom.is_empty())
    {
        numer.insert(0, Term::Num(c));
        coefficient = None;
    }
    let alone = numer.is_empty() && denom.is_empty() && trailing.is_empty();
    if let Some(c) = coefficient.filter(|c| !c.is_one() || alone) {
        parts.push(number(&c));
    }
    let join = |fs: &[Term]| -> String {
        fs.iter()
            .map(|f| {
                let mut s = String::new();
                factor(ctx, f, &mut s);
                s
            })
            .collect::<Vec<_>>()
            .join(" \\, ")
    };
    // Inside \frac a lone sum needs no parentheses.
    let bare = |fs: &[Term]| -> String {
        match fs {
            [t @ Term::Add(_)] => {
                let mut s = String::new();
                sum(ctx, t, &mut s);
                s
            }
            fs => join(fs),
        }
    };
    match (numer.is_empty(), denom.is_empty()) {
        (_, true) => parts.push(join(&numer)),
        (true, false) => parts.push(format!("\\frac{{1}}{{{}}}", bare(&denom))),
        (false, false) => parts.push(format!("\\frac{{{}}}{{{}}}", bare(&numer), bare(&denom))),
    }
    parts.push(join(&trailing));
    let parts: Vec<String> = parts.into_iter().filter(|p| !p.is_empty()).collect();
    out.push_str(&parts.join(" \\, "));
}

/// Factors that are not plain scalars: correlators, derivatives,
/// integrals, δ-functions, and sums or powers holding them.
fn is_operator(t: &Term) -> bool {
    match t {
        Term::Corr(_) | Term::Der(..) | Term::Integral(_) | Term::DeltaFn(..) | Term::DeltaY(_) => {
            true
        }
        Term::Add(ts) | Term::Mul(ts) => ts.iter().any(is_operator),
        Term::Pow(b, _) => is_operator(b),
        _ => false,
    }
}

fn factor(ctx: &Context, t: &Term, out: &mut String) {
    if cross_ratio(ctx, t, out) {
        return;
    }
    match t {
        Term::Add(_) | Term::Mul(_) => {
            out.push_str("\\left(");
            sum(ctx, t, out);
            out.push_str("\\right)");
        }
        _ => atom(ctx, t, out),
    }
}

fn atom(ctx: &Context, t: &Term, out: &mut String) {
    match t {
        Term::Num(c) => out.push_str(&number(c)),
        Term::Sym(s) if s == crate::context::SPHERE_AREA => out.push_str("S_d"),
        Term::Sym(s) => out.push_str(&name(s)),
        Term::Pow(b, e) => {
            match **b {
                _ if cross_ratio(ctx, b, out) => {}
                // (1/4)^{Δ}, (-2)^{k}: a fraction or a sign under a power
                // needs its brackets.
                Term::Num(ref c) if !c.is_integer() || c.is_negative() => {
                    out.push_str("\\left(");
                    out.push_str(&number(c));
                    out.push_str("\\right)");
                }
                Term::Add(_) | Term::Mul(_) => {
                    out.push_str("\\left(");
                    sum(ctx, b, out);
                    out.push_str("\\right)");
                }
                _ => atom(ctx, b, out),
            }
            out.push_str("^{");
            sum(ctx, e, out);
            out.push('}');
        }
        Term::Add(_) | Term::Mul(_) => factor(ctx, t, out),
        Term::Dist(p, q) if q.is_origin() => out.push_str(&format!("|{}|", point(p))),
        Term::Dist(p, q) => out.push_str(&format!("|{} - {}|", point(p), point(q))),
        Term::Fun(f, orders, args) => {
            let hypergeometric = t.as_hyp2f1().is_some();
            if hypergeometric {
                out.push_str("{}_2F_1");
            } else {
                out.push_str(&name(f));
            }
            match &orders[..] {
                [k] | [0, 0, 0, k] if orders.len() == 1 || hypergeometric => {
                    out.push_str(&"'".repeat(*k as usize));
                }
                _ if orders.iter().any(|k| *k > 0) => {
                    let list: Vec<String> = orders.iter().map(u32::to_string).collect();
                    out.push_str(&format!("^{{({})}}", list.join(",")));
                }
                _ => {}
            }
            out.push_str("\\left(");
            for (k, a) in args.iter().enumerate() {
                if k > 0 {
                    out.push_str(if hypergeometric && k >= 2 { "; " } else { ", " });
                }
                match super::factor::cross_ratio_points(a) {
                    Some((p, q)) if ctx.has_halfspace() => {
                        out.push_str(&format!("\\xi({}, {})", wrap(&point(p)), wrap(&point(q))))
                    }
                    _ => match super::factor::chi_points(a) {
                        Some((x, s1, s2))
                            if ctx.has_halfspace()
                                && ctx.is_boundary_point(s1)
                                && ctx.is_boundary_point(s2)
                                && !ctx.is_boundary_point(x) =>
                        {
                            out.push_str(&format!(
                                "\\chi({}, {}, {})",
                                wrap(&point(x)),
                                wrap(&point(s1)),
                                wrap(&point(s2))
                            ))
                        }
                        _ => sum(ctx, a, out),
                    },
                }
            }
            out.push_str("\\right)");
        }
        Term::Comp(p, i) => out.push_str(&format!("{}_{{{}}}", wrap(&point(p)), index(i))),
        Term::Param(n, is) => out.push_str(&format!("{}_{{{}}}", name(n), indices(is))),
        Term::DeltaFn(p, q) => {
            out.push_str(&format!("\\delta^{{(d)}}({} - {})", point(p), point(q)))
        }
        Term::DeltaY(p) => out.push_str(&format!(
            "\\delta({}_{{{}}})",
            name(ctx.normal_coord()),
            point(p)
        )),
        Term::Normal(i) => out.push_str(&format!("n_{{{}}}", index(i))),
        Term::Kron(i, j) => {
            out.push_str(&format!("\\delta_{{{}}}", indices(&[i.clone(), j.clone()])))
        }
        Term::OutNormal(i) => out.push_str(&format!("N_{{{}}}", index(i))),
        Term::Integral(i) => integral(ctx, i, out),
        Term::Der(i, p, body) => {
            out.push_str(&format!("\\partial^{{({})}}_{{{}}}", point(p), index(i)));
            match **body {
                Term::Corr(_) | Term::Der(..) => atom(ctx, body, out),
                _ => {
                    out.push_str("\\left[");
                    sum(ctx, body, out);
                    out.push_str("\\right]");
                }
            }
        }
        Term::Corr(ops) => {
            out.push_str("\\langle ");
            let parts: Vec<String> = ops.iter().map(op).collect();
            out.push_str(&parts.join("\\, "));
            out.push_str(" \\rangle");
        }
    }
}

/// `\xi(p, q)` for the normal form of a cross-ratio in a half-space.
fn cross_ratio(ctx: &Context, t: &Term, out: &mut String) -> bool {
    match super::factor::cross_ratio_points(t) {
        Some((p, q)) if ctx.has_halfspace() => {
            out.push_str(&format!("\\xi({}, {})", wrap(&point(p)), wrap(&point(q))));
            true
        }
        _ => false,
    }
}

fn integral(ctx: &Context, i: &Integral, out: &mut String) {
    let var = point(&i.var);
    let (sign, domain, measure) = match (&i.region, i.surface) {
        (Region::Space, _) => ("\\int", "\\mathbb{R}^d".to_string(), format!("d^d{var}")),
        (Region::Halfspace, _) => (
            "\\int",
            format!("{} > 0", name(ctx.normal_coord())),
            format!("d^d{var}"),
        ),
        (Region::Boundary, _) => (
            "\\int",
            format!("{} = 0", name(ctx.normal_coord())),
            format!("d^{{d-1}}{var}"),
        ),
        (Region::Ball(c, r), surface) => {
            let mut radius = String::new();
            sum(ctx, r, &mut radius);
            let ball = format!("B({}, {radius})", point(c));
            if surface {
                ("\\oint", format!("\\partial {ball}"), format!("dS_{var}"))
            } else {
                ("\\int", ball, format!("d^d{var}"))
            }
        }
    };
    out.push_str(&format!("{sign}_{{{domain}}} {measure}\\, "));
    factor(ctx, &i.body, out);
}

fn op(o: &Op) -> String {
    let mut s = name(&o.name);
    if !o.indices.is_empty() {
        s.push_str(&format!("_{{{}}}", indices(&o.indices)));
    }
    format!("{s}({})", point(&o.point))
}

/// Indices written side by side; a space after a command such as `\\mu`
/// keeps `\\mu n` from reading as the undefined `\\mun`.
fn indices(is: &[Index]) -> String {
    let mut out = String::new();
    for i in is {
        let next = index(i);
        let after_command = out
            .rfind('\\')
            .is_some_and(|k| out[k + 1..].chars().all(|c| c.is_ascii_alphabetic()));
        if after_command && next.starts_with(|c: char| c.is_ascii_alphabetic()) {
            out.push(' ');
        }
        out.push_str(&next);
    }
    out
}

fn index(i: &Index) -> String {
    match i {
        Index::N => "n".into(),
        Index::Named(n) => name(n),
    }
}

fn point(p: &Point) -> String {
    let base = name(&p.name);
    if p.par {
        format!("{base}_\\parallel")
    } else {
        base
    }
}

/// A compound subscript needs braces: `x_{1}` then `_{\mu}` reads badly.
fn wrap(s: &str) -> String {
    if s.contains('_') {
        format!("{{{s}}}")
    } else {
        s.to_string()
    }
}

const GREEK: &[&str] = &[
    "alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "iota", "kappa",
    "lambda", "mu", "nu", "xi", "pi", "rho", "sigma", "tau", "upsilon", "phi", "chi", "psi",
    "omega", "Gamma", "Delta", "Theta", "Lambda", "Xi", "Pi", "Sigma", "Upsilon", "Phi", "Psi",
    "Omega",
];

/// `Delta1` → `\Delta_{1}`, `x2` → `x_{2}`, `omega` → `\omega`.
pub(crate) fn name(n: &str) -> String {
    let stem = n.trim_end_matches(|c: char| c.is_ascii_digit());
    let digits = &n[stem.len()..];
    let base = if GREEK.contains(&stem) {
        format!("\\{stem}")
    } else if stem.chars().count() > 1 && stem.is_ascii() {
        format!("\\mathrm{{{stem}}}")
    } else {
        stem.to_string()
    };
    if digits.is_empty() {
        base
    } else {
        format!("{base}_{{{digits}}}")
    }
}

fn number(c: &BigRational) -> String {
    if c.is_integer() {
        c.numer().to_string()
    } else {
        format!("\\frac{{{}}}{{{}}}", c.numer(), c.denom())
    }
}

fn split_sign(t: &Term) -> (bool, Term) {
    match t {
        Term::Num(c) if c.is_negative() => (true, Term::Num(-c)),
        Term::Mul(fs) => match fs.first() {
            Some(Term::Num(c)) if c.is_negative() => {
                let mut rest = fs.clone();
                rest[0] = Term::Num(-c);
                (true, Term::Mul(rest))
            }
            _ => (false, t.clone()),
        },
        _ => (false, t.clone()),
    }
}
