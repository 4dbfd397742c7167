//! The capacitance across the switch when it is not constant: a fixed part
//! (the external resonant capacitor) plus the MOSFET's voltage-dependent
//! output capacitance Coss(v), given as points read off a datasheet curve
//! and taken as linear between them (flat before the first point and after
//! the last).
//!
//! From the curve follow the charge Q(V) = integral of C from 0 to V and the
//! stored energy E(V) = integral of u*C(u) from 0 to V, and with them the
//! equivalent constant capacitances of the trade (DESIGN.md section 3):
//! - charge-equivalent Co(tr) = Q(V)/V: the one that gives the duration of
//!   the linear charge, T1 = Co(tr)*V/I;
//! - energy-equivalent Co(er) = 2E(V)/V^2: the one that gives the stored
//!   energy, and so the turn-on loss;
//! - the boundary equivalent 2*Co(tr) - Co(er): the one whose
//!   characteristic impedance gives the ZVS boundary of the lossless ring,
//!   from the energy balance 1/2*Lr*I^2 >= V*Q(V) - E(V).
//!
//! Each includes the fixed part (a constant capacitance is its own charge-,
//! energy- and boundary-equivalent). The integrals are exact for the
//! piecewise-linear curve (trapezoid rule for Q, Simpson's rule for E, both
//! exact on linear pieces), up to rounding.

use crate::error::{non_negative, positive, Error, Quantity};
use crate::Real;

/// One point of an output-capacitance curve: Coss in farad at a
/// drain-source voltage in volt.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct CossPoint<F> {
    /// Drain-source voltage, volt (0 or more).
    pub volts: F,
    /// Output capacitance at that voltage, farad (more than 0).
    pub farads: F,
}

/// One linear piece of the capacitance: c0 + slope*(v - v0), farad.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Piece<F> {
    pub(crate) v0: F,
    pub(crate) c0: F,
    pub(crate) slope: F,
}

impl<F: Real> Piece<F> {
    /// The capacitance at `v`, farad.
    #[inline]
    pub(crate) fn at(&self, v: F) -> F {
        self.c0 + self.slope * (v - self.v0)
    }
}

/// The validated capacitance across the switch: `fixed` farad in parallel
/// with a piecewise-linear Coss(v) curve (which may be empty).
///
/// ```
/// # fn main() -> Result<(), timing_core::Error> {
/// use timing_core::coss::{CossPoint, SwitchCapacitance};
/// let curve = [
///     CossPoint { volts: 0.0_f64, farads: 2.0e-9 },
///     CossPoint { volts: 20.0, farads: 0.5e-9 },
/// ];
/// let c = SwitchCapacitance::new(4.7e-9, &curve)?;
/// assert_eq!(c.at(10.0), 4.7e-9 + 1.25e-9);
/// // Q(20 V) = 20 V * (2.0 + 0.5)/2 nF = 25 nC of Coss, plus 94 nC in the fixed part.
/// assert!((c.charge(20.0) - 119.0e-9).abs() < 1e-18);
/// assert!(c.energy_equivalent(20.0) < c.charge_equivalent(20.0));
/// # Ok(()) }
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SwitchCapacitance<'a, F> {
    fixed: F,
    curve: &'a [CossPoint<F>],
    min: F,
    max: F,
}

impl<'a, F: Real> SwitchCapacitance<'a, F> {
    /// A capacitance of `fixed_f` farad in parallel with the curve `coss`
    /// (points in rising voltage; may be empty when `fixed_f` > 0).
    ///
    /// # Errors
    /// [`Error::Negative`]/[`Error::NotFinite`] on the fixed part
    /// ([`Quantity::ResonantCapacitance`]); on a point, the same errors naming
    /// [`Quantity::CossVoltage`] or [`Quantity::CossCapacitance`] (with the
    /// offending value); [`Error::OutOfRange`] on a voltage that does not rise
    /// above the one before it (its allowed minimum is that voltage);
    /// [`Error::NotPositive`] on the fixed part when the curve is empty.
    pub fn new(fixed_f: F, coss: &'a [CossPoint<F>]) -> Result<Self, Error> {
        let fixed = non_negative(Quantity::ResonantCapacitance, fixed_f)?;
        let mut previous: Option<F> = None;
        let (mut min, mut max) = (F::ZERO, F::ZERO);
        for (k, p) in coss.iter().enumerate() {
            let v = non_negative(Quantity::CossVoltage, p.volts)?;
            let c = positive(Quantity::CossCapacitance, p.farads)?;
            if let Some(prev) = previous {
                if v <= prev {
                    return Err(Error::OutOfRange {
                        quantity: Quantity::CossVoltage,
                        value: v.to_f64(),
                        min: prev.to_f64(),
                        max: f64::INFINITY,
                    });
                }
            }
            if k == 0 || c < min {
                min = c;
            }
            if k == 0 || c > max {
                max = c;
            }
            previous = Some(v);
        }
        if coss.is_empty() {
            positive(Quantity::ResonantCapacitance, fixed)?;
        }
        Ok(Self {
            fixed,
            curve: coss,
            min: fixed + min,
            max: fixed + max,
        })
    }

    /// The fixed part, farad.
    #[must_use]
    pub fn fixed_f(&self) -> F {
        self.fixed
    }

    /// The Coss curve as given.
    #[must_use]
    pub fn curve(&self) -> &'a [CossPoint<F>] {
        self.curve
    }

    /// Whether the capacitance is the same at every voltage (no curve, or a
    /// curve of one point).
    #[must_use]
    pub fn is_constant(&self) -> bool {
        self.curve.len() <= 1
    }

    /// Smallest capacitance at any voltage, farad.
    #[must_use]
    pub fn min_f(&self) -> F {
        self.min
    }

    /// Largest capacitance at any voltage, farad.
    #[must_use]
    pub fn max_f(&self) -> F {
        self.max
    }

    /// Capacitance across the switch at switch voltage `v` (volt), farad:
    /// the fixed part plus Coss linear between the curve's points, flat
    /// outside them (exact for the piecewise-linear curve up to rounding).
    #[must_use]
    pub fn at(&self, v: F) -> F {
        let k = self.curve.partition_point(|p| p.volts <= v);
        let coss = match (
            k.checked_sub(1).and_then(|j| self.curve.get(j)),
            self.curve.get(k),
        ) {
            (Some(a), Some(b)) => {
                a.farads + (b.farads - a.farads) * (v - a.volts) / (b.volts - a.volts)
            }
            (Some(a), None) => a.farads,
            (None, Some(b)) => b.farads,
            (None, None) => F::ZERO,
        };
        self.fixed + coss
    }

    /// The linear piece of C(v) the voltage `v` is in, or, on a point of
    /// the curve, the one it is heading into (`rising`). The piece's formula
    /// continues past its ends, so an integrator step that overshoots a
    /// little sees no kink; below the first point and above the last the
    /// piece is flat.
    pub(crate) fn piece(&self, v: F, rising: bool) -> Piece<F> {
        let k = if rising {
            self.curve.partition_point(|p| p.volts <= v)
        } else {
            self.curve.partition_point(|p| p.volts < v)
        };
        self.piece_below(k)
    }

    /// The piece between the curve's points `k - 1` and `k` (flat beyond
    /// the ends): for a caller that located the voltage itself.
    pub(crate) fn piece_below(&self, k: usize) -> Piece<F> {
        match (
            k.checked_sub(1).and_then(|j| self.curve.get(j)),
            self.curve.get(k),
        ) {
            (Some(a), Some(b)) => Piece {
                v0: a.volts,
                c0: self.fixed + a.farads,
                slope: (b.farads - a.farads) / (b.volts - a.volts),
            },
            (Some(a), None) | (None, Some(a)) => Piece {
                v0: a.volts,
                c0: self.fixed + a.farads,
                slope: F::ZERO,
            },
            (None, None) => Piece {
                v0: F::ZERO,
                c0: self.fixed,
                slope: F::ZERO,
            },
        }
    }

    /// Charge Q(v) and energy E(v) stored at switch voltage `v` >= 0 (coulomb,
    /// joule); 0 for `v` <= 0.
    fn integrals(&self, v: F) -> (F, F) {
        if v <= F::ZERO {
            return (F::ZERO, F::ZERO);
        }
        let (mut q, mut e) = (F::ZERO, F::ZERO);
        let mut a = F::ZERO;
        let mut ca = self.at(F::ZERO);
        let six = F::from_u32(6);
        let four = F::from_u32(4);
        for p in self.curve {
            let ck = self.fixed + p.farads;
            if p.volts <= a {
                ca = ck;
                continue;
            }
            let b = if v < p.volts { v } else { p.volts };
            let cb = ca + (ck - ca) * (b - a) / (p.volts - a);
            let (m, cm) = ((a + b) * F::HALF, (ca + cb) * F::HALF);
            q = q + (b - a) * (ca + cb) * F::HALF;
            e = e + (b - a) / six * (a * ca + four * m * cm + b * cb);
            if v <= p.volts {
                return (q, e);
            }
            a = p.volts;
            ca = ck;
        }
        (q + (v - a) * ca, e + ca * (v * v - a * a) * F::HALF)
    }

    /// Charge to bring the switch from 0 to `v` volt, coulomb:
    /// Q(v) = integral of C(u) du from 0 to v (0 for `v` <= 0).
    #[must_use]
    pub fn charge(&self, v: F) -> F {
        self.integrals(v).0
    }

    /// Energy stored at `v` volt, joule: E(v) = integral of u*C(u) du from 0
    /// to v (0 for `v` <= 0).
    #[must_use]
    pub fn energy(&self, v: F) -> F {
        self.integrals(v).1
    }

    /// Charge-equivalent capacitance Co(tr) = Q(v)/v at `v` > 0 volt, farad
    /// (fixed part included); at `v` <= 0, the capacitance at 0 V.
    #[must_use]
    pub fn charge_equivalent(&self, v: F) -> F {
        if v <= F::ZERO {
            return self.at(F::ZERO);
        }
        self.charge(v) / v
    }

    /// Energy-equivalent capacitance Co(er) = 2E(v)/v^2 at `v` > 0 volt,
    /// farad (fixed part included); at `v` <= 0, the capacitance at 0 V.
    #[must_use]
    pub fn energy_equivalent(&self, v: F) -> F {
        if v <= F::ZERO {
            return self.at(F::ZERO);
        }
        F::TWO * self.energy(v) / (v * v)
    }

    /// Boundary-equivalent capacitance 2*Co(tr) - Co(er) at `v` > 0 volt,
    /// farad: the constant capacitance whose lossless ring has the same ZVS
    /// boundary, I*sqrt(Lr/C) = v (from 1/2*Lr*I^2 = v*Q(v) - E(v)). Always
    /// positive (it is 2/v^2 times the integral of (v - u)*C(u) from 0 to v).
    #[must_use]
    pub fn boundary_equivalent(&self, v: F) -> F {
        if v <= F::ZERO {
            return self.at(F::ZERO);
        }
        let (q, e) = self.integrals(v);
        F::TWO * (v * q - e) / (v * v)
    }
}
