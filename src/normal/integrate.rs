//! Integrals on trees: the divergence theorem for surface integrals, δ
//! sifting for bulk δ(x - p) and boundary δ(y(x)), and linearity.
//!
//! ∮_{∂B} N_i F_i becomes ∫_B ∂_i F_i (divergence theorem, outward N), so a
//! surface integral of T against a Killing vector turns into the local Ward
//! identities. ∫_B δ(x - p) f(x) = f(p) when p is inside B and 0 when it is
//! outside; a point on the surface of B, or one whose position the file
//! does not state, is an error. ∫ over the half-space of δ(y(x)) g(x) is the
//! integral of g over the boundary plane, with x replaced by its projection
//! x∥ (the half-space is closed: T is extended by zero below the wall).
//! A derivative of δ at the integration point is moved onto the rest of
//! the integrand by parts; its surface term vanishes with the δ.

use num_rational::BigRational;
use num_traits::{One, Zero};

use super::{collect, expand, monomial::Atoms, normalize_in, Mono, Norm};
use crate::context::Placement;
use crate::diagnostic::{Error, ErrorKind, Result};
use crate::term::{Integral, Point, Region, Term};

/// Expands an integral into monomials.
pub fn integral(ctx: &Norm, i: &Integral) -> Result<Vec<Mono>> {
    let region = match &i.region {
        Region::Ball(c, r) => Region::Ball(c.clone(), normalize_in(ctx, r)?),
        r => r.clone(),
    };
    let mut out = Vec::new();
    let mut monos = expand(ctx, &i.body)?;
    // Around a boundary point the surface is the hemisphere above the wall.
    // Where T stands at the integration point, the integrand is extended by
    // zero below the wall (the convention of the half-space rules), so the
    // flux through the hemisphere is the flux through the whole sphere and
    // the divergence theorem on the whole ball holds: its δ(y) term becomes
    // an integral over the disc on the wall. Any other integrand (explicit
    // functions, correlators without T there) does not vanish below the
    // wall; its hemisphere flux is left as it is, for numeric work.
    if let (true, Region::Ball(center, _)) = (i.surface, &region) {
        if ctx.is_boundary_point(center) && !monos.iter().all(|m| stress_tensor_at(m, &i.var)) {
            return Ok(vec![Mono::factor(Term::Integral(Box::new(Integral {
                var: i.var.clone(),
                region,
                surface: true,
                body: super::normalize_in(ctx, &i.body)?,
            })))]);
        }
    }
    if i.surface {
        // The explicit part of a flux, in closed form when it can be.
        let (explicit, rest): (Vec<Mono>, Vec<Mono>) =
            monos.into_iter().partition(|m| is_explicit_flux(m, &i.var));
        monos = rest;
        // All of it at once: the divergence may vanish only in the sum.
        if !explicit.is_empty() {
            match super::flux::explicit_flux(ctx, &i.var, &region, &explicit)? {
                Some(value) => out.extend(value),
                None => monos.extend(explicit),
            }
        }
    }
    for m in monos {
        if i.surface {
            out.extend(surface(ctx, &i.var, &region, m)?);
        } else {
            out.extend(volume(ctx, &i.var, &region, m)?);
        }
    }
    Ok(out)
}

/// True if a correlator of the monomial has T at the integration point, so
/// that the monomial vanishes below the wall.
fn stress_tensor_at(m: &Mono, var: &Point) -> bool {
    m.factors.iter().any(|f| match f {
        Term::Corr(ops) => ops
            .iter()
            .any(|o| o.name == crate::context::STRESS_TENSOR && is_var(&o.point, var)),
        _ => false,
    })
}

/// A monomial of a flux whose dependence on the integration point is
/// explicit: one outward normal, and explicit functions.
fn is_explicit_flux(m: &Mono, var: &Point) -> bool {
    m.factors
        .iter()
        .filter(|f| matches!(f, Term::OutNormal(_)))
        .count()
        == 1
        && super::flux::explicit(
            &Mono {
                factors: m
                    .factors
                    .iter()
                    .filter(|f| !matches!(f, Term::OutNormal(_)))
                    .cloned()
                    .collect(),
                ..m.clone()
            },
            var,
        )
}

/// One monomial of a surface integral: N[i] F → ∫ ∂[i] F.
fn surface(ctx: &Norm, var: &Point, region: &Region, m: Mono) -> Result<Vec<Mono>> {
    let normals: Vec<usize> = (0..m.factors.len())
        .filter(|k| matches!(m.factors[*k], Term::OutNormal(_)))
        .collect();
    let [k] = normals[..] else {
        // Not a flux: keep the surface integral as it is.
        let (outside, inside) = split(var, m);
        return Ok(vec![outside.mul(&Mono::factor(Term::Integral(Box::new(
            Integral {
                var: var.clone(),
                region: region.clone(),
                surface: true,
                body: collect(vec![inside]),
            },
        ))))]);
    };
    let mut rest = m;
    let Term::OutNormal(index) = rest.factors.remove(k) else {
        return Ok(vec![]);
    };
    let flux = Term::Der(index, var.clone(), Box::new(collect(vec![rest])));
    let mut out = Vec::new();
    for d in expand(ctx, &flux)? {
        out.extend(volume(ctx, var, region, d)?);
    }
    Ok(out)
}

/// One monomial of a volume (or boundary-plane) integral.
fn volume(ctx: &Norm, var: &Point, region: &Region, m: Mono) -> Result<Vec<Mono>> {
    let (outside, inside) = split(var, m);
    // f ∂_i δ(x - p): integrate by parts. The surface term f δ N_i vanishes
    // because δ does on the surface (a δ on the surface is refused below),
    // leaving -(∂_i f) δ(x - p).
    let moved = inside.factors.iter().position(|f| match f {
        Term::Der(_, p, body) => is_var(p, var) && matches!(**body, Term::DeltaFn(..)),
        _ => false,
    });
    if let Some(k) = moved {
        let mut rest = inside.clone();
        let Term::Der(i, _, delta) = rest.factors.remove(k) else {
            return Ok(vec![]);
        };
        let by_parts = Term::Mul(vec![
            Term::int(-1),
            Term::Der(i, var.clone(), Box::new(collect(vec![rest]))),
            *delta,
        ]);
        let mut out = Vec::new();
        for m in expand(ctx, &by_parts)? {
            for r in volume(ctx, var, region, m)? {
                out.push(outside.mul(&r));
            }
        }
        return Ok(out);
    }
    // δ(x - p): sift.
    let delta = inside.factors.iter().position(|f| match f {
        Term::DeltaFn(a, b) => is_var(a, var) || is_var(b, var),
        _ => false,
    });
    if let Some(k) = delta {
        let mut rest = inside.clone();
        let Term::DeltaFn(a, b) = rest.factors.remove(k) else {
            return Ok(vec![]);
        };
        let target = if is_var(&a, var) { b } else { a };
        return match membership(ctx, &target, region) {
            None => Err(undecided(&target, region)),
            Some(Placement::Inside) => {
                let sifted = substitute(ctx, &collect(vec![rest]), var, &target);
                if let Some((a, b)) = coincident_insertions(&sifted) {
                    return Err(Error::new(
                        ErrorKind::Placement,
                        format!(
                            "sifting δ({} - {}) puts `{a}` at `{}`, where `{b}` is inserted: \
                             a product of operators at one point is not defined",
                            var.name, target.name, target.name
                        ),
                    )
                    .with_note("the local Ward rules turn T next to its δ-function into contact terms; write the identity through them"));
                }
                Ok(expand(ctx, &sifted)?.iter().map(|m| outside.mul(m)).collect())
            }
            Some(Placement::Outside) => Ok(vec![]),
            Some(Placement::OnSurface) => Err(Error::new(
                ErrorKind::Placement,
                format!(
                    "`{}` lies on the surface of the region of integration, where the weight of δ({} - {}) is not defined",
                    target.name, var.name, target.name
                ),
            )
            .with_note("move the point off the surface, or integrate over a slightly larger or smaller region")),
        };
    }
    // δ(y(x)) over the half-space: an integral over the boundary plane.
    let wall = inside
        .factors
        .iter()
        .position(|f| matches!(f, Term::DeltaY(a) if is_var(a, var)));
    // A ball clear of the wall: δ(y(x)) vanishes on it.
    if wall.is_some() && clear_of_wall(ctx, region) {
        return Ok(vec![]);
    }
    // δ(y(x)) over the half-space leaves the boundary plane; over a ball
    // around a boundary point, the disc of the ball on the wall. Either
    // way x becomes x∥.
    let wall_region = match region {
        Region::Halfspace | Region::Space => Some(Region::Boundary),
        Region::Ball(center, _) if ctx.is_boundary_point(center) && !var.par => {
            Some(region.clone())
        }
        _ => None,
    };
    if let (Some(k), Some(wall_region)) = (wall, wall_region) {
        let mut rest = inside.clone();
        rest.factors.remove(k);
        let projected = Point {
            par: true,
            ..var.clone()
        };
        let body = substitute(ctx, &collect(vec![rest]), var, &projected);
        let mut out = Vec::new();
        for m in expand(ctx, &body)? {
            for r in volume(ctx, &projected, &wall_region, m)? {
                out.push(outside.mul(&r));
            }
        }
        return Ok(out);
    }
    // The body's own index algebra (x[n] δ(y(x)) = 0, contractions) first:
    // it may leave nothing to integrate.
    let mut out = Vec::new();
    for body in super::contract::contract(ctx, inside)? {
        if body.coef.is_zero() {
            continue;
        }
        let (factor, body) = split(var, body);
        out.push(
            outside
                .mul(&factor)
                .mul(&Mono::factor(Term::Integral(Box::new(Integral {
                    var: var.clone(),
                    region: region.clone(),
                    surface: false,
                    body: collect(vec![body]),
                })))),
        );
    }
    Ok(out)
}

/// True if a ball lies inside the open half-space: declared so, or its
/// centre placed at numeric coordinates higher than a numeric radius.
pub(super) fn clear_of_wall(ctx: &Norm, region: &Region) -> bool {
    let Region::Ball(center, radius) = region else {
        return false;
    };
    if !ctx.has_halfspace() || ctx.is_boundary_point(center) {
        return false;
    }
    let declared = ctx.balls_inside.iter().any(|b| match b {
        Region::Ball(c, r) => {
            c.name == center.name && normalize_in(ctx, r).ok().as_ref() == Some(radius)
        }
        _ => false,
    });
    let measured = match (ctx.positions.get(&*center.name), radius) {
        (Some(at), Term::Num(r)) => at.last().is_some_and(|y| y > r),
        _ => false,
    };
    declared || measured
}

/// Splits a monomial into the part that does not depend on the integration
/// point (with the coefficient) and the part that does.
fn split(var: &Point, m: Mono) -> (Mono, Mono) {
    let mut outside = Mono::scalar(m.coef);
    let mut inside = Mono::scalar(num_rational::BigRational::one());
    let (mut out_atoms, mut in_atoms) = (Atoms::new(), Atoms::new());
    for (a, e) in m.atoms {
        if a.mentions_point(var) {
            in_atoms.insert(a, e);
        } else {
            out_atoms.insert(a, e);
        }
    }
    outside.atoms = out_atoms;
    inside.atoms = in_atoms;
    for f in m.factors {
        // The outward normal belongs to the surface being integrated over.
        if f.mentions_point(var) || matches!(f, Term::OutNormal(_)) {
            inside.factors.push(f);
        } else {
            outside.factors.push(f);
        }
    }
    (outside, inside)
}

fn is_var(p: &Point, var: &Point) -> bool {
    p.name == var.name && p.par == var.par
}

/// Where a point lies with respect to a region, if the file says so.
pub(super) fn membership(ctx: &Norm, p: &Point, region: &Region) -> Option<Placement> {
    match region {
        Region::Space | Region::Halfspace => Some(Placement::Inside),
        Region::Boundary => Some(if ctx.is_boundary_point(p) {
            Placement::Inside
        } else {
            Placement::Outside
        }),
        Region::Ball(center, _) if center.name == p.name && !p.par => Some(Placement::Inside),
        Region::Ball(..) => placement(ctx, p, region),
    }
}

/// The declared placement of `p` in a ball, comparing radii in normal form;
/// failing that, the placement from numeric positions and a numeric radius,
/// decided exactly.
fn placement(ctx: &Norm, p: &Point, region: &Region) -> Option<Placement> {
    declared(ctx, p, region).or_else(|| measured(ctx, p, region))
}

fn measured(ctx: &Norm, p: &Point, region: &Region) -> Option<Placement> {
    let Region::Ball(center, Term::Num(radius)) = region else {
        return None;
    };
    let a = ctx.positions.get(&*p.name)?;
    let b = ctx.positions.get(&*center.name)?;
    let squared: BigRational = a.iter().zip(b).map(|(u, v)| (u - v) * (u - v)).sum();
    let r2 = radius * radius;
    Some(match squared.cmp(&r2) {
        std::cmp::Ordering::Less => Placement::Inside,
        std::cmp::Ordering::Equal => Placement::OnSurface,
        std::cmp::Ordering::Greater => Placement::Outside,
    })
}

fn declared(ctx: &Norm, p: &Point, region: &Region) -> Option<Placement> {
    let Region::Ball(center, radius) = region else {
        return None;
    };
    ctx.placements.iter().find_map(|(name, r, place)| match r {
        Region::Ball(c, rr)
            if **name == *p.name
                && c.name == center.name
                && normalize_in(ctx, rr).ok().as_ref() == Some(radius) =>
        {
            Some(*place)
        }
        _ => None,
    })
}

fn undecided(point: &Point, region: &Region) -> Error {
    let center = match region {
        Region::Ball(c, _) => &*c.name,
        _ => "?",
    };
    let name = &point.name;
    Error::new(
        ErrorKind::Placement,
        format!("cannot tell whether `{name}` lies inside the ball around `{center}`"),
    )
    .with_note(format!(
        "state it: `place {name} inside ball({center}, r)` or `place {name} outside ball({center}, r)`, \
         or give numeric positions (`place {name} at (…)`, `place {center} at (…)`) and a numeric radius"
    ))
}

/// Two insertions of one correlator at the same point, by name.
fn coincident_insertions(t: &Term) -> Option<(String, String)> {
    match t {
        Term::Corr(ops) => ops.iter().enumerate().find_map(|(k, a)| {
            ops[k + 1..]
                .iter()
                .find(|b| b.point == a.point)
                .map(|b| (a.name.clone(), b.name.clone()))
        }),
        Term::Mul(ts) | Term::Add(ts) => ts.iter().find_map(coincident_insertions),
        Term::Der(_, _, body) => coincident_insertions(body),
        Term::Pow(a, b) => coincident_insertions(a).or_else(|| coincident_insertions(b)),
        Term::Integral(i) => coincident_insertions(&i.body),
        _ => None,
    }
}

/// Replaces the integration point `var` by `to` everywhere in `t`.
pub fn substitute(ctx: &Norm, t: &Term, var: &Point, to: &Point) -> Term {
    let point = |p: &Point| -> Point {
        if p.name != var.name {
            return p.clone();
        }
        if p.par && !ctx.is_boundary_point(to) {
            // The projection of the new point (itself if it is on the wall).
            Point {
                par: true,
                ..to.clone()
            }
        } else {
            to.clone()
        }
    };
    t.map(&point, &|i| i.clone(), Some(&var.name))
}
