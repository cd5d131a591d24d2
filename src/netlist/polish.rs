//! Residues, direct term and h(0⁺) recomputed from the unreduced descriptor system by
//! contour integrals (trapezoid rule on circles, exponentially accurate for analytic
//! integrands; Trefethen & Weideman 2014). The poles come from the reduced state space, which
//! resolves them well; the reduction of input derivatives can leave ~1e-9 in D and the
//! residues, which the descriptor system does not have.
//!
//! Each contour point costs one dense complex LU of the descriptor pencil, so the polish is
//! kept to small descriptors (at most [`MAX_SIZE`] unknowns): a fixed cost per pole, never a
//! step that outgrows the eigen-decomposition. Larger circuits keep the reduced system's
//! figures.

use super::function::CircuitFunction;
use super::mna::Descriptor;
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

type C = Complex64;

/// Largest descriptor size polished (each point costs one dense complex LU).
pub(crate) const MAX_SIZE: usize = 40;
/// Points on each circle.
const POINTS: usize = 48;

/// H(s) = Cᵀ(sE − A)⁻¹B of the descriptor system.
fn transfer(d: &Descriptor, s: C) -> Option<C> {
    let n = d.e.nrows();
    let m = DMatrix::<C>::from_fn(n, n, |i, j| s * d.e[(i, j)] - d.a[(i, j)]);
    let b = DVector::<C>::from_iterator(n, d.b.iter().map(|&x| C::new(x, 0.0)));
    let x = m.lu().solve(&b)?;
    let y: C = d.c.iter().zip(x.iter()).map(|(c, x)| x * *c).sum();
    y.is_finite().then_some(y)
}

/// Mean of f over the circle |s − centre| = radius (trapezoid rule).
fn circle_mean(centre: C, radius: f64, f: &dyn Fn(C) -> Option<C>) -> Option<C> {
    let mut acc = C::new(0.0, 0.0);
    for k in 0..POINTS {
        let w = C::from_polar(
            1.0,
            2.0 * std::f64::consts::PI * (k as f64 + 0.5) / POINTS as f64,
        );
        acc += f(centre + w * radius)?;
    }
    Some(acc / POINTS as f64)
}

/// Recompute simple residues, D and h(0⁺) (initial-value theorem) from the descriptor system.
/// Leaves the network unchanged where a contour cannot be placed or evaluated.
pub(crate) fn polish(d: &Descriptor, net: &mut CircuitFunction) {
    if d.e.nrows() > MAX_SIZE || net.is_improper() {
        return;
    }
    let poles: Vec<C> = net.modes.iter().map(|m| m.pole).collect();
    let pmax = poles.iter().map(|p| p.norm()).fold(0.0, f64::max);
    if pmax == 0.0 {
        return;
    }
    let h = |s: C| transfer(d, s);
    // Residues of simple poles: r = (1/2πi)∮ H ds = mean over the circle of (s − p)·H(s).
    let mut new_res: Vec<Option<C>> = vec![None; poles.len()];
    for (k, m) in net.modes.iter().enumerate() {
        if m.multiplicity() != 1 || m.pole.im < 0.0 {
            continue;
        }
        let gap = poles
            .iter()
            .enumerate()
            .filter(|&(j, _)| j != k)
            .map(|(_, q)| (q - m.pole).norm())
            .fold(f64::INFINITY, f64::min);
        let radius = 0.25
            * gap.min(if m.pole.norm() > 0.0 {
                4.0 * m.pole.norm()
            } else {
                pmax
            });
        if radius.partial_cmp(&(1e-9 * pmax)) != Some(std::cmp::Ordering::Greater) {
            continue;
        }
        new_res[k] = circle_mean(m.pole, radius, &|s| h(s).map(|v| v * (s - m.pole)));
    }
    // D is the mean of H on a circle enclosing every pole; h(0⁺) = Σ r is the mean of s·H(s)
    // there (the 1/s coefficient of the expansion at infinity): an initial-value theorem
    // independent of the per-pole contours.
    let big = 4.0 * pmax;
    let origin = C::new(0.0, 0.0);
    let (Some(direct), Some(h0)) = (
        circle_mean(origin, big, &h),
        circle_mean(origin, big, &|s| h(s).map(|v| v * s)),
    ) else {
        return;
    };
    for (k, r) in new_res.iter().enumerate() {
        if let Some(r) = r {
            let r = if net.modes[k].pole.im == 0.0 {
                C::new(r.re, 0.0)
            } else {
                *r
            };
            net.modes[k].residues[0] = r;
            // The lower member of a conjugate pair takes the exact conjugate.
            let conj = net.modes[k].pole.conj();
            if let Some(j) = net
                .modes
                .iter()
                .position(|m| m.pole == conj && m.pole.im < 0.0)
            {
                net.modes[j].residues[0] = r.conj();
            }
        }
    }
    // Size of h near the origin, each Laurent term at its own time scale.
    let scale = net.size();
    net.direct = if direct.re.abs() <= 1e-12 * (1.0 + scale / pmax) {
        0.0
    } else {
        direct.re
    };
    net.h0_ivt = super::function::unless_rounding(h0.re, scale);
}
