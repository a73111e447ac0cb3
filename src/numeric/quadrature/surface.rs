//! The surfaces a Ward identity is integrated over, as product rules: a
//! sphere S^{d-1}, the hemisphere y > 0 of a sphere centred on the boundary,
//! the disc closing it, the two together, and the boundary plane R^{d-1}.
//!
//! Every surface is a union of patches, and every patch is one variable
//! along an axis times a unit sphere S^{d-2} across it: the polar variable
//! t = cos θ of a sphere (Gauss–Jacobi, absorbing (1 - t²)^{(d-3)/2}), the
//! radius of a disc (absorbing ρ^{d-2}), or the angle θ of ρ = a tan θ on
//! the plane. S^m itself is t = cos θ times S^{m-1}, down to S^0 = {±1}; for
//! S^1 that is Gauss–Chebyshev times ±1, which is the trapezoid rule in the
//! periodic angle. A patch has d - 1 resolutions, one per variable, and the
//! weights carry the whole surface measure.
//!
//! The sphere's rules are exact for polynomials of degree 2n - 1 in each
//! variable. The hemisphere's polar variable t ∈ [0, 1] absorbs only the
//! (1 - t)^{(d-3)/2} of the pole; the (1 + t)^{(d-3)/2} left in the
//! integrand is a polynomial for odd d and analytic on [0, 1] for even d,
//! where it costs a factor 5.8^{-2n} in the error, not exactness.

use std::f64::consts::PI;
use std::fmt;

use super::gauss::{gauss_jacobi, gauss_legendre};

/// The smallest dimension d of R^d a surface can live in.
pub const MIN_DIM: usize = 2;
/// The largest dimension d of R^d a surface can live in (the tested range).
pub const MAX_DIM: usize = 8;

/// A surface in R^d with its outward normal, to integrate over. The normal
/// coordinate y is the last one, as in [`crate::numeric::Values`].
#[derive(Clone, Debug, PartialEq)]
pub struct Surface {
    dim: usize,
    patches: Vec<Patch>,
    /// A sphere turned toward the point where its integrand is singular:
    /// the integrand then varies mostly with the polar variable, and the
    /// sparse-grid driver ([`super::sparse`]) integrates it.
    aligned: bool,
}

impl Surface {
    /// The sphere |x - c| = r, outward normal (x - c)/r. Its poles lie on
    /// the y axis through c.
    pub fn sphere(centre: &[f64], radius: f64) -> Result<Surface, QuadratureError> {
        check_dim(centre)?;
        check_size("radius", radius)?;
        Ok(Surface::one(Patch::new(Shape::Sphere { radius }, centre)))
    }

    /// The sphere |x - c| = r with its poles on the line through c along
    /// `axis` (any non-zero vector). An integrand singular at one point off
    /// the sphere converges fastest with the axis pointing at that point: it
    /// then varies mostly with the polar variable, which the driver refines
    /// alone.
    pub fn sphere_along(
        centre: &[f64],
        radius: f64,
        axis: &[f64],
    ) -> Result<Surface, QuadratureError> {
        let dim = check_dim(centre)?;
        check_size("radius", radius)?;
        let length = axis.iter().map(|a| a * a).sum::<f64>().sqrt();
        if axis.len() != dim || !(length > 0.0 && length.is_finite()) {
            return Err(QuadratureError::Axis {
                axis: axis.to_vec(),
            });
        }
        let axis: Vec<f64> = axis.iter().map(|a| a / length).collect();
        Ok(Surface {
            aligned: true,
            ..Surface::one(Patch::new(Shape::Sphere { radius }, centre).turned(&axis))
        })
    }

    /// The upper hemisphere {|x - c| = r, y > 0} of a sphere centred on the
    /// boundary (c_y = 0 exactly), outward normal (x - c)/r. Not closed:
    /// see [`Surface::closed_hemisphere`].
    pub fn hemisphere(centre: &[f64], radius: f64) -> Result<Surface, QuadratureError> {
        check_boundary_centre(centre)?;
        check_size("radius", radius)?;
        Ok(Surface::one(Patch::new(
            Shape::Hemisphere { radius },
            centre,
        )))
    }

    /// The flat disc {y = 0, |x∥ - c∥| < r} (c_y = 0), outward normal -e_y:
    /// the face that closes the hemisphere of the same centre and radius.
    pub fn disc(centre: &[f64], radius: f64) -> Result<Surface, QuadratureError> {
        check_boundary_centre(centre)?;
        check_size("radius", radius)?;
        Ok(Surface::one(Patch::new(Shape::Disc { radius }, centre)))
    }

    /// The boundary of the half-ball {|x - c| ≤ r, y ≥ 0} around a boundary
    /// point c: the hemisphere and the disc, each with its outward normal.
    /// This is the surface of a flux around a boundary insertion.
    pub fn closed_hemisphere(centre: &[f64], radius: f64) -> Result<Surface, QuadratureError> {
        check_boundary_centre(centre)?;
        check_size("radius", radius)?;
        Ok(Surface {
            dim: centre.len(),
            aligned: false,
            patches: vec![
                Patch::new(Shape::Hemisphere { radius }, centre),
                Patch::new(Shape::Disc { radius }, centre),
            ],
        })
    }

    /// The whole boundary plane y = 0, in polar coordinates about c (c_y = 0)
    /// with ρ = a tan θ, θ ∈ [0, π/2). The normal passed along is e_y, the n
    /// of the conventions (into the bulk). For integrands that fall off like
    /// ρ^{-2d} or faster: then the integrand in θ vanishes like cos^d θ at
    /// θ = π/2 and the rule converges geometrically. Choose c near where the
    /// integrand is largest and a about its width there (the height y of a
    /// bulk insertion above the plane).
    pub fn plane(centre: &[f64], scale: f64) -> Result<Surface, QuadratureError> {
        check_boundary_centre(centre)?;
        check_size("scale", scale)?;
        Ok(Surface::one(Patch::new(Shape::Plane { scale }, centre)))
    }

    /// The dimension d of the space the surface lives in.
    pub fn dim(&self) -> usize {
        self.dim
    }

    /// The same surface integrated by the product rules up to d = 6 (above
    /// it the sparse grid is the only driver): for a turned sphere with a
    /// second singular point off its axis, where the sparse grid's
    /// estimate was found 10⁶ times too small (benches/quadrature.rs, two
    /// sources).
    pub fn with_product_rules(self) -> Surface {
        Surface {
            aligned: false,
            ..self
        }
    }

    /// Whether the surface is a sphere turned toward a point
    /// ([`Surface::sphere_along`]): integrated by the sparse grid.
    pub fn aligned(&self) -> bool {
        self.aligned
    }

    /// The rule with n points in every variable of every patch
    /// (2n on each circle): 2n^{d-1} nodes per patch.
    pub fn rule(&self, n: usize) -> Rule {
        let mut rule = Rule {
            dim: self.dim,
            points: Vec::new(),
            normals: Vec::new(),
            weights: Vec::new(),
        };
        for patch in &self.patches {
            let res = vec![n; patch.vars()];
            patch.for_each(&res, &mut |x, normal, w| {
                rule.points.extend_from_slice(x);
                rule.normals.extend_from_slice(normal);
                rule.weights.push(w);
            });
        }
        rule
    }

    /// The Euclidean distance from `point` to the (closed) surface.
    pub fn distance(&self, point: &[f64]) -> f64 {
        self.patches
            .iter()
            .map(|p| p.distance(point))
            .fold(f64::INFINITY, f64::min)
    }

    /// Refuse the surface when one of the `avoid` points (named insertions)
    /// lies within `margin` of it: the integrand is singular there and no
    /// rule converges. Also refuses a point with the wrong number of
    /// coordinates or a non-finite one.
    pub fn check_clear(
        &self,
        avoid: &[(&str, &[f64])],
        margin: f64,
    ) -> Result<(), QuadratureError> {
        for &(name, point) in avoid {
            if point.len() != self.dim {
                return Err(QuadratureError::PointDimension {
                    name: name.to_string(),
                    expected: self.dim,
                    found: point.len(),
                });
            }
            let distance = self.distance(point);
            if distance.is_nan() || distance < margin {
                return Err(QuadratureError::TooClose {
                    name: name.to_string(),
                    point: point.to_vec(),
                    distance,
                    margin,
                });
            }
        }
        Ok(())
    }

    pub(crate) fn patches(&self) -> &[Patch] {
        &self.patches
    }

    fn one(patch: Patch) -> Surface {
        Surface {
            dim: patch.centre.len(),
            patches: vec![patch],
            aligned: false,
        }
    }
}

/// A fixed rule: nodes in R^d, the outward unit normal at each, weights
/// that include the surface measure.
#[derive(Clone, Debug, PartialEq)]
pub struct Rule {
    dim: usize,
    points: Vec<f64>,
    normals: Vec<f64>,
    weights: Vec<f64>,
}

/// One node of a [`Rule`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Node<'a> {
    pub point: &'a [f64],
    pub normal: &'a [f64],
    pub weight: f64,
}

impl Rule {
    /// The dimension d of the points.
    pub fn dim(&self) -> usize {
        self.dim
    }

    /// The number of nodes.
    pub fn len(&self) -> usize {
        self.weights.len()
    }

    /// Whether the rule has no nodes.
    pub fn is_empty(&self) -> bool {
        self.weights.is_empty()
    }

    /// The nodes in order.
    pub fn iter(&self) -> impl Iterator<Item = Node<'_>> {
        self.points
            .chunks_exact(self.dim)
            .zip(self.normals.chunks_exact(self.dim))
            .zip(&self.weights)
            .map(|((point, normal), &weight)| Node {
                point,
                normal,
                weight,
            })
    }

    /// Σ w f(point, normal), summed with compensation.
    pub fn integrate(&self, f: impl Fn(&[f64], &[f64]) -> f64) -> f64 {
        let mut sum = Compensated::default();
        for node in self.iter() {
            sum.add(node.weight * f(node.point, node.normal));
        }
        sum.value()
    }
}

/// Neumaier's compensated sum (common practice), with Σ|x| beside it: plain
/// summation of millions of same-signed terms loses 10⁻¹² relative.
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct Compensated {
    sum: f64,
    carry: f64,
    abs: f64,
}

impl Compensated {
    pub(crate) fn add(&mut self, v: f64) {
        self.abs += v.abs();
        let t = self.sum + v;
        self.carry += if self.sum.abs() >= v.abs() {
            (self.sum - t) + v
        } else {
            (v - t) + self.sum
        };
        self.sum = t;
    }

    pub(crate) fn value(&self) -> f64 {
        self.sum + self.carry
    }

    /// Σ |x|, for a round-off bound.
    pub(crate) fn abs(&self) -> f64 {
        self.abs
    }
}

/// Why a surface or an integration was refused.
#[derive(Clone, Debug, PartialEq)]
pub enum QuadratureError {
    /// The centre does not have d coordinates with 2 ≤ d ≤ 8, or one is not finite.
    Centre { centre: Vec<f64> },
    /// A radius or scale is not a positive finite number.
    Size { what: &'static str, value: f64 },
    /// A hemisphere, disc or plane is centred off the boundary y = 0.
    OffBoundary { centre: Vec<f64> },
    /// A sphere's axis is zero, not finite, or of the wrong length.
    Axis { axis: Vec<f64> },
    /// A point to avoid has the wrong number of coordinates.
    PointDimension {
        name: String,
        expected: usize,
        found: usize,
    },
    /// A point to avoid lies within the margin of the surface.
    TooClose {
        name: String,
        point: Vec<f64>,
        distance: f64,
        margin: f64,
    },
}

impl fmt::Display for QuadratureError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            QuadratureError::Centre { centre } => write!(
                f,
                "a surface needs a centre with {MIN_DIM} to {MAX_DIM} finite coordinates, not {}",
                coords(centre)
            ),
            QuadratureError::Size { what, value } => {
                write!(
                    f,
                    "the {what} of a surface must be positive and finite, not {value}"
                )
            }
            QuadratureError::OffBoundary { centre } => write!(
                f,
                "a hemisphere, disc or boundary plane must be centred on the boundary y = 0, \
                 not at {}",
                coords(centre)
            ),
            QuadratureError::Axis { axis } => write!(
                f,
                "the axis of a sphere must be a non-zero finite vector with one coordinate \
                 per dimension, not {}",
                coords(axis)
            ),
            QuadratureError::PointDimension {
                name,
                expected,
                found,
            } => write!(
                f,
                "point {name} has {found} coordinates, the surface lives in {expected} dimensions"
            ),
            QuadratureError::TooClose {
                name,
                point,
                distance,
                margin,
            } => write!(
                f,
                "point {name} = {} lies {distance:.3e} from the surface, within the margin \
                 {margin:.3e}: the integrand is singular there; move the surface away from it",
                coords(point)
            ),
        }
    }
}

impl std::error::Error for QuadratureError {}

fn coords(x: &[f64]) -> String {
    let parts: Vec<String> = x.iter().map(|c| format!("{c}")).collect();
    format!("({})", parts.join(", "))
}

fn check_dim(centre: &[f64]) -> Result<usize, QuadratureError> {
    let dim = centre.len();
    if !(MIN_DIM..=MAX_DIM).contains(&dim) || centre.iter().any(|c| !c.is_finite()) {
        return Err(QuadratureError::Centre {
            centre: centre.to_vec(),
        });
    }
    Ok(dim)
}

fn check_boundary_centre(centre: &[f64]) -> Result<usize, QuadratureError> {
    let dim = check_dim(centre)?;
    if centre[dim - 1] != 0.0 {
        return Err(QuadratureError::OffBoundary {
            centre: centre.to_vec(),
        });
    }
    Ok(dim)
}

fn check_size(what: &'static str, value: f64) -> Result<(), QuadratureError> {
    if value > 0.0 && value.is_finite() {
        Ok(())
    } else {
        Err(QuadratureError::Size { what, value })
    }
}

/// What [`Patch::for_each`] calls at each node: point, normal, weight.
pub(crate) type Visit<'a> = dyn FnMut(&[f64], &[f64], f64) + 'a;

/// One variable along an axis times S^{d-2} across it.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Patch {
    shape: Shape,
    centre: Vec<f64>,
    /// The unit vector the first variable runs along.
    axis: Vec<f64>,
    /// Householder vector v (|v| = 1) of the reflection I - 2vvᵀ taking e_y
    /// to `axis`; `None` when the axis is e_y.
    turn: Option<Vec<f64>>,
}

#[derive(Clone, Copy, Debug, PartialEq)]
enum Shape {
    Sphere { radius: f64 },
    Hemisphere { radius: f64 },
    Disc { radius: f64 },
    Plane { scale: f64 },
}

/// A node of the first variable: the offset along the axis, the radius of
/// the S^{d-2} across it, and the weight.
struct Slice {
    along: f64,
    across: f64,
    weight: f64,
}

impl Patch {
    fn new(shape: Shape, centre: &[f64]) -> Patch {
        let dim = centre.len();
        let mut axis = vec![0.0; dim];
        axis[dim - 1] = 1.0;
        Patch {
            shape,
            centre: centre.to_vec(),
            axis,
            turn: None,
        }
    }

    /// The same patch with its axis along the unit vector `axis`.
    fn turned(mut self, axis: &[f64]) -> Patch {
        let dim = axis.len();
        let mut v: Vec<f64> = axis.iter().map(|a| -a).collect();
        v[dim - 1] += 1.0;
        let length = v.iter().map(|a| a * a).sum::<f64>().sqrt();
        self.axis = axis.to_vec();
        // When the axis is (nearly) e_y the reflection is the identity.
        self.turn = (length > 1e-12).then(|| v.iter().map(|a| a / length).collect());
        self
    }

    fn dim(&self) -> usize {
        self.centre.len()
    }

    /// The number of resolutions: the first variable, then one per factor
    /// of S^{d-2} (S^m for m = d-2 down to 1).
    pub(crate) fn vars(&self) -> usize {
        self.dim() - 1
    }

    /// The number of nodes at resolutions `res` (one per variable).
    pub(crate) fn size(&self, res: &[usize]) -> usize {
        res.iter().fold(2usize, |acc, &n| acc.saturating_mul(n))
    }

    /// Calls `visit(point, normal, weight)` at every node of the rule with
    /// resolutions `res`.
    pub(crate) fn for_each(&self, res: &[usize], visit: &mut Visit<'_>) {
        let dim = self.dim();
        let across = self.across(&res[1..]);
        let slices = self.slices(res[0]);
        let mut point = vec![0.0; dim];
        let mut normal = vec![0.0; dim];
        let radius = match self.shape {
            Shape::Sphere { radius } | Shape::Hemisphere { radius } => Some(radius),
            Shape::Disc { .. } | Shape::Plane { .. } => None,
        };
        if radius.is_none() {
            // Flat patches: the outward normal of the disc is -e_y; the plane
            // passes the n of the conventions, +e_y.
            normal[dim - 1] = if matches!(self.shape, Shape::Disc { .. }) {
                -1.0
            } else {
                1.0
            };
        }
        for slice in &slices {
            for (dir, &w) in across.dirs.chunks_exact(dim).zip(&across.weights) {
                for i in 0..dim {
                    let offset = slice.across * dir[i] + slice.along * self.axis[i];
                    point[i] = self.centre[i] + offset;
                    if let Some(r) = radius {
                        normal[i] = offset / r;
                    }
                }
                visit(&point, &normal, slice.weight * w);
            }
        }
    }

    /// The Jacobi exponents (α, β) of each variable's weight on [-1, 1]:
    /// the first variable's, then those of S^{d-2} down to S^1.
    pub(crate) fn exponents(&self) -> Vec<(f64, f64)> {
        let d = self.dim() as f64;
        let first = match self.shape {
            Shape::Sphere { .. } => (0.5 * (d - 3.0), 0.5 * (d - 3.0)),
            Shape::Hemisphere { .. } => (0.5 * (d - 3.0), 0.0),
            Shape::Disc { .. } => (0.0, d - 2.0),
            Shape::Plane { .. } => (0.0, 0.0),
        };
        let mut all = vec![first];
        for m in (1..self.dim() - 1).rev() {
            let a = 0.5 * (m as f64 - 2.0);
            all.push((a, a));
        }
        all
    }

    /// The factor the first variable's node x brings to the weight beyond
    /// its Jacobi weight: the surface measure and the Jacobian of the map
    /// from [-1, 1] (as in [`Patch::slices`]).
    pub(crate) fn factor(&self, x: f64) -> f64 {
        let d = self.dim() as f64;
        match self.shape {
            Shape::Sphere { radius } => radius.powf(d - 1.0),
            Shape::Hemisphere { radius } => {
                let a = 0.5 * (d - 3.0);
                let t = 0.5 * (1.0 + x);
                radius.powf(d - 1.0) * 2f64.powf(-a - 1.0) * (1.0 + t).powf(a)
            }
            Shape::Disc { radius } => (0.5 * radius).powf(d - 1.0),
            Shape::Plane { scale } => {
                let theta = 0.25 * PI * (1.0 + x);
                let (sin, cos) = theta.sin_cos();
                0.25 * PI * scale.powf(d - 1.0) * (sin / cos).powf(d - 2.0) / (cos * cos)
            }
        }
    }

    /// The point and outward normal (as in [`Patch::for_each`]) of the node
    /// with variables `xs` (one per variable, in [-1, 1]) and the sign
    /// `sign` of S^0, written into `point` and `normal`.
    pub(crate) fn place(&self, xs: &[f64], sign: f64, point: &mut [f64], normal: &mut [f64]) {
        let dim = self.dim();
        let x = xs[0];
        let (along, across, radius) = match self.shape {
            Shape::Sphere { radius } => (
                radius * x,
                radius * ((1.0 - x) * (1.0 + x)).sqrt(),
                Some(radius),
            ),
            Shape::Hemisphere { radius } => {
                let t = 0.5 * (1.0 + x);
                (
                    radius * t,
                    radius * ((1.0 - t) * (1.0 + t)).sqrt(),
                    Some(radius),
                )
            }
            Shape::Disc { radius } => (0.0, 0.5 * radius * (1.0 + x), None),
            Shape::Plane { scale } => {
                let theta = 0.25 * PI * (1.0 + x);
                let (sin, cos) = theta.sin_cos();
                (0.0, scale * sin / cos, None)
            }
        };
        // The direction across: (t_1, s_1 t_2, s_1 s_2 t_3, …, ± s_1 … s_m)
        // on S^{d-2}, with 0 along y, then turned with the patch.
        let dir = normal;
        let mut scale = 1.0;
        for (k, &t) in xs[1..].iter().enumerate() {
            dir[k] = scale * t;
            scale *= ((1.0 - t) * (1.0 + t)).sqrt();
        }
        dir[dim - 2] = scale * sign;
        dir[dim - 1] = 0.0;
        if let Some(v) = &self.turn {
            let dot: f64 = dir.iter().zip(v).map(|(a, b)| a * b).sum();
            for (a, b) in dir.iter_mut().zip(v) {
                *a -= 2.0 * dot * b;
            }
        }
        for i in 0..dim {
            let offset = across * dir[i] + along * self.axis[i];
            point[i] = self.centre[i] + offset;
            if let Some(r) = radius {
                dir[i] = offset / r;
            }
        }
        if radius.is_none() {
            dir.fill(0.0);
            dir[dim - 1] = if matches!(self.shape, Shape::Disc { .. }) {
                -1.0
            } else {
                1.0
            };
        }
    }

    /// The rule of the first variable with n nodes.
    fn slices(&self, n: usize) -> Vec<Slice> {
        let d = self.dim() as f64;
        match self.shape {
            Shape::Sphere { radius } => {
                // S^{d-1}: dΩ = (1 - t²)^{(d-3)/2} dt dΩ_{d-2}, t = cos θ.
                let a = 0.5 * (d - 3.0);
                let rule = gauss_jacobi(n, a, a);
                let measure = radius.powf(d - 1.0);
                rule.nodes
                    .iter()
                    .zip(&rule.weights)
                    .map(|(&t, &w)| Slice {
                        along: radius * t,
                        across: radius * ((1.0 - t) * (1.0 + t)).sqrt(),
                        weight: w * measure,
                    })
                    .collect()
            }
            Shape::Hemisphere { radius } => {
                // t = cos θ ∈ [0, 1], t = (1 + x)/2: (1 - t²)^a dt =
                // 2^{-a-1} (1 - x)^a (1 + t)^a dx, Gauss–Jacobi in x with
                // (1 - x)^a; (1 + t)^a is smooth on [0, 1].
                let a = 0.5 * (d - 3.0);
                let rule = gauss_jacobi(n, a, 0.0);
                let measure = radius.powf(d - 1.0) * 2f64.powf(-a - 1.0);
                rule.nodes
                    .iter()
                    .zip(&rule.weights)
                    .map(|(&x, &w)| {
                        let t = 0.5 * (1.0 + x);
                        Slice {
                            along: radius * t,
                            across: radius * ((1.0 - t) * (1.0 + t)).sqrt(),
                            weight: w * measure * (1.0 + t).powf(a),
                        }
                    })
                    .collect()
            }
            Shape::Disc { radius } => {
                // ρ = r(1 + x)/2: ρ^{d-2} dρ = (r/2)^{d-1} (1 + x)^{d-2} dx.
                let rule = gauss_jacobi(n, 0.0, d - 2.0);
                let measure = (0.5 * radius).powf(d - 1.0);
                rule.nodes
                    .iter()
                    .zip(&rule.weights)
                    .map(|(&x, &w)| Slice {
                        along: 0.0,
                        across: 0.5 * radius * (1.0 + x),
                        weight: w * measure,
                    })
                    .collect()
            }
            Shape::Plane { scale } => {
                // θ = π(1 + x)/4, ρ = a tan θ:
                // ρ^{d-2} dρ = a^{d-1} tan^{d-2}θ sec²θ dθ.
                let rule = gauss_legendre(n);
                rule.nodes
                    .iter()
                    .zip(&rule.weights)
                    .map(|(&x, &w)| {
                        let theta = 0.25 * PI * (1.0 + x);
                        let (sin, cos) = theta.sin_cos();
                        let tan = sin / cos;
                        Slice {
                            along: 0.0,
                            across: scale * tan,
                            weight: w * 0.25 * PI * scale.powf(d - 1.0) * tan.powf(d - 2.0)
                                / (cos * cos),
                        }
                    })
                    .collect()
            }
        }
    }

    /// The unit sphere S^{d-2} across the axis at resolutions `res`, as
    /// directions in R^d (turned with the patch) and weights.
    fn across(&self, res: &[usize]) -> Across {
        let dim = self.dim();
        let sphere = unit_sphere(dim - 2, res);
        let mut dirs = Vec::with_capacity(sphere.weights.len() * dim);
        for omega in sphere.dirs.chunks_exact(dim - 1) {
            let start = dirs.len();
            dirs.extend_from_slice(omega);
            dirs.push(0.0);
            if let Some(v) = &self.turn {
                let dir = &mut dirs[start..];
                let dot: f64 = dir.iter().zip(v).map(|(a, b)| a * b).sum();
                for (a, b) in dir.iter_mut().zip(v) {
                    *a -= 2.0 * dot * b;
                }
            }
        }
        Across {
            dirs,
            weights: sphere.weights,
        }
    }

    /// The Euclidean distance from `p` to the closed patch.
    fn distance(&self, p: &[f64]) -> f64 {
        let dim = self.dim();
        let q: Vec<f64> = p.iter().zip(&self.centre).map(|(a, b)| a - b).collect();
        let along_y = q[dim - 1];
        let across_y = q[..dim - 1].iter().map(|a| a * a).sum::<f64>().sqrt();
        let length = across_y.hypot(along_y);
        match self.shape {
            Shape::Sphere { radius } => (length - radius).abs(),
            Shape::Hemisphere { radius } => {
                if along_y >= 0.0 {
                    (length - radius).abs()
                } else {
                    // The nearest point of the upper hemisphere is on its rim.
                    (across_y - radius).hypot(along_y)
                }
            }
            Shape::Disc { radius } => {
                if across_y <= radius {
                    along_y.abs()
                } else {
                    (across_y - radius).hypot(along_y)
                }
            }
            Shape::Plane { .. } => along_y.abs(),
        }
    }
}

struct Across {
    dirs: Vec<f64>,
    weights: Vec<f64>,
}

/// Points (in R^{m+1}, flat) and weights of the unit sphere S^m: t = cos θ
/// with Gauss–Jacobi α = β = (m-2)/2 (res[0] nodes) times S^{m-1} scaled by
/// √(1 - t²), down to S^0 = {+1, -1}.
fn unit_sphere(m: usize, res: &[usize]) -> Across {
    if m == 0 {
        return Across {
            dirs: vec![1.0, -1.0],
            weights: vec![1.0, 1.0],
        };
    }
    let a = 0.5 * (m as f64 - 2.0);
    let rule = gauss_jacobi(res[0], a, a);
    let inner = unit_sphere(m - 1, &res[1..]);
    let mut dirs = Vec::with_capacity(rule.len() * inner.weights.len() * (m + 1));
    let mut weights = Vec::with_capacity(rule.len() * inner.weights.len());
    for (&t, &wt) in rule.nodes.iter().zip(&rule.weights) {
        let s = ((1.0 - t) * (1.0 + t)).sqrt();
        for (omega, &w) in inner.dirs.chunks_exact(m).zip(&inner.weights) {
            dirs.push(t);
            dirs.extend(omega.iter().map(|o| s * o));
            weights.push(wt * w);
        }
    }
    Across { dirs, weights }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unit_circle_is_the_trapezoid_rule() {
        // Gauss–Chebyshev times ±1: 2n equally spaced angles, weight π/n.
        let circle = unit_sphere(1, &[5]);
        assert_eq!(circle.weights.len(), 10);
        let mut angles: Vec<f64> = circle
            .dirs
            .chunks_exact(2)
            .map(|p| p[1].atan2(p[0]).rem_euclid(2.0 * PI))
            .collect();
        angles.sort_by(f64::total_cmp);
        for w in angles.windows(2) {
            assert!((w[1] - w[0] - PI / 5.0).abs() < 1e-14);
        }
        assert!(circle.weights.iter().all(|&w| (w - PI / 5.0).abs() < 1e-15));
    }

    #[test]
    fn distances_to_each_shape() {
        let c = [0.0, 0.0, 0.0];
        let sphere = Surface::sphere(&c, 1.0).unwrap();
        assert!((sphere.distance(&[0.0, 0.5, 0.0]) - 0.5).abs() < 1e-15);
        assert!((sphere.distance(&[3.0, 0.0, 0.0]) - 2.0).abs() < 1e-15);
        let hemi = Surface::hemisphere(&c, 1.0).unwrap();
        // Below the plane the nearest point is on the rim.
        assert!((hemi.distance(&[0.0, 0.0, -1.0]) - 2f64.sqrt()).abs() < 1e-15);
        assert!((hemi.distance(&[0.0, 0.0, 0.25]) - 0.75).abs() < 1e-15);
        let disc = Surface::disc(&c, 1.0).unwrap();
        assert!((disc.distance(&[0.5, 0.0, 0.25]) - 0.25).abs() < 1e-15);
        assert!((disc.distance(&[2.0, 0.0, 1.0]) - 2f64.sqrt()).abs() < 1e-15);
        let closed = Surface::closed_hemisphere(&c, 1.0).unwrap();
        assert!((closed.distance(&[0.0, 0.0, 0.25]) - 0.25).abs() < 1e-15);
        let plane = Surface::plane(&c, 1.0).unwrap();
        assert!((plane.distance(&[5.0, 1.0, 0.5]) - 0.5).abs() < 1e-15);
    }

    #[test]
    fn turned_sphere_has_its_pole_on_the_axis() {
        let axis = [1.0, 2.0, -2.0];
        let sphere = Surface::sphere_along(&[0.0; 3], 1.0, &axis).unwrap();
        let patch = &sphere.patches()[0];
        let v = patch.turn.as_ref().unwrap();
        // The reflection takes e_y to the unit axis.
        let dot = v[2];
        let image: Vec<f64> = (0..3)
            .map(|i| if i == 2 { 1.0 } else { 0.0 } - 2.0 * dot * v[i])
            .collect();
        for i in 0..3 {
            assert!((image[i] - axis[i] / 3.0).abs() < 1e-15);
        }
    }
}
