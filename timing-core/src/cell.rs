//! Mapping converter quantities (Vin, Vout, Io) to the quantities the
//! resonant switch cell sees (cell voltage V, cell current I).

use crate::error::{derived, positive, Error, Quantity};
use crate::Real;

/// The PWM converter the resonant switch sits in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(rename_all = "kebab-case"))]
#[non_exhaustive]
pub enum Topology {
    /// Step-down: V = Vin, I = Io.
    Buck,
    /// Step-up: V = Vout, I = Iin = Io*Vout/Vin.
    Boost,
    /// Inverting buck-boost (Vout given as a magnitude): V = Vin + Vout,
    /// I = Iin + Io = Io*(Vin + Vout)/Vin.
    BuckBoost,
}

impl Topology {
    /// Lower-case name as used on the command line: `buck`, `boost`, `buck-boost`.
    #[must_use]
    pub const fn name(self) -> &'static str {
        match self {
            Topology::Buck => "buck",
            Topology::Boost => "boost",
            Topology::BuckBoost => "buck-boost",
        }
    }

    /// Whether the cell quantities depend on Vout (boost, buck-boost).
    #[must_use]
    pub const fn needs_vout(self) -> bool {
        !matches!(self, Topology::Buck)
    }
}

/// A validated switch-cell operating point: cell voltage V (volt) and cell
/// current I (ampere), both positive and normal. The transition depends on
/// these two alone.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(
    feature = "serde",
    serde(
        try_from = "crate::serde_types::CellParams<F>",
        bound(deserialize = "F: Real + serde::Deserialize<'de>")
    )
)]
pub struct CellPoint<F> {
    v: F,
    i: F,
}

impl<F: Real> CellPoint<F> {
    /// A cell point from V (volt) and I (ampere) directly.
    ///
    /// # Errors
    /// [`Error::NotFinite`], [`Error::NotPositive`] or [`Error::Subnormal`]
    /// naming [`Quantity::CellVoltage`] or [`Quantity::CellCurrent`].
    pub fn new(v_volt: F, i_amp: F) -> Result<Self, Error> {
        Ok(Self {
            v: positive(Quantity::CellVoltage, v_volt)?,
            i: positive(Quantity::CellCurrent, i_amp)?,
        })
    }

    /// The cell point of a lossless converter (power balance Vin*Iin =
    /// Vout*Io) from its input voltage, output voltage and output current.
    ///
    /// For the buck, `vout_volt` is not used and may be anything (it is not
    /// checked). For the boost Vout must exceed Vin; for the buck-boost Vout is
    /// the magnitude of the (inverted) output voltage.
    ///
    /// ```
    /// # fn main() -> Result<(), timing_core::Error> {
    /// use timing_core::{CellPoint, Topology};
    /// // Boost 24 V -> 48 V at 2 A out: the switch sees 48 V and the 4 A input current.
    /// let p = CellPoint::from_converter(Topology::Boost, 24.0_f64, 48.0, 2.0)?;
    /// assert_eq!((p.v_volt(), p.i_amp()), (48.0, 4.0));
    /// # Ok(()) }
    /// ```
    ///
    /// # Errors
    /// As [`CellPoint::new`] for Vin, Io and (where used) Vout; a boost whose
    /// Vout does not exceed Vin gets [`Error::OutOfRange`] on Vout.
    pub fn from_converter(
        topology: Topology,
        vin_volt: F,
        vout_volt: F,
        io_amp: F,
    ) -> Result<Self, Error> {
        let vin = positive(Quantity::InputVoltage, vin_volt)?;
        let io = positive(Quantity::OutputCurrent, io_amp)?;
        let (v, i) = match topology {
            Topology::Buck => (vin, io),
            Topology::Boost => {
                let vout = positive(Quantity::OutputVoltage, vout_volt)?;
                if vout <= vin {
                    return Err(Error::OutOfRange {
                        quantity: Quantity::OutputVoltage,
                        value: vout.to_f64(),
                        min: vin.to_f64(),
                        max: f64::INFINITY,
                    });
                }
                (vout, io * (vout / vin))
            }
            Topology::BuckBoost => {
                let vout = positive(Quantity::OutputVoltage, vout_volt)?;
                let v = vin + vout;
                (v, io * (v / vin))
            }
        };
        Ok(Self {
            v: derived(Quantity::CellVoltage, v)?,
            i: derived(Quantity::CellCurrent, i)?,
        })
    }

    /// Cell voltage V, volt: the voltage the switch blocks when off.
    #[must_use]
    pub fn v_volt(&self) -> F {
        self.v
    }

    /// Cell current I, ampere: the current the switch carries when on,
    /// constant over one transition.
    #[must_use]
    pub fn i_amp(&self) -> F {
        self.i
    }
}
