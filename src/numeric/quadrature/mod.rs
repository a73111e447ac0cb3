//! Quadrature over the surfaces of a Ward identity, with error estimates.
//!
//! A distributional identity is checked by flux through a sphere around a
//! bulk insertion, through a hemisphere plus the disc closing it around a
//! boundary insertion, and by integrals over the boundary plane (docs/conventions.md
//! §5). [`Surface`] builds those surfaces as product rules in hyperspherical
//! coordinates whose weights carry the surface measure and whose nodes carry
//! the outward normal ([`surface`]); [`gauss`] supplies the one-dimensional
//! Gauss–Jacobi rules they are made of; [`integrate`] refines a surface's
//! rule variable by variable until an error estimate meets a tolerance or a
//! node budget is spent ([`adapt`]). [`Surface::check_clear`] refuses a
//! surface that passes too close to an insertion, where the integrand is
//! singular.
//!
//! ```
//! use wardsmith::numeric::quadrature::{integrate, Surface, Tolerance};
//!
//! // Gauss's law in d = 3: the flux of x/|x|³ through a sphere around the
//! // origin is the area 4π of the unit sphere.
//! let sphere = Surface::sphere(&[0.2, 0.1, -0.3], 1.0).unwrap();
//! sphere.check_clear(&[("x1", &[0.0, 0.0, 0.0])], 0.1).unwrap();
//! let flux = integrate(
//!     &sphere,
//!     |x, n| {
//!         let r2: f64 = x.iter().map(|a| a * a).sum();
//!         x.iter().zip(n).map(|(a, b)| a * b).sum::<f64>() / r2.powf(1.5)
//!     },
//!     Tolerance::absolute(1e-11),
//! );
//! assert!(flux.converged);
//! assert!((flux.value - 4.0 * std::f64::consts::PI).abs() < 1e-10);
//! ```

pub mod adapt;
pub mod gauss;
pub mod nested;
mod sparse;
pub mod surface;

pub use adapt::{integrate, integrate_batch, Estimate, Tolerance, BATCH};
pub use gauss::{gauss_jacobi, gauss_legendre, Gauss};
pub use surface::{Node, QuadratureError, Rule, Surface, MAX_DIM, MIN_DIM};
