//! What every layout builder shares: the table's sensing (code ranges and
//! the lookup's ZVS test) and its entries in fixed point.

use timing_core::table::Sensing;

use crate::model::design::Design;

/// Bits needed to hold `x`.
pub(super) fn bits(x: u32) -> u32 {
    32 - x.leading_zeros()
}

/// The ZVS test multipliers. J = Io*Z0/Vin >= 1 with Io = ki*(io - zero)
/// and Vin = kv*vin reads `(io - zero)*ki*Z0 >= vin*kv`: the multipliers
/// are ki*Z0 and kv, scaled so the larger is 65535.
pub(super) fn zvs_multipliers(design: &Design) -> (u16, u16) {
    let a = design.io_amps_per_code * design.zvs_z0_ohm;
    let b = design.vin_volts_per_code;
    let scale = f64::from(u16::MAX) / a.max(b);
    (
        (a * scale).round().max(1.0) as u16,
        (b * scale).round().max(1.0) as u16,
    )
}

pub(super) fn sensing(design: &Design) -> Sensing {
    let (zvs_io_mul, zvs_vin_mul) = zvs_multipliers(design);
    Sensing {
        vin: design.vin_codes,
        io: design.io_codes,
        io_zero: design.io_zero_code,
        zvs_io_mul,
        zvs_vin_mul,
    }
}

pub(super) fn entry(ticks: f64, frac_bits: u32) -> u16 {
    (ticks * f64::from(1u32 << frac_bits))
        .round()
        .clamp(0.0, f64::from(u16::MAX)) as u16
}
