//! Fluxes of explicit functions through spheres, in closed form.
//!
//! For an explicit vector field F (distances, coordinates, parameters; no
//! correlators or δ-functions at the integration point) whose pointwise
//! divergence vanishes inside a ball B, the flux through ∂B does not depend
//! on the radius, and it is the sum over the singular points p inside B of
//! the flux through a small sphere around p (divergence theorem on B minus
//! small balls; common practice):
//!
//!   ∮_{∂B} N_i F_i = Σ_{p ∈ B} lim_{ε→0} ε^(d-1) ∫ dΩ u_i F_i(p + ε u),
//!
//! each limit taken from the expansion of F at p ([`super::local`]): the
//! negative powers of ε must average to zero over the sphere, and the
//! power zero gives the value. This is exact, whatever the local degree of
//! F: no contact-term scheme enters a surface that avoids the singular
//! points. When the divergence does not vanish, or F is singular where this
//! module cannot follow it, the caller keeps the integral as it is.

use std::collections::BTreeSet;

use num_rational::BigRational;
use num_traits::{Signed, Zero};

use super::local::{self, Local, Sphere};
use super::{calculus, collect, normalize_in, Mono, Norm};
use crate::context::Placement;
use crate::diagnostic::Result;
use crate::term::{Index, Point, Region, Term};

/// The flux of the explicit monomials `monos` (each carrying one outward
/// normal N_i) through the sphere bounding `region`, or `None` when it is
/// not found in closed form.
pub fn explicit_flux(
    cx: &Norm,
    var: &Point,
    region: &Region,
    monos: &[Mono],
) -> Result<Option<Vec<Mono>>> {
    let Region::Ball(center, _) = region else {
        return Ok(None);
    };
    if cx.is_boundary_point(center) || var.par {
        return Ok(None);
    }
    // F_i with the normal's index.
    let mut fields: Vec<(Index, Mono)> = Vec::new();
    for m in monos {
        let mut rest = m.clone();
        let Some(k) = rest
            .factors
            .iter()
            .position(|f| matches!(f, Term::OutNormal(_)))
        else {
            return Ok(None);
        };
        let Term::OutNormal(i) = rest.factors.remove(k) else {
            return Ok(None);
        };
        if !explicit(&rest, var) {
            return Ok(None);
        }
        fields.push((i, rest));
    }
    // The divergence must vanish away from the singular points.
    let mut divergence = Vec::new();
    for (i, f) in &fields {
        divergence.extend(calculus::differentiate(cx, i, var, f.clone())?);
    }
    if !normalize_in(cx, &collect(divergence))?.is_zero() {
        return Ok(None);
    }
    // Where F is singular: interior points only, unless the ball is clear
    // of the wall.
    let mut points: BTreeSet<Point> = BTreeSet::new();
    for (_, f) in &fields {
        for (atom, e) in &f.atoms {
            if !atom.mentions_point(var) {
                continue;
            }
            match singular_point(cx, var, atom, e) {
                Some(Some(p)) => {
                    points.insert(p);
                }
                Some(None) => {}
                None if super::integrate::clear_of_wall(cx, region)
                    && on_wall_only(cx, var, atom) => {}
                None => return Ok(None),
            }
        }
    }
    let sphere = Sphere::bulk(cx);
    let mut weighted = Vec::new();
    for (i, f) in &fields {
        for u in sphere.component(cx, i)? {
            weighted.push(f.mul(&u));
        }
    }
    let mut total = Vec::new();
    for p in points {
        match super::integrate::membership(cx, &p, region) {
            Some(Placement::Outside) => continue,
            Some(Placement::Inside) => {}
            Some(Placement::OnSurface) | None => return Ok(None),
        }
        let Local::Orders(orders) =
            local::expand_at(cx, &sphere, &weighted, var, &p, &BigRational::zero())?
        else {
            return Ok(None);
        };
        for (power, terms) in orders {
            let average = local::sphere_integral(cx, &sphere, &terms)?;
            if power.is_negative() {
                if !normalize_in(cx, &collect(average))?.is_zero() {
                    return Ok(None);
                }
            } else if power.is_zero() {
                total.extend(average);
            }
        }
    }
    Ok(Some(total))
}

/// True if the only dependence on `var` is through explicit functions.
pub fn explicit(m: &Mono, var: &Point) -> bool {
    m.factors
        .iter()
        .all(|f| !f.mentions_point(var) || matches!(f, Term::Comp(..)))
        && m.atoms
            .keys()
            .all(|a| !a.mentions_point(var) || !matches!(a, Term::Fun(..)))
}

/// The point where an atom of F is singular: `Some(Some(p))` for an
/// interior point p, `Some(None)` when it is smooth, `None` when it is
/// singular on the wall or where this module cannot tell.
fn singular_point(cx: &Norm, var: &Point, atom: &Term, e: &BigRational) -> Option<Option<Point>> {
    let dist = match atom {
        Term::Dist(..) => Some(atom),
        Term::Pow(base, _) if matches!(**base, Term::Dist(..)) => Some(&**base),
        _ => None,
    };
    if let Some(Term::Dist(a, b)) = dist {
        let polynomial = matches!(atom, Term::Dist(..))
            && e.is_integer()
            && !e.is_negative()
            && (e.to_integer() % 2u32).is_zero();
        if polynomial {
            return Some(None);
        }
        let other = if a.name == var.name { b } else { a };
        let mine = if a.name == var.name { a } else { b };
        if other.is_origin() {
            return None;
        }
        if mine.par || other.par || other.name == var.name || cx.is_boundary_point(other) {
            return None;
        }
        return Some(Some(other.clone()));
    }
    match atom {
        Term::Comp(..) if e.is_integer() && !e.is_negative() => Some(None),
        Term::Pow(base, _) if super::positive(cx, base) => Some(None),
        Term::Add(_) | Term::Mul(_) if super::positive(cx, atom) => Some(None),
        _ => None,
    }
}

/// True for an atom singular only on the wall (a power of the height).
fn on_wall_only(cx: &Norm, var: &Point, atom: &Term) -> bool {
    match atom {
        Term::Comp(p, Index::N) => p.name == var.name,
        Term::Dist(a, b) => {
            let other = if a.name == var.name { b } else { a };
            other.par || cx.is_boundary_point(other) || other.name == var.name
        }
        _ => false,
    }
}
