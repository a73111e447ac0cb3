//! Writes terms in the surface syntax, so that printed output parses back to
//! the same expression.
//!
//! Two styles: Unicode (∂, δ, ⟨ ⟩, x∥) and plain ASCII (del, delta, < >,
//! par(x)). Both are valid input.

use num_rational::BigRational;
use num_traits::{One, Signed, Zero};

use super::{Index, Integral, Op, Point, Region, Term};
use crate::context::Context;

/// Which characters the printer uses.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Style {
    #[default]
    Unicode,
    Ascii,
    /// LaTeX for papers (output only; see `term::latex`).
    Latex,
}

/// Prints terms in one style, with the file's declarations at hand (for the
/// name of the normal coordinate).
pub struct Printer<'a> {
    pub ctx: &'a Context,
    pub style: Style,
}

impl<'a> Printer<'a> {
    pub fn new(ctx: &'a Context, style: Style) -> Printer<'a> {
        Printer { ctx, style }
    }

    pub fn term(&self, t: &Term) -> String {
        if self.style == Style::Latex {
            return super::latex::latex(self.ctx, t);
        }
        let mut out = String::new();
        self.sum(t, &mut out);
        out
    }

    /// The terms of a top-level sum, each with its sign (`- X`, `+ X`; the
    /// first without `+`), for printing one term per line.
    pub fn terms(&self, t: &Term) -> Vec<String> {
        if self.style == Style::Latex {
            return vec![super::latex::latex(self.ctx, t)];
        }
        let terms: Vec<&Term> = match t {
            Term::Add(ts) if !ts.is_empty() => ts.iter().collect(),
            _ => vec![t],
        };
        terms
            .iter()
            .enumerate()
            .map(|(i, term)| {
                let (negative, magnitude) = split_sign(&self.display(term));
                let mut out = String::from(match (i, negative) {
                    (_, true) => "- ",
                    (0, false) => "",
                    (_, false) => "+ ",
                });
                match &magnitude {
                    Term::Add(_) if !negative => self.sum(&magnitude, &mut out),
                    _ => self.product(&magnitude, &mut out),
                }
                out
            })
            .collect()
    }

    /// A term of a sum as it is shown: coefficients factored, written
    /// cross-ratios taken back out of their expansion.
    fn display(&self, term: &Term) -> Term {
        super::factor::with_cross_ratios(&super::factor::factored(term), &self.ctx.cross_ratios)
    }

    /// `xi(p, q)` for the normal form of a cross-ratio.
    fn cross_ratio(&self, t: &Term, out: &mut String) -> bool {
        let Some((p, q)) = super::factor::cross_ratio_points(t) else {
            return false;
        };
        out.push_str("xi");
        out.push('(');
        self.point(p, out);
        out.push_str(", ");
        self.point(q, out);
        out.push(')');
        true
    }

    fn unicode(&self) -> bool {
        self.style == Style::Unicode
    }

    /// A sum: the first term carries its sign as `- `, the others ` + `/` - `.
    fn sum(&self, t: &Term, out: &mut String) {
        let terms: Vec<&Term> = match t {
            Term::Add(ts) if !ts.is_empty() => ts.iter().collect(),
            _ => vec![t],
        };
        for (i, term) in terms.iter().enumerate() {
            let (negative, magnitude) = split_sign(&self.display(term));
            match (i, negative) {
                (0, true) => out.push_str("- "),
                (0, false) => {}
                (_, true) => out.push_str(" - "),
                (_, false) => out.push_str(" + "),
            }
            // A displayed polynomial (`d^2 - 3 d + 1`) needs no brackets
            // unless a sign stands before it.
            match &magnitude {
                Term::Add(_) if !negative => self.sum(&magnitude, out),
                _ => self.product(&magnitude, out),
            }
        }
    }

    /// A product without a leading sign. Scalar factors come first, with
    /// negative powers written as one denominator (`3 g/(7 (d + 2))`), then
    /// δ-functions, tensors and correlators.
    fn product(&self, t: &Term, out: &mut String) {
        let single;
        let fs = match t {
            Term::Mul(fs) => fs,
            // A lone negative power prints as a fraction too: `1/(g + 1)^2`.
            Term::Pow(_, e) if matches!(**e, Term::Num(ref q) if q.is_negative()) => {
                single = [t.clone()];
                &single[..]
            }
            _ => return self.factor(t, out),
        };
        let mut numer: Vec<Term> = Vec::new();
        let mut denom: Vec<Term> = Vec::new();
        let mut rest: Vec<&Term> = Vec::new();
        for f in fs {
            match f {
                // A negative power goes below the line, one `/` each; a sum
                // only with power -1, since `/(a + b)^2` reads back as the
                // inverse of the expanded square.
                Term::Pow(b, e)
                    if matches!(**e, Term::Num(ref q) if q.is_negative()
                        && (!matches!(**b, Term::Add(_) | Term::Mul(_))
                            || *q == -BigRational::one()
                            || super::factor::is_univariate(b))) =>
                {
                    let Term::Num(q) = &**e else { continue };
                    let q = -q;
                    denom.push(if q.is_one() {
                        (**b).clone()
                    } else {
                        Term::Pow(b.clone(), Box::new(Term::Num(q)))
                    });
                }
                Term::Num(_)
                | Term::Sym(_)
                | Term::Pow(..)
                | Term::Add(_)
                | Term::Mul(_)
                | Term::Dist(..)
                | Term::Fun(..)
                | Term::Comp(..)
                | Term::Param(..) => numer.push(f.clone()),
                _ => rest.push(f),
            }
        }
        // `d/2` and `3 g/20`, not `1/2 d` and `3/20 g`.
        if denom.is_empty() && numer.len() > 1 {
            if let Some(Term::Num(c)) = numer.first() {
                if !c.is_integer() {
                    let (p, q) = (c.numer().clone(), c.denom().clone());
                    denom.push(Term::Num(BigRational::from_integer(q)));
                    if p.is_one() {
                        numer.remove(0);
                    } else {
                        numer[0] = Term::Num(BigRational::from_integer(p));
                    }
                }
            }
        }
        if !denom.is_empty() {
            // `1/(2 y)`, not `1/2/y`: the denominator of a fraction joins
            // the others below the line.
            if let Some(Term::Num(c)) = numer.first() {
                if !c.is_integer() {
                    let (p, q) = (c.numer().clone(), c.denom().clone());
                    numer[0] = Term::Num(BigRational::from_integer(p));
                    denom.insert(0, Term::Num(BigRational::from_integer(q)));
                }
            }
            // A power of a sum shares the line only with nothing: read back,
            // `1/(2 (d - 1)^2)` would expand the square, so it stays above
            // as `(d - 1)^(-2)` when anything else is below.
            if denom.len() > 1 && !one_symbol_sums(&denom) {
                let (powers, others): (Vec<Term>, Vec<Term>) = denom
                    .into_iter()
                    .partition(|f| matches!(f, Term::Pow(b, _) if matches!(**b, Term::Add(_))));
                denom = others;
                for p in powers {
                    if let Term::Pow(b, e) = p {
                        if let Term::Num(q) = *e {
                            numer.push(Term::Pow(b, Box::new(Term::Num(-q))));
                        }
                    }
                }
            }
            // `|x|^2/4`, not `1 |x|^2/4`.
            if numer.len() > 1 && matches!(numer.first(), Some(Term::Num(c)) if c.is_one()) {
                numer.remove(0);
            }
            if numer.is_empty() {
                numer.push(Term::one());
            }
        }
        let mut first = true;
        let mut sep = |out: &mut String| {
            if !std::mem::take(&mut first) {
                out.push(' ');
            }
        };
        for f in &numer {
            sep(out);
            self.factor(f, out);
        }
        // One `/`: a product below the line is bracketed, `/(2 g y^2)`,
        // `/(2 (g + 1))`; but not one with two sums, which would read back
        // as the inverse of the expanded product: `/(g + 1)/(g - 1)` stays
        // a chain.
        let sums = denom
            .iter()
            .filter(|f| {
                matches!(f, Term::Add(_))
                    || matches!(f, Term::Pow(b, _) if matches!(**b, Term::Add(_)))
            })
            .count();
        match denom.len() {
            0 => {}
            _ if denom.len() == 1 || (sums > 1 && !one_symbol_sums(&denom)) => {
                for f in &denom {
                    out.push('/');
                    self.factor(f, out);
                }
            }
            _ => {
                out.push_str("/(");
                for (k, f) in denom.iter().enumerate() {
                    if k > 0 {
                        out.push(' ');
                    }
                    self.factor(f, out);
                }
                out.push(')');
            }
        }
        for f in rest {
            sep(out);
            self.factor(f, out);
        }
    }

    /// One factor of a product: sums and negative numbers get parentheses.
    fn factor(&self, t: &Term, out: &mut String) {
        if self.cross_ratio(t, out) {
            return;
        }
        match t {
            Term::Add(_) | Term::Mul(_) => {
                out.push('(');
                self.sum(t, out);
                out.push(')');
            }
            Term::Num(c) if c.is_negative() => {
                out.push('(');
                out.push_str(&number(c));
                out.push(')');
            }
            _ => self.atom(t, out),
        }
    }

    fn atom(&self, t: &Term, out: &mut String) {
        match t {
            Term::Num(c) => out.push_str(&number(c)),
            Term::Sym(s) => out.push_str(s),
            Term::Pow(b, e) => {
                match **b {
                    _ if super::factor::cross_ratio_points(b).is_some() => self.factor(b, out),
                    Term::Sym(_)
                    | Term::Dist(..)
                    | Term::Fun(..)
                    | Term::Comp(..)
                    | Term::Param(..) => self.atom(b, out),
                    Term::Num(ref c) if !c.is_negative() && c.is_integer() => self.atom(b, out),
                    _ => {
                        out.push('(');
                        self.sum(b, out);
                        out.push(')');
                    }
                }
                out.push('^');
                match **e {
                    Term::Num(ref c) if !c.is_negative() && c.is_integer() => self.atom(e, out),
                    Term::Num(ref c) => {
                        out.push('(');
                        out.push_str(&number(c));
                        out.push(')');
                    }
                    _ => {
                        out.push('(');
                        self.sum(e, out);
                        out.push(')');
                    }
                }
            }
            Term::Add(_) | Term::Mul(_) => self.factor(t, out),
            Term::Dist(p, q) => {
                out.push('|');
                self.point(p, out);
                if !q.is_origin() {
                    out.push_str(" - ");
                    self.point(q, out);
                }
                out.push('|');
            }
            Term::Fun(name, orders, args) => {
                let hypergeometric = t.as_hyp2f1().is_some();
                if hypergeometric && !self.unicode() {
                    out.push_str(super::HYP2F1_ASCII);
                } else {
                    out.push_str(name);
                }
                match &orders[..] {
                    // F'(u), ₂F₁'(a, b; c; z): primes count derivatives in
                    // the one variable.
                    [k] | [0, 0, 0, k] if orders.len() == 1 || hypergeometric => {
                        out.push_str(&"'".repeat(*k as usize));
                    }
                    // F[1,0](u, v): derivatives by argument.
                    _ if orders.iter().any(|k| *k > 0) => {
                        let list: Vec<String> = orders.iter().map(u32::to_string).collect();
                        out.push('[');
                        out.push_str(&list.join(","));
                        out.push(']');
                    }
                    _ => {}
                }
                out.push('(');
                for (k, a) in args.iter().enumerate() {
                    if k > 0 {
                        // ₂F₁(a, b; c; z)
                        out.push_str(if hypergeometric && k >= 2 { "; " } else { ", " });
                    }
                    match super::factor::cross_ratio_points(a) {
                        Some((p, q)) if self.ctx.has_halfspace() => {
                            out.push_str("xi(");
                            self.point(p, out);
                            out.push_str(", ");
                            self.point(q, out);
                            out.push(')');
                        }
                        _ => match super::factor::chi_points(a) {
                            Some((x, s1, s2))
                                if self.ctx.has_halfspace()
                                    && self.ctx.is_boundary_point(s1)
                                    && self.ctx.is_boundary_point(s2)
                                    && !self.ctx.is_boundary_point(x) =>
                            {
                                out.push_str("chi(");
                                self.point(x, out);
                                out.push_str(", ");
                                self.point(s1, out);
                                out.push_str(", ");
                                self.point(s2, out);
                                out.push(')');
                            }
                            _ => self.sum(a, out),
                        },
                    }
                }
                out.push(')');
            }
            Term::Comp(p, i) => {
                self.point(p, out);
                out.push('[');
                out.push_str(&index(i));
                out.push(']');
            }
            Term::Param(name, indices) => {
                out.push_str(name);
                out.push('[');
                let names: Vec<String> = indices.iter().map(index).collect();
                out.push_str(&names.join(","));
                out.push(']');
            }
            Term::OutNormal(i) => {
                out.push_str("N[");
                out.push_str(&index(i));
                out.push(']');
            }
            Term::Integral(integral) => self.integral(integral, out),
            Term::DeltaFn(p, q) => {
                out.push_str(if self.unicode() { "δ(" } else { "delta(" });
                self.point(p, out);
                out.push_str(" - ");
                self.point(q, out);
                out.push(')');
            }
            Term::DeltaY(p) => {
                out.push_str(if self.unicode() { "δ(" } else { "delta(" });
                out.push_str(self.ctx.normal_coord());
                out.push('(');
                self.point(p, out);
                out.push_str("))");
            }
            Term::Normal(i) => {
                out.push_str("n[");
                out.push_str(&index(i));
                out.push(']');
            }
            Term::Kron(i, j) => {
                out.push_str(if self.unicode() { "δ[" } else { "delta[" });
                out.push_str(&index(i));
                out.push(',');
                out.push_str(&index(j));
                out.push(']');
            }
            Term::Der(i, p, body) => {
                out.push_str(if self.unicode() { "∂[" } else { "del[" });
                out.push_str(&index(i));
                out.push_str("](");
                self.point(p, out);
                out.push_str(") ");
                match **body {
                    Term::Corr(_) | Term::Der(..) => self.atom(body, out),
                    _ => {
                        out.push_str("{ ");
                        self.sum(body, out);
                        out.push_str(" }");
                    }
                }
            }
            Term::Corr(ops) => {
                out.push_str(if self.unicode() { "⟨" } else { "<" });
                for (k, op) in ops.iter().enumerate() {
                    if k > 0 {
                        out.push(' ');
                    }
                    self.op(op, out);
                }
                out.push_str(if self.unicode() { "⟩" } else { ">" });
            }
        }
    }

    fn integral(&self, i: &Integral, out: &mut String) {
        out.push_str(match (i.surface, self.style) {
            (false, Style::Unicode) => "∫[",
            (false, Style::Ascii | Style::Latex) => "int[",
            (true, Style::Unicode) => "∮[",
            (true, Style::Ascii | Style::Latex) => "oint[",
        });
        self.point(&i.var, out);
        out.push_str(if i.surface { " on " } else { " in " });
        match &i.region {
            Region::Space => out.push_str("space"),
            Region::Halfspace => out.push_str("halfspace"),
            Region::Boundary => out.push_str("boundary"),
            Region::Ball(c, r) => {
                out.push_str("ball(");
                self.point(c, out);
                out.push_str(", ");
                self.sum(r, out);
                out.push(')');
            }
        }
        out.push_str("] { ");
        self.sum(&i.body, out);
        out.push_str(" }");
    }

    fn op(&self, op: &Op, out: &mut String) {
        out.push_str(&op.name);
        if !op.indices.is_empty() {
            out.push('[');
            let names: Vec<String> = op.indices.iter().map(index).collect();
            out.push_str(&names.join(","));
            out.push(']');
        }
        out.push('(');
        self.point(&op.point, out);
        out.push(')');
    }

    fn point(&self, p: &Point, out: &mut String) {
        match (p.par, self.style) {
            (false, _) => out.push_str(&p.name),
            (true, Style::Unicode) => {
                out.push_str(&p.name);
                out.push('∥');
            }
            (true, Style::Ascii | Style::Latex) => {
                out.push_str("par(");
                out.push_str(&p.name);
                out.push(')');
            }
        }
    }
}

/// Splits a leading negative coefficient off a product.
/// True when every sum below the line (or base of a power there) is a
/// polynomial in one and the same symbol: such a denominator reads back as
/// written, because the normaliser factors a negative power of a
/// polynomial in one symbol into its linear factors, so `/((g - 1) (g +
/// 1)^2)` may share one bracket. Sums in several symbols would read back as
/// the inverse of their expanded product.
fn one_symbol_sums(denom: &[Term]) -> bool {
    let mut symbol: Option<String> = None;
    for f in denom {
        let base = match f {
            Term::Pow(b, _) => &**b,
            other => other,
        };
        if !matches!(base, Term::Add(_)) {
            continue;
        }
        let Some(s) = super::factor::univariate_symbol(base) else {
            return false;
        };
        if symbol.get_or_insert_with(|| s.clone()) != &s {
            return false;
        }
    }
    true
}

fn split_sign(t: &Term) -> (bool, Term) {
    match t {
        Term::Num(c) if c.is_negative() => (true, Term::Num(-c)),
        Term::Mul(fs) => match fs.first() {
            Some(Term::Num(c)) if c.is_negative() => {
                let c = -c;
                let mut rest: Vec<Term> = Vec::with_capacity(fs.len());
                if !c.is_one() || fs.len() == 1 {
                    rest.push(Term::Num(c));
                }
                rest.extend(fs[1..].iter().cloned());
                (true, unwrap_product(rest))
            }
            _ => (false, t.clone()),
        },
        _ => (false, t.clone()),
    }
}

fn unwrap_product(mut fs: Vec<Term>) -> Term {
    if fs.len() == 1 {
        fs.pop().unwrap_or_else(Term::one)
    } else {
        Term::Mul(fs)
    }
}

fn number(c: &BigRational) -> String {
    if c.is_integer() {
        c.numer().to_string()
    } else if c.is_zero() {
        "0".into()
    } else {
        format!("{}/{}", c.numer(), c.denom())
    }
}

fn index(i: &Index) -> String {
    match i {
        Index::N => "n".to_string(),
        Index::Named(s) => s.clone(),
    }
}
