//! The switch cell's voltage and current over a box of converter
//! operating points: what the grids of a range or of a tolerance box must
//! cover.

use timing_core::{CellPoint, Topology};

/// A closed interval `(lo, hi)`.
pub type Range = (f64, f64);

/// The ranges of the cell voltage (volt) and the cell current (ampere)
/// over the box `vin` x `io` of converter input voltages (volt) and output
/// currents (ampere), from its four corners: the cell mapping is monotonic
/// in each (buck V = Vin, I = Io; boost V = Vout, I = Io*Vout/Vin;
/// buck-boost V = Vin + Vout, I = Io*(Vin + Vout)/Vin). The normalised
/// load over the box lies between `i.0*Z0/v.1` and `i.1*Z0/v.0`.
///
/// # Errors
/// timing-core's error for the first corner that is no operating point
/// (`vout_v` missing for a boost, an input above it, a current of zero).
pub fn cell_box(
    topology: Topology,
    vout_v: Option<f64>,
    vin: Range,
    io: Range,
) -> Result<(Range, Range), timing_core::Error> {
    let (mut v, mut i) = ((f64::INFINITY, 0.0f64), (f64::INFINITY, 0.0f64));
    for x in [vin.0, vin.1] {
        for y in [io.0, io.1] {
            let c = CellPoint::from_converter(topology, x, vout_v.unwrap_or(f64::NAN), y)?;
            v = (v.0.min(c.v_volt()), v.1.max(c.v_volt()));
            i = (i.0.min(c.i_amp()), i.1.max(c.i_amp()));
        }
    }
    Ok((v, i))
}
