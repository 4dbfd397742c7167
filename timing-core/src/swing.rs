//! The node's swing, shared by the resonant cell's ring ([`crate::ring`])
//! and the half-bridge leg's edges ([`crate::leg`]): a voltage `u` across
//! a capacitance `C(u)` that is linear between points, driven by an
//! inductor current `i`,
//!
//! `C(u)*u' = i,  L*i' = E - u - R*i`
//!
//! with `E` the voltage the inductor's far end holds the node towards and
//! `R` the loop's resistance. Classical fourth-order Runge-Kutta with a
//! step of [`STEP_ANGLE`] radian of the local resonance (and at most that
//! angle of the loop's time constant `L/R`); steps end on the
//! capacitance's points, where its slope jumps (Newton on the step
//! length), and events are located on the cubic Hermite interpolant of a
//! step. The accuracy is measured where the two users state it.

use crate::coss::{Piece, SwitchCapacitance};
use crate::Real;

/// Integration step as an angle of the local resonance, radian.
pub const STEP_ANGLE: f64 = 0.05;

/// A capacitance linear between points.
pub(crate) trait Capacitance<F> {
    /// The linear piece at `u`, or, on a point, the one `u` heads into
    /// (`rising`).
    fn piece(&self, u: F, rising: bool) -> Piece<F>;

    /// The nearest point strictly ahead of `u` in its direction (points at
    /// or below zero are not landed on when falling: zero is an event of
    /// its own).
    fn next_point(&self, u: F, rising: bool) -> Option<F>;
}

impl<F: Real> Capacitance<F> for SwitchCapacitance<'_, F> {
    fn piece(&self, u: F, rising: bool) -> Piece<F> {
        SwitchCapacitance::piece(self, u, rising)
    }

    fn next_point(&self, u: F, rising: bool) -> Option<F> {
        let curve = self.curve();
        if rising {
            curve
                .get(curve.partition_point(|p| p.volts <= u))
                .map(|p| p.volts)
        } else {
            curve
                .partition_point(|p| p.volts < u)
                .checked_sub(1)
                .and_then(|j| curve.get(j))
                .map(|p| p.volts)
                .filter(|&v| v > F::ZERO)
        }
    }
}

/// State of the swing: node voltage (V) and inductor current (A).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct State<F> {
    pub(crate) v: F,
    pub(crate) i: F,
}

/// The loop's inductance (with its reciprocal) and resistance, validated
/// by the owner.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Loop<F> {
    pub(crate) l: F,
    pub(crate) inv_l: F,
    pub(crate) r: F,
}

impl<F: Real> Loop<F> {
    pub(crate) fn slope(&self, e: F, c: &Piece<F>, y: State<F>) -> State<F> {
        State {
            v: y.i / c.at(y.v),
            i: (e - y.v - self.r * y.i) * self.inv_l,
        }
    }

    pub(crate) fn rk4(&self, e: F, c: &Piece<F>, y: State<F>, k1: State<F>, h: F) -> State<F> {
        let at = |k: State<F>, f: F| State {
            v: y.v + k.v * f,
            i: y.i + k.i * f,
        };
        let half = h * F::HALF;
        let k2 = self.slope(e, c, at(k1, half));
        let k3 = self.slope(e, c, at(k2, half));
        let k4 = self.slope(e, c, at(k3, h));
        let six = F::from_u32(6);
        State {
            v: y.v + h / six * (k1.v + F::TWO * (k2.v + k3.v) + k4.v),
            i: y.i + h / six * (k1.i + F::TWO * (k2.i + k3.i) + k4.i),
        }
    }

    /// The integration step at `u` on `piece`: [`STEP_ANGLE`] of the local
    /// resonance, `sqrt(L*C(u))`, and at most that angle of the loop's time
    /// constant `L/R`, second.
    pub(crate) fn full_step(&self, piece: &Piece<F>, u: F) -> F {
        let theta = F::from_f64(STEP_ANGLE);
        let local = theta * (self.l * piece.at(u)).sqrt();
        if self.r > F::ZERO {
            let r_limit = theta * self.l / self.r;
            if r_limit < local {
                return r_limit;
            }
        }
        local
    }

    /// The step `h`, shortened so that it ends (to first order) on the next
    /// point of the capacitance the voltage is heading for: the slope jumps
    /// there, and a step across it would lose the method's order.
    pub(crate) fn step_to_point(
        &self,
        cap: &impl Capacitance<F>,
        y: State<F>,
        k: State<F>,
        h: F,
    ) -> (F, Option<F>) {
        match cap.next_point(y.v, k.v > F::ZERO) {
            Some(p) if k.v != F::ZERO => {
                let to = (p - y.v) / k.v;
                if to < h && to > F::ZERO {
                    (to, Some(p))
                } else {
                    (h, None)
                }
            }
            _ => (h, None),
        }
    }

    /// One step from `y` (slope `k`) on `piece`, at most `full` long: ended
    /// on the capacitance's next point when it lies within the step (Newton
    /// on the step length, to fourth order and better; near an extremum
    /// the point may be out of reach, and then the plain step is taken).
    /// The step's length and the state at its end.
    pub(crate) fn advance(
        &self,
        cap: &impl Capacitance<F>,
        e: F,
        piece: &Piece<F>,
        y: State<F>,
        k: State<F>,
        full: F,
    ) -> (F, State<F>) {
        let (mut h, target) = self.step_to_point(cap, y, k, full);
        let mut next = self.rk4(e, piece, y, k, h);
        if let Some(p) = target {
            let mut landed = true;
            for _ in 0..2 {
                let d = next.i / piece.at(next.v);
                let hn = if d == F::ZERO {
                    full + full
                } else {
                    h + (p - next.v) / d
                };
                if !(hn > F::ZERO && hn <= full) {
                    landed = false;
                    break;
                }
                h = hn;
                next = self.rk4(e, piece, y, k, h);
            }
            if landed {
                // On the point exactly (the residual is at rounding level),
                // so the next step takes the next piece.
                next.v = p;
            } else {
                h = full;
                next = self.rk4(e, piece, y, k, h);
            }
        }
        (h, next)
    }
}

/// Which of a step's two events comes first, as fractions of the step:
/// `(true, a)` for the `wanted` one (the window opening) when it is not
/// after the `other` (the swing's turning point), `(false, b)` for that
/// one, `None` when neither falls inside the step.
pub(crate) fn first_event<F: Real>(wanted: Option<F>, other: Option<F>) -> Option<(bool, F)> {
    match (wanted, other) {
        (Some(a), Some(b)) if b < a => Some((false, b)),
        (Some(a), _) => Some((true, a)),
        (None, Some(b)) => Some((false, b)),
        (None, None) => None,
    }
}

/// Cubic Hermite interpolation on one step at fraction `s` of it.
pub(crate) fn hermite<F: Real>(y0: F, y1: F, d0: F, d1: F, h: F, s: F) -> F {
    let s2 = s * s;
    let s3 = s2 * s;
    let two = F::TWO;
    let three = F::from_u32(3);
    (two * s3 - three * s2 + F::ONE) * y0
        + (s3 - two * s2 + s) * h * d0
        + (three * s2 - two * s3) * y1
        + (s3 - s2) * h * d1
}

/// The fraction of the step in `[0, upto]` where the Hermite interpolant
/// of a component, positive at 0 and not at `upto`, crosses zero.
pub(crate) fn crossing<F: Real>(y0: F, y1: F, d0: F, d1: F, h: F, upto: F) -> F {
    // Illinois (modified regula falsi): bracketing like bisection,
    // converging superlinearly; 40 rounds are far more than it needs.
    let p = |s: F| hermite(y0, y1, d0, d1, h, s);
    let (mut a, mut b) = (F::ZERO, upto);
    let (mut fa, mut fb) = (y0, p(upto));
    let mut side = 0i8;
    for _ in 0..40 {
        if fa - fb == F::ZERO {
            break;
        }
        let c = (a * fb - b * fa) / (fb - fa);
        let c = if c > a && c < b { c } else { (a + b) * F::HALF };
        let fc = p(c);
        if fc > F::ZERO {
            a = c;
            fa = fc;
            if side == 1 {
                fb = fb * F::HALF;
            }
            side = 1;
        } else {
            b = c;
            fb = fc;
            if side == -1 {
                fa = fa * F::HALF;
            }
            side = -1;
        }
        if b - a <= F::from_f64(1e-12) * upto || fc == F::ZERO {
            break;
        }
    }
    if fa.abs() < fb.abs() {
        a
    } else {
        b
    }
}
