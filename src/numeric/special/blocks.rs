//! Conformal blocks of a bulk two-point function near a flat wall, in the
//! bulk channel and in the boundary channel, as functions of the cross-ratio
//! ξ = (x1 - x2)²/(4 y1 y2).
//!
//! # Normalisation
//!
//! Two identical bulk scalars of dimension Δ at heights y1, y2 above the
//! wall y = 0 (McAvity & Osborn 1995, cond-mat/9505127; Liendo, Rastelli &
//! van Rees 2012, arXiv:1210.4258; docs/conventions.md §9):
//!
//!   ⟨O(x1) O(x2)⟩ = G(ξ) / ((2y1)^Δ (2y2)^Δ ξ^Δ),
//!
//! so that G = 1 without a wall (the two-point function normalised to
//! 1/|x1 - x2|^(2Δ)). The two expansions are
//!
//!   bulk channel:     G(ξ) = 1 + Σ_k λ_k a_k f_bulk(Δ_k; ξ),
//!   boundary channel: G(ξ) = ξ^Δ Σ_l μ_l² f_bdy(Δ̂_l; ξ),
//!
//!   f_bulk(Δ; ξ)  = ξ^(Δ/2) ₂F₁(Δ/2, Δ/2; Δ + 1 - d/2; -ξ),
//!   f_bdy(Δ̂; ξ)  = ξ^(-Δ̂) ₂F₁(Δ̂, Δ̂ + 1 - d/2; 2Δ̂ + 2 - d; -1/ξ),
//!
//! normalised by f_bulk ~ ξ^(Δ/2) as ξ → 0 (the bulk OPE limit) and
//! f_bdy ~ ξ^(-Δ̂) as ξ → ∞ (the boundary limit). Both ₂F₁ are taken at a
//! negative argument, where they are real for all ξ > 0.
//!
//! At the unitarity bound of a boundary scalar, Δ̂ = d/2 - 1, both b and c
//! of the boundary ₂F₁ vanish with c = 2b; the block is the limit along Δ̂,
//! ₂F₁(a, ε; 2ε; z) → (1 + (1 - z)^(-a))/2
//! ([`super::hyp2f1_vanishing_bc`]), so
//!
//!   f_bdy(d/2 - 1; ξ) = ξ^(1-d/2) (1 + (ξ/(1 + ξ))^(d/2-1))/2.
//!
//! # The free scalar (derived for this project)
//!
//! With image propagators (docs/conventions.md §4) and C_φ scaled to 1,
//! ⟨φφ⟩ = |x1 - x2|^(2-d) ± |x1 - x̄2|^(2-d), + for Neumann, - for
//! Dirichlet. Since |x1 - x2|² = 4y1y2 ξ and |x1 - x̄2|² = 4y1y2 (1 + ξ),
//! with Δ = d/2 - 1:
//!
//!   G(ξ) = 1 ± (ξ/(1 + ξ))^(d/2-1).
//!
//! **Bulk channel.** At Δ = d - 2 the bulk ₂F₁ has c = Δ + 1 - d/2 = d/2 - 1
//! = b, so ₂F₁(a, b; b; -ξ) = (1 + ξ)^(-a) (DLMF 15.4.6) and
//! f_bulk(d - 2; ξ) = (ξ/(1 + ξ))^(d/2-1) exactly: G = 1 ± f_bulk(d - 2; ξ),
//! the identity and φ² with λa = ±1.
//!
//! **Boundary channel, Neumann.** One block, φ̂ = φ|wall at Δ̂ = d/2 - 1: by
//! the limit above ξ^Δ f_bdy(d/2 - 1; ξ) = (1 + (ξ/(1 + ξ))^(d/2-1))/2, so
//!
//!   G_N = 2 ξ^Δ f_bdy(d/2 - 1; ξ),   μ² = 2.
//!
//! **Boundary channel, Dirichlet.** One block, ∂_nφ at Δ̂ = d/2: the ₂F₁ is
//! ₂F₁(d/2, 1; 2; z), and ₂F₁(a, 1; 2; z) = ((1 - z)^(1-a) - 1)/((a - 1) z)
//! (sum Σ (a)_k z^k/(k + 1)! = ((1 - z)^(1-a) - 1)/((a - 1) z) by the
//! binomial series). At z = -1/ξ this gives
//! ξ^Δ f_bdy(d/2; ξ) = (1 - (ξ/(1 + ξ))^(d/2-1))/(d/2 - 1), so
//!
//!   G_D = (d/2 - 1) ξ^Δ f_bdy(d/2; ξ),   μ² = (d - 2)/2.
//!
//! Both are checked numerically in `tests/special.rs` for d = 3, 4, 5.

use super::hypergeometric::{hyp2f1, hyp2f1_vanishing_bc};
use super::{finite, SpecialError};

/// The bulk-channel block f_bulk(Δ; ξ) = ξ^(Δ/2) ₂F₁(Δ/2, Δ/2; Δ + 1 - d/2; -ξ)
/// in dimension `d` (any real d), for ξ > 0.
pub fn bulk_block(d: f64, delta: f64, xi: f64) -> Result<f64, SpecialError> {
    check(d, delta, xi)?;
    let h = 0.5 * delta;
    let f = hyp2f1(h, h, delta + 1.0 - 0.5 * d, -xi)?;
    finite(xi.powf(h) * f)
}

/// The boundary-channel block
/// f_bdy(Δ̂; ξ) = ξ^(-Δ̂) ₂F₁(Δ̂, Δ̂ + 1 - d/2; 2Δ̂ + 2 - d; -1/ξ) in dimension
/// `d`, for ξ > 0; at Δ̂ = d/2 - 1 its limit along Δ̂.
pub fn boundary_block(d: f64, delta_hat: f64, xi: f64) -> Result<f64, SpecialError> {
    check(d, delta_hat, xi)?;
    let b = delta_hat + 1.0 - 0.5 * d;
    // c = 2b exactly, so that b = 0 and c = 0 come together.
    let c = 2.0 * b;
    let z = -1.0 / xi;
    let f = if b == 0.0 {
        hyp2f1_vanishing_bc(delta_hat, 0.5, z)?
    } else {
        hyp2f1(delta_hat, b, c, z)?
    };
    finite(xi.powf(-delta_hat) * f)
}

/// The boundary-channel block of a bulk–boundary–boundary function of
/// scalars ⟨O(x) Ô1(s1) Ô2(s2)⟩ (docs/conventions.md §15, derived here):
///
///   f_bdy3(Δ̂, δ̂; χ) = χ^(Δ̂/2) ₂F₁((Δ̂ + δ̂)/2, (Δ̂ - δ̂)/2; Δ̂ + (3 - d)/2; χ),
///
/// δ̂ = Δ̂1 - Δ̂2, χ = y² s12²/(|x - s1|² |x - s2|²) in (0, 1), with
/// ⟨O Ô1 Ô2⟩ = (2y)^(-Δ) (|x - s2|/|x - s1|)^δ̂ s12^(-Δ̂1-Δ̂2) F(χ) and
/// F = Σ 2^Δ̂ b_{OÔ} c_{ÔÔ1Ô2} f_bdy3(Δ̂, δ̂; χ). Normalised by
/// f_bdy3 ~ χ^(Δ̂/2) as χ → 0 (the wall limit y → 0).
pub fn boundary_three_point_block(
    d: f64,
    delta_hat: f64,
    delta12: f64,
    chi: f64,
) -> Result<f64, SpecialError> {
    if !(d.is_finite() && delta_hat.is_finite() && delta12.is_finite() && chi.is_finite()) {
        return Err(SpecialError::NotFinite);
    }
    if !(chi > 0.0 && chi < 1.0) {
        return Err(SpecialError::ThreePointRatio);
    }
    let f = hyp2f1(
        0.5 * (delta_hat + delta12),
        0.5 * (delta_hat - delta12),
        delta_hat + 0.5 * (3.0 - d),
        chi,
    )?;
    finite(chi.powf(0.5 * delta_hat) * f)
}

fn check(d: f64, delta: f64, xi: f64) -> Result<(), SpecialError> {
    if !(d.is_finite() && delta.is_finite() && xi.is_finite()) {
        return Err(SpecialError::NotFinite);
    }
    if xi <= 0.0 {
        return Err(SpecialError::CrossRatio);
    }
    Ok(())
}

/// k_β(x) = x^(β/2) ₂F₁(β/2, β/2; β; x), 0 < x < 1: the one-variable
/// factor of the four-point blocks (Dolan & Osborn 2001, hep-th/0011040,
/// for equal external dimensions).
pub fn collinear_block(beta: f64, x: f64) -> Result<f64, SpecialError> {
    collinear_block_mixed(beta, Externals::EQUAL, x)
}

/// The external dimensions' differences that enter the four-point blocks:
/// Δ12 = Δ1 - Δ2 and Δ34 = Δ3 - Δ4 (Dolan & Osborn 2001, hep-th/0011040,
/// eqs. 2.10, 2.11 with a = -Δ12/2, b = Δ34/2).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Externals {
    pub delta12: f64,
    pub delta34: f64,
}

impl Externals {
    pub const EQUAL: Externals = Externals {
        delta12: 0.0,
        delta34: 0.0,
    };

    /// a = -Δ12/2 and b = Δ34/2.
    pub fn ab(self) -> (f64, f64) {
        (-0.5 * self.delta12, 0.5 * self.delta34)
    }
}

/// k_β(x) = x^(β/2) ₂F₁(β/2 + a, β/2 + b; β; x), a = -Δ12/2, b = Δ34/2,
/// 0 < x < 1 (Dolan & Osborn 2001, hep-th/0011040, eqs. 2.10-2.11).
pub fn collinear_block_mixed(beta: f64, ext: Externals, x: f64) -> Result<f64, SpecialError> {
    let h = 0.5 * beta;
    let (a, b) = ext.ab();
    finite(x.powf(h) * hyp2f1(h + a, h + b, beta, x)?)
}

/// The s-channel block g_{Δ,ℓ}(z, z̄) of a four-point function of identical
/// scalars without a wall, in d = 2 or d = 4 (docs/conventions.md §14;
/// Dolan & Osborn 2001, hep-th/0011040, eqs. 2.10 and 2.11, normalised as
/// below):
///
///   d = 2: g = [k_{Δ+ℓ}(z) k_{Δ-ℓ}(z̄) + k_{Δ-ℓ}(z) k_{Δ+ℓ}(z̄)]/(1 + δ_{ℓ0}),
///   d = 4: g = z z̄/(z - z̄) [k_{Δ+ℓ}(z) k_{Δ-ℓ-2}(z̄) - k_{Δ-ℓ-2}(z) k_{Δ+ℓ}(z̄)],
///
/// so that g ~ z^((Δ+ℓ)/2) z̄^((Δ-ℓ)/2) for 0 < z̄ ≪ z ≪ 1. Real z, z̄ in
/// (0, 1); in d = 4, z = z̄ (a removable 0/0) is refused.
pub fn four_point_block(
    d: u32,
    delta: f64,
    spin: u32,
    z: f64,
    zb: f64,
) -> Result<f64, SpecialError> {
    four_point_block_mixed(d, delta, spin, Externals::EQUAL, z, zb)
}

/// [`four_point_block`] for unequal external dimensions: the same formulas
/// with [`collinear_block_mixed`] (Dolan & Osborn 2001, eqs. 2.10-2.11).
pub fn four_point_block_mixed(
    d: u32,
    delta: f64,
    spin: u32,
    ext: Externals,
    z: f64,
    zb: f64,
) -> Result<f64, SpecialError> {
    if !(delta.is_finite()
        && z.is_finite()
        && zb.is_finite()
        && ext.delta12.is_finite()
        && ext.delta34.is_finite())
    {
        return Err(SpecialError::NotFinite);
    }
    if !(z > 0.0 && z < 1.0 && zb > 0.0 && zb < 1.0) {
        return Err(SpecialError::FourPointRatio);
    }
    let l = f64::from(spin);
    let k = |beta: f64, x: f64| collinear_block_mixed(beta, ext, x);
    match d {
        2 => {
            let s = k(delta + l, z)? * k(delta - l, zb)? + k(delta - l, z)? * k(delta + l, zb)?;
            finite(if spin == 0 { 0.5 * s } else { s })
        }
        4 => {
            if z == zb {
                return Err(SpecialError::FourPointRatio);
            }
            let s = k(delta + l, z)? * k(delta - l - 2.0, zb)?
                - k(delta - l - 2.0, z)? * k(delta + l, zb)?;
            finite(z * zb / (z - zb) * s)
        }
        _ => Err(SpecialError::FourPointDimension),
    }
}

/// z and z̄ of real cross-ratios u = z z̄, v = (1 - z)(1 - z̄), z ≥ z̄:
/// the roots of t² - (1 + u - v) t + u = 0; `None` when they are complex
/// ((1 + u - v)² < 4u: a Euclidean configuration with z̄ = z*).
pub fn z_zbar(u: f64, v: f64) -> Option<(f64, f64)> {
    let s = 1.0 + u - v;
    let disc = s * s - 4.0 * u;
    if disc.is_nan() || disc < 0.0 {
        return None;
    }
    let r = disc.sqrt();
    let z = 0.5 * (s + r);
    // u/z avoids the cancellation of (s - r)/2 when z̄ is small.
    let zb = if z != 0.0 { u / z } else { 0.5 * (s - r) };
    Some((z, zb))
}

/// A complex number, for the blocks at z̄ = z* (Euclidean configurations
/// off the real line).
#[derive(Clone, Copy, Debug)]
struct Complex(f64, f64);

impl Complex {
    fn mul(self, o: Complex) -> Complex {
        Complex(self.0 * o.0 - self.1 * o.1, self.0 * o.1 + self.1 * o.0)
    }
    fn scale(self, s: f64) -> Complex {
        Complex(self.0 * s, self.1 * s)
    }
    fn add(self, o: Complex) -> Complex {
        Complex(self.0 + o.0, self.1 + o.1)
    }
    fn abs(self) -> f64 {
        self.0.hypot(self.1)
    }
}

/// Most terms of the series of k_β at complex z.
const COMPLEX_TERMS: usize = 2000;

/// k_β(z) = z^(β/2) ₂F₁(β/2 + a, β/2 + b; β; z) at z = r e^(iθ), 0 < r ≤ 0.9, by
/// the defining series (DLMF 15.2.1) with the principal power.
fn collinear_block_complex(
    beta: f64,
    ext: Externals,
    r: f64,
    theta: f64,
) -> Result<Complex, SpecialError> {
    let h = 0.5 * beta;
    let (a, b) = ext.ab();
    if beta <= 0.0 && beta.fract() == 0.0 {
        // β = 0: k_0 = 1 (the series' terms are 0/0 with a = 0 first).
        if beta == 0.0 && (h + a == 0.0 || h + b == 0.0) {
            return Ok(Complex(1.0, 0.0));
        }
        return Err(SpecialError::ParameterPole);
    }
    let z = Complex(r * theta.cos(), r * theta.sin());
    let mut term = Complex(1.0, 0.0);
    let mut sum = term;
    let mut size = 1.0f64;
    for k in 0..COMPLEX_TERMS {
        let k = k as f64;
        let f = (h + a + k) * (h + b + k) / ((beta + k) * (k + 1.0));
        term = term.mul(z).scale(f);
        sum = sum.add(term);
        size = size.max(term.abs());
        if term.abs() <= 1e-17 * sum.abs() {
            if sum.abs() < 1e-5 * size {
                return Err(SpecialError::Cancellation);
            }
            let modulus = r.powf(h);
            let phase = Complex((h * theta).cos(), (h * theta).sin()).scale(modulus);
            return Ok(phase.mul(sum));
        }
    }
    Err(SpecialError::TooLarge)
}

/// The s-channel block at a Euclidean configuration, z = r e^(iθ) and
/// z̄ = z* (0 < θ < π, 0 < r ≤ 0.9; u = r², v = 1 - 2r cos θ + r²): the
/// formulas of [`four_point_block`] with complex k_β, whose value is real.
pub fn four_point_block_polar(
    d: u32,
    delta: f64,
    spin: u32,
    r: f64,
    theta: f64,
) -> Result<f64, SpecialError> {
    four_point_block_polar_mixed(d, delta, spin, Externals::EQUAL, r, theta)
}

/// [`four_point_block_polar`] for unequal external dimensions.
pub fn four_point_block_polar_mixed(
    d: u32,
    delta: f64,
    spin: u32,
    ext: Externals,
    r: f64,
    theta: f64,
) -> Result<f64, SpecialError> {
    if !(delta.is_finite()
        && r.is_finite()
        && theta.is_finite()
        && ext.delta12.is_finite()
        && ext.delta34.is_finite())
    {
        return Err(SpecialError::NotFinite);
    }
    if !(r > 0.0 && r <= 0.9 && theta > 0.0 && theta < std::f64::consts::PI) {
        return Err(SpecialError::FourPointRatio);
    }
    let l = f64::from(spin);
    let conj = |c: Complex| Complex(c.0, -c.1);
    match d {
        2 => {
            // k(z) k'(z̄) + k'(z) k(z̄) = 2 Re[k(z) k'(z)*].
            let a = collinear_block_complex(delta + l, ext, r, theta)?;
            let b = collinear_block_complex(delta - l, ext, r, theta)?;
            let s = 2.0 * a.mul(conj(b)).0;
            finite(if spin == 0 { 0.5 * s } else { s })
        }
        4 => {
            // z z̄/(z - z̄) [k(z) k'(z̄) - k'(z) k(z̄)] = r²/(2i r sin θ) · 2i Im[k(z) k'(z)*].
            let a = collinear_block_complex(delta + l, ext, r, theta)?;
            let b = collinear_block_complex(delta - l - 2.0, ext, r, theta)?;
            let im = a.mul(conj(b)).1;
            finite(r / theta.sin() * im)
        }
        _ => Err(SpecialError::FourPointDimension),
    }
}
