//! The resonant tank: Lr in series with the switch, Cr across it.

use crate::error::{derived, positive, Error, Quantity};
use crate::Real;

/// A validated resonant tank: Lr (H) and Cr (F), both positive and normal,
/// with its characteristic impedance and resonant frequency precomputed.
///
/// Cr is the whole capacitance across the switch: the external capacitor plus
/// the MOSFET's output capacitance (charge-equivalent value at the operating
/// voltage, see DESIGN.md section 3).
///
/// ```
/// # fn main() -> Result<(), timing_core::Error> {
/// let tank = timing_core::Tank::new(1.0e-6_f64, 6.8e-9)?;
/// assert!((tank.z0_ohm() - 12.127).abs() < 1e-3); // sqrt(1e-6 / 6.8e-9)
/// # Ok(()) }
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(
    feature = "serde",
    serde(
        try_from = "crate::serde_types::TankParams<F>",
        bound(deserialize = "F: Real + serde::Deserialize<'de>")
    )
)]
pub struct Tank<F> {
    lr: F,
    cr: F,
    z0: F,
    w0: F,
}

impl<F: Real> Tank<F> {
    /// Build a tank from Lr in henry and Cr in farad.
    ///
    /// # Errors
    /// [`Error::NotFinite`], [`Error::NotPositive`] or [`Error::Subnormal`]
    /// naming the offending component; [`Error::Overflow`] when Z0 or w0 do
    /// not fit the float type (components dozens of decades off any real part).
    pub fn new(lr_h: F, cr_f: F) -> Result<Self, Error> {
        let lr = positive(Quantity::ResonantInductance, lr_h)?;
        let cr = positive(Quantity::ResonantCapacitance, cr_f)?;
        // sqrt each factor first: the product Lr*Cr underflows f32 for
        // ordinary parts long before sqrt(Lr)*sqrt(Cr) does.
        let (sl, sc) = (lr.sqrt(), cr.sqrt());
        let z0 = derived(Quantity::CharacteristicImpedance, sl / sc)?;
        let w0 = derived(Quantity::ResonantFrequency, F::ONE / (sl * sc))?;
        Ok(Self { lr, cr, z0, w0 })
    }

    /// Resonant inductance Lr, henry.
    #[must_use]
    pub fn lr_h(&self) -> F {
        self.lr
    }

    /// Resonant capacitance Cr, farad.
    #[must_use]
    pub fn cr_f(&self) -> F {
        self.cr
    }

    /// Characteristic impedance Z0 = sqrt(Lr/Cr), ohm (within 1 ulp).
    #[must_use]
    pub fn z0_ohm(&self) -> F {
        self.z0
    }

    /// Normalised load J = I*Z0/V of `cell` on this tank (dimensionless,
    /// within 2 ulp): ZVS needs J >= 1. For the buck, boost and buck-boost
    /// cells alike it equals Io*Z0/Vin of the converter.
    #[must_use]
    pub fn normalized_load(&self, cell: &crate::CellPoint<F>) -> F {
        cell.i_amp() * self.z0 / cell.v_volt()
    }

    /// Resonant angular frequency w0 = 1/sqrt(Lr*Cr), rad/s (within 2 ulp).
    #[must_use]
    pub fn w0_rad_s(&self) -> F {
        self.w0
    }

    /// Resonant frequency f0 = w0/(2*pi), hertz.
    #[must_use]
    pub fn f0_hz(&self) -> F {
        self.w0 / F::TAU
    }
}
