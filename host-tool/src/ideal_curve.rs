//! The ideal tank's turn-on at interpolation speed, with its error counted.
//!
//! The exhaustive check of an ideal-tank design evaluates timing-core's
//! closed forms ([`timing_core::Transition`]) at every code pair; their one
//! costly step is `asin(1/J)` in the window's opening (libm, about as long
//! as everything else together). This module tabulates it once per
//! process over the whole load range and answers by a four-point Lagrange
//! cubic, with a bound.
//!
//! # Coordinate
//! `rho = sigma/(1 + sigma)` with `sigma = sqrt(J - 1)` maps `J` in
//! `[1, inf)` onto `[0, 1)`. `asin(1/J) = pi/2 - atan(sigma*sqrt(sigma^2 +
//! 2))` is analytic in sigma at the boundary (the square root of the
//! window's opening is in sigma itself) and falls as `1/sigma^2 = ((1 -
//! rho)/rho)^2` at heavy load, smooth in rho up to 1 (derived here, no
//! source).
//!
//! # The bound
//! Each cell's bound is [`EPS_FACTOR`] times the largest difference from
//! libm's `asin` at the cell's quarter points, plus [`ROUND_RAD`] for the
//! rounding of the query's own arithmetic; tested against libm at dense
//! random loads (`cargo test -p host-tool --lib ideal_curve --
//! --nocapture`).

use std::sync::OnceLock;

use timing_core::{CellPoint, Tank, TurnOn, Valley, ZvsWindow};

/// Cells over `rho` in `[0, 1]`.
const CELLS: usize = 1 << 14;
/// Safety factor on the largest difference measured in a cell.
pub const EPS_FACTOR: f64 = 2.0;
/// Allowance for the rounding of the query's arithmetic, radian.
pub const ROUND_RAD: f64 = 1e-12;

/// `asin(1/J)` tabulated over `rho`.
#[derive(Debug)]
struct Curve {
    /// Node values at `rho = k/CELLS`, `k = 0..=CELLS`.
    nodes: Vec<f64>,
    /// Bound of each cell, radian.
    eps: Vec<f64>,
}

fn exact(rho: f64) -> f64 {
    if rho >= 1.0 {
        return 0.0;
    }
    let sigma = rho / (1.0 - rho);
    (1.0 / (1.0 + sigma * sigma)).asin()
}

/// The cubic through the four nodes around `u` (node units), and the cell.
fn interp(nodes: &[f64], u: f64) -> Option<(f64, usize)> {
    let last = (nodes.len() - 1) as f64;
    if !(0.0..=last).contains(&u) {
        return None;
    }
    let cell = (u as usize).min(nodes.len() - 2);
    let first = cell.saturating_sub(1).min(nodes.len() - 4);
    let t = u - first as f64;
    let (a, b, c) = (t - 1.0, t - 2.0, t - 3.0);
    const SIXTH: f64 = 1.0 / 6.0;
    let w = [
        -a * b * c * SIXTH,
        t * b * c * 0.5,
        -t * a * c * 0.5,
        t * a * b * SIXTH,
    ];
    let n = nodes.get(first..first + 4)?;
    Some((w[0] * n[0] + w[1] * n[1] + w[2] * n[2] + w[3] * n[3], cell))
}

fn curve() -> &'static Curve {
    static CURVE: OnceLock<Curve> = OnceLock::new();
    CURVE.get_or_init(|| {
        let h = 1.0 / CELLS as f64;
        let nodes: Vec<f64> = (0..=CELLS).map(|k| exact(k as f64 * h)).collect();
        let eps = (0..CELLS)
            .map(|c| {
                let worst = [0.25, 0.5, 0.75]
                    .iter()
                    .map(|f| {
                        let u = c as f64 + f;
                        interp(&nodes, u).map_or(f64::INFINITY, |(y, _)| (y - exact(u * h)).abs())
                    })
                    .fold(0.0f64, f64::max);
                EPS_FACTOR * worst + ROUND_RAD
            })
            .collect();
        Curve { nodes, eps }
    })
}

/// `asin(1/j)` for `j >= 1` and the bound of its difference from libm's,
/// radian; `None` below 1 or for a non-finite `j`.
#[must_use]
pub fn asin_inv(j: f64) -> Option<(f64, f64)> {
    if !(j >= 1.0 && j.is_finite()) {
        return None;
    }
    let sigma = (j - 1.0).sqrt();
    let rho = sigma / (1.0 + sigma);
    let c = curve();
    let (y, cell) = interp(&c.nodes, rho * CELLS as f64)?;
    Some((y, *c.eps.get(cell)?))
}

/// The ideal cell's turn-on as angles of its resonance at normalised load
/// `j`: timing-core's closed forms ([`timing_core::Transition::new`]: the
/// charge `w0*T1 = 1/J`, then `pi + asin(1/J)` to the opening,
/// `sqrt(J^2 - 1)` more to the close, `J` more to the ramp's end; the
/// valley `3*pi/2` after the charge) with `asin(1/J)` from the curve;
/// every time in radian (times `1/w0` for seconds).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Angles {
    /// `[open, close]` of the window, or `[valley, valley]`.
    pub interval: [f64; 2],
    /// End of the current ramp.
    pub ramp_end: f64,
    /// Whether the window exists (J >= 1).
    pub zvs: bool,
    /// Bound of each angle's difference from the closed forms', radian.
    pub eps: f64,
}

/// [`Angles`] at normalised load `j`; `None` for a non-finite or
/// non-positive `j`.
#[must_use]
pub fn angles(j: f64) -> Option<Angles> {
    use timing_core::normalized as n;
    if !(j > 0.0 && j.is_finite()) {
        return None;
    }
    let charge = 1.0 / j;
    Some(if j >= 1.0 {
        let (asin, eps) = asin_inv(j)?;
        let open = charge + core::f64::consts::PI + asin;
        let close = open + n::clamp_angle(j);
        Angles {
            interval: [open, close],
            ramp_end: close + n::ramp_angle(j),
            zvs: true,
            // The curve's bound, and a few ulp of the sums.
            eps: eps + 8.0 * f64::EPSILON * close,
        }
    } else {
        let valley = charge + n::valley_ring_angle::<f64>();
        Angles {
            interval: [valley, valley],
            ramp_end: valley + n::ramp_angle(j),
            zvs: false,
            eps: 8.0 * f64::EPSILON * valley,
        }
    })
}

/// The turn-on of the ideal `tank` at `cell` from [`angles`], and the bound
/// of its times, second (timing-core's `Cr*V/I` for the charge is `1/(J*w0)`
/// in every cell); `None` where the times are not finite (the caller then
/// asks timing-core).
#[must_use]
pub fn turn_on(tank: &Tank<f64>, cell: &CellPoint<f64>) -> Option<(TurnOn<f64>, f64)> {
    let w0 = tank.w0_rad_s();
    let a = angles(cell.i_amp() * tank.z0_ohm() / cell.v_volt())?;
    let s = a.interval.map(|x| x / w0);
    let ramp_end_s = a.ramp_end / w0;
    let turn_on = if a.zvs {
        TurnOn::Zvs(ZvsWindow {
            open_s: s[0],
            close_s: s[1],
            ramp_end_s,
        })
    } else {
        TurnOn::Valley(Valley {
            valley_s: s[0],
            valley_voltage_v: cell.v_volt() * (1.0 - cell.i_amp() * tank.z0_ohm() / cell.v_volt()),
            ramp_end_s,
        })
    };
    // Dividing by w0 rounds once more.
    ramp_end_s
        .is_finite()
        .then_some((turn_on, a.eps / w0 + 2.0 * f64::EPSILON * ramp_end_s))
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    #[test]
    fn asin_within_its_bound_at_dense_random_loads() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(1);
        let (mut worst, mut widest) = (0.0f64, 0.0f64);
        for k in 0..2_000_000 {
            // Half near the boundary, half over decades of load.
            let j = if k % 2 == 0 {
                1.0 + rng.random_range(0.0..1e-2f64)
            } else {
                10f64.powf(rng.random_range(0.0..5.0))
            };
            let (y, e) = asin_inv(j).unwrap();
            let d = (y - (1.0 / j).asin()).abs();
            assert!(d <= e, "J = {j}: off by {d:e}, bound {e:e}");
            worst = worst.max(d / e);
            widest = widest.max(e);
        }
        println!("asin(1/J) from the curve: largest difference/bound {worst:.3}, widest bound {widest:.2e} rad");
        assert!(asin_inv(0.999).is_none() && asin_inv(f64::NAN).is_none());
    }

    #[test]
    fn turn_on_matches_the_closed_forms() {
        let tank = Tank::new(1e-6, 6.8e-9).unwrap();
        let mut rng = rand::rngs::StdRng::seed_from_u64(2);
        for _ in 0..200_000 {
            let cell =
                CellPoint::new(rng.random_range(1.0..100.0), rng.random_range(0.01..30.0)).unwrap();
            let (fast, eps) = turn_on(&tank, &cell).unwrap();
            let exact = timing_core::Transition::new(&tank, &cell)
                .unwrap()
                .turn_on();
            match (fast, exact) {
                (TurnOn::Zvs(a), TurnOn::Zvs(b)) => {
                    assert!((a.open_s - b.open_s).abs() <= eps, "{a:?} {b:?} {eps:e}");
                    assert!((a.close_s - b.close_s).abs() <= eps, "{a:?} {b:?} {eps:e}");
                }
                (TurnOn::Valley(a), TurnOn::Valley(b)) => {
                    assert!((a.valley_s - b.valley_s).abs() <= eps, "{a:?} {b:?}");
                }
                (a, b) => panic!("{a:?} vs {b:?}"),
            }
        }
    }
}
