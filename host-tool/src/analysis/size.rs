//! Sizing the resonant tank before any firmware exists: the interval of
//! characteristic impedance Z0 that gives ZVS over the whole load range
//! within the switch's voltage rating (DESIGN.md section 2), the trade-offs
//! in plain sentences where that interval is empty, Lr and Cr for a
//! resonant frequency, the switching-frequency range that regulates the
//! output (buck), and the budget for the MOSFET's own output capacitance.
//!
//! The relations, per operating corner with cell voltage V and current I
//! (timing-core's cell mapping; buck: V = Vin, I = Io):
//! ZVS needs J = I*Z0/V >= 1, so Z0 >= V/I; the peak switch voltage
//! V*(1 + J) = V + I*Z0 must stay within the derated rating Vmax, so
//! Z0 <= (Vmax - V)/I. Both bounds are monotonic in Vin and Io for every
//! cell, so the corners of the operating range give them exactly.

use serde::Serialize;
use timing_core::{CellPoint, Tank, Topology, Transition};

/// What the user asks for.
#[derive(Debug, Clone, PartialEq)]
pub struct SizeInput {
    /// Converter.
    pub topology: Topology,
    /// Input-voltage range, volt.
    pub vin_v: (f64, f64),
    /// Output-current range, ampere.
    pub io_a: (f64, f64),
    /// Output voltage, volt (boost and buck-boost need it; the buck's
    /// regulation range needs it).
    pub vout_v: Option<f64>,
    /// The switch's drain-source voltage rating, volt.
    pub vds_rating_v: f64,
    /// Fraction of the rating the peak may use (0 < derating <= 1).
    pub derating: f64,
    /// Resonant frequency f0 for the Lr/Cr pairs, hertz.
    pub f0_hz: Option<f64>,
    /// Highest switching frequency allowed, hertz: sets f0 when `f0_hz` is
    /// not given (the largest f0 whose regulation stays below it), and is
    /// checked otherwise.
    pub fs_max_hz: Option<f64>,
}

/// One Lr/Cr pair.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TankPair {
    /// Characteristic impedance, ohm.
    pub z0_ohm: f64,
    /// Resonant inductance, henry.
    pub lr_h: f64,
    /// Resonant capacitance (external plus the MOSFET's output
    /// capacitance), farad.
    pub cr_f: f64,
    /// Highest peak switch voltage over the operating range, volt.
    pub peak_switch_voltage_v: f64,
    /// Switching-frequency range that regulates Vout over the operating
    /// range, hertz (buck with `vout` only; `None` otherwise), over the
    /// points where some frequency does.
    pub fs_range_hz: Option<(f64, f64)>,
    /// Where Vout cannot be regulated at all, one example in a sentence.
    pub unregulated: Option<String>,
}

/// The sizing result.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SizeReport {
    /// Smallest Z0 of the feasible interval, ohm (`None` when it is empty).
    pub z0_min_ohm: Option<f64>,
    /// Largest Z0 of the feasible interval, ohm (`None` when it is empty).
    pub z0_max_ohm: Option<f64>,
    /// The ZVS bound max(V/I), ohm.
    pub zvs_z0_min_ohm: f64,
    /// The stress bound min((Vmax - V)/I), ohm (negative when the derated
    /// rating is below the cell voltage itself).
    pub stress_z0_max_ohm: f64,
    /// Derated voltage limit, volt.
    pub vds_limit_v: f64,
    /// Whether the interval is non-empty.
    pub feasible: bool,
    /// Where it is empty: the lightest output current that keeps ZVS with
    /// the largest Z0 the rating allows, ampere.
    pub lightest_zvs_load_a: Option<f64>,
    /// Where it is empty: the rating needed for ZVS over the whole range
    /// with the smallest Z0 that gives it (at the same derating), volt.
    pub rating_needed_v: Option<f64>,
    /// Where it is empty: the output-current range left to the valley
    /// fallback with the largest Z0 the rating allows, ampere.
    pub valley_load_range_a: Option<(f64, f64)>,
    /// The trade-offs in sentences (empty when the interval is not).
    pub trade_offs: Vec<String>,
    /// Resonant frequency the pairs use, hertz.
    pub f0_hz: Option<f64>,
    /// Lr/Cr at the interval's ends and geometric middle (or, where it is
    /// empty, at the two bounds).
    pub pairs: Vec<TankPair>,
    /// The MOSFET's charge-equivalent output capacitance at the operating
    /// voltage must stay below this Cr (the external capacitor makes up the
    /// rest), farad: the middle pair's, or where the interval is empty the
    /// pair the voltage rating allows.
    pub coss_budget_f: Option<f64>,
    /// The Z0 of the pair whose Cr is the budget, ohm.
    pub coss_budget_z0_ohm: Option<f64>,
    /// Warnings (switching frequency above the limit, missing inputs).
    pub warnings: Vec<String>,
}

/// Why sizing failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SizeError {
    /// An input is out of range; the text names it.
    #[error("{0}")]
    Input(String),
    /// timing-core refused a point.
    #[error(transparent)]
    Model(#[from] timing_core::Error),
}

fn corners(inp: &SizeInput) -> [(f64, f64); 4] {
    let (v0, v1) = inp.vin_v;
    let (i0, i1) = inp.io_a;
    [(v0, i0), (v0, i1), (v1, i0), (v1, i1)]
}

fn cell(inp: &SizeInput, vin: f64, io: f64) -> Result<CellPoint<f64>, timing_core::Error> {
    CellPoint::from_converter(inp.topology, vin, inp.vout_v.unwrap_or(f64::NAN), io)
}

/// The tank of impedance `z0` at resonant frequency `f0`.
fn tank(z0: f64, f0: f64) -> Result<Tank<f64>, timing_core::Error> {
    let w0 = 2.0 * std::f64::consts::PI * f0;
    Tank::new(z0 / w0, 1.0 / (w0 * z0))
}

/// Output current at which J = 1 for input voltage `vin` with impedance
/// `z0` (J grows with Io for every cell), by bisection.
fn zvs_boundary_io(inp: &SizeInput, vin: f64, z0: f64) -> Result<f64, timing_core::Error> {
    zvs_boundary_current_a(inp.topology, inp.vout_v, z0, vin, inp.io_a)
}

/// The output current at which J = I*Z0/V = 1 for input voltage `vin_v`
/// in a cell of impedance `z0_ohm` (J grows with Io for every cell), by
/// bisection over `io_hint` widened a million-fold either way; the ZVS
/// boundary of maps and of sizing.
///
/// # Errors
/// timing-core's error for an impossible point.
pub fn zvs_boundary_current_a(
    topology: Topology,
    vout_v: Option<f64>,
    z0_ohm: f64,
    vin_v: f64,
    io_hint: (f64, f64),
) -> Result<f64, timing_core::Error> {
    let j = |io: f64| {
        CellPoint::from_converter(topology, vin_v, vout_v.unwrap_or(f64::NAN), io)
            .map(|c| c.i_amp() * z0_ohm / c.v_volt())
    };
    let (mut lo, mut hi) = (io_hint.0 * 1e-6, io_hint.1 * 1e6);
    for _ in 0..200 {
        let mid = (lo * hi).sqrt();
        if j(mid)? >= 1.0 {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Ok(hi)
}

/// A point where Vout cannot be regulated: (Vin, Io, lowest reachable ratio).
type Unregulated = (f64, f64, f64);
/// The regulating frequency range, hertz, and an unregulated point.
type Regulation = (Option<(f64, f64)>, Option<Unregulated>);

/// The switching-frequency range regulating Vout over a grid of the
/// operating range (buck only), and the first grid point where no
/// frequency reaches the ratio (the quasi-resonant buck's lowest ratio
/// grows as the load falls).
fn fs_range(inp: &SizeInput, t: &Tank<f64>) -> Result<Regulation, timing_core::Error> {
    let (Topology::Buck, Some(vout)) = (inp.topology, inp.vout_v) else {
        return Ok((None, None));
    };
    let (mut lo, mut hi) = (f64::INFINITY, 0.0f64);
    let mut unreachable = None;
    let n = 12;
    for a in 0..=n {
        for b in 0..=n {
            let vin = inp.vin_v.0 + (inp.vin_v.1 - inp.vin_v.0) * f64::from(a) / f64::from(n);
            let io = inp.io_a.0 + (inp.io_a.1 - inp.io_a.0) * f64::from(b) / f64::from(n);
            let tr = Transition::new(t, &cell(inp, vin, io)?)?;
            match tr.buck_regulation_for_ratio(vout / vin) {
                Ok(r) => {
                    lo = lo.min(r.switching_frequency_hz);
                    hi = hi.max(r.switching_frequency_hz);
                }
                Err(timing_core::Error::OutOfRange { min, .. }) => {
                    unreachable.get_or_insert((vin, io, min));
                }
                Err(e) => return Err(e),
            }
        }
    }
    Ok(((hi > 0.0).then_some((lo, hi)), unreachable))
}

fn pair(inp: &SizeInput, z0: f64, f0: f64) -> Result<TankPair, timing_core::Error> {
    let t = tank(z0, f0)?;
    let (fs_range_hz, unreachable) = fs_range(inp, &t)?;
    let mut peak = 0.0f64;
    for (vin, io) in corners(inp) {
        let c = cell(inp, vin, io)?;
        peak = peak.max(c.v_volt() + c.i_amp() * z0);
    }
    Ok(TankPair {
        z0_ohm: z0,
        lr_h: t.lr_h(),
        cr_f: t.cr_f(),
        peak_switch_voltage_v: peak,
        fs_range_hz,
        unregulated: unreachable.map(|(vin, io, min)| {
            format!(
                "at Z0 = {z0:.3} ohm no switching frequency gives Vout = {:.3} V at Vin = {vin:.3} V, Io = {io:.3} A: the lowest ratio there is {min:.4} (raise the light-load current or lower Z0)",
                inp.vout_v.unwrap_or(f64::NAN)
            )
        }),
    })
}

fn check(inp: &SizeInput) -> Result<(), SizeError> {
    let bad =
        |what: &str, v: f64, need: &str| Err(SizeError::Input(format!("{what} = {v} {need}")));
    let (v0, v1) = inp.vin_v;
    let (i0, i1) = inp.io_a;
    if !(v0.is_finite() && v0 > 0.0 && v1 >= v0 && v1.is_finite()) {
        return bad(
            "--vin low end",
            v0,
            &format!("and high end {v1} must satisfy 0 < low <= high"),
        );
    }
    if !(i0.is_finite() && i0 > 0.0 && i1 >= i0 && i1.is_finite()) {
        return bad(
            "--io low end",
            i0,
            &format!("and high end {i1} must satisfy 0 < low <= high"),
        );
    }
    if !(inp.vds_rating_v.is_finite() && inp.vds_rating_v > 0.0) {
        return bad("--vds-rating", inp.vds_rating_v, "V must be positive");
    }
    if !(inp.derating > 0.0 && inp.derating <= 1.0) {
        return bad("--derating", inp.derating, "must lie in (0, 1]");
    }
    if inp.topology.needs_vout() && inp.vout_v.is_none() {
        return Err(SizeError::Input(format!(
            "--vout is needed for a {}: its cell runs at the output voltage",
            inp.topology.name()
        )));
    }
    for (name, f) in [("--f0", inp.f0_hz), ("--fs-max", inp.fs_max_hz)] {
        if let Some(f) = f {
            if !(f.is_finite() && f > 0.0) {
                return bad(name, f, "Hz must be positive");
            }
        }
    }
    Ok(())
}

/// Size the tank.
///
/// # Errors
/// [`SizeError::Input`] naming the offending option; timing-core's error
/// for an impossible operating point (e.g. a boost with Vout below Vin).
pub fn size(inp: &SizeInput) -> Result<SizeReport, SizeError> {
    check(inp)?;
    let vmax = inp.vds_rating_v * inp.derating;
    let mut zvs_min = 0.0f64;
    let mut stress_max = f64::INFINITY;
    for (vin, io) in corners(inp) {
        let c = cell(inp, vin, io)?;
        zvs_min = zvs_min.max(c.v_volt() / c.i_amp());
        stress_max = stress_max.min((vmax - c.v_volt()) / c.i_amp());
    }
    let feasible = zvs_min <= stress_max;
    let mut warnings = Vec::new();
    let mut trade_offs = Vec::new();
    let (mut lightest, mut needed, mut valley) = (None, None, None);
    if !feasible {
        let mut rating = 0.0f64;
        for (vin, io) in corners(inp) {
            let c = cell(inp, vin, io)?;
            rating = rating.max((c.v_volt() + c.i_amp() * zvs_min) / inp.derating);
        }
        needed = Some(rating);
        if stress_max > 0.0 {
            let mut io_zvs = 0.0f64;
            for vin in [inp.vin_v.0, inp.vin_v.1] {
                io_zvs = io_zvs.max(zvs_boundary_io(inp, vin, stress_max)?);
            }
            lightest = Some(io_zvs);
            valley = Some((inp.io_a.0, io_zvs.min(inp.io_a.1)));
            if io_zvs > inp.io_a.1 * (1.0 + 1e-9) {
                trade_offs.push(format!(
                    "With the largest Z0 the {:.0} V rating allows at {:.0} % ({:.3} ohm), ZVS needs at least {:.3} A, above the whole load range: every point falls back to valley turn-on.",
                    inp.vds_rating_v, inp.derating * 100.0, stress_max, io_zvs
                ));
            } else {
                trade_offs.push(format!(
                    "With the largest Z0 the {:.0} V rating allows at {:.0} % ({:.3} ohm), ZVS holds from {:.3} A up; {:.3} A to {:.3} A is left to the valley fallback.",
                    inp.vds_rating_v, inp.derating * 100.0, stress_max, io_zvs, inp.io_a.0, io_zvs
                ));
            }
        } else {
            trade_offs.push(format!(
                "The derated rating ({vmax:.1} V) is below the switch's own off-state voltage at some operating point: no Z0 fits; choose a higher-rated switch."
            ));
        }
        trade_offs.push(format!(
            "ZVS over the whole load range needs Z0 >= {zvs_min:.3} ohm and then a switch rated at least {rating:.0} V (at {:.0} % derating).",
            inp.derating * 100.0
        ));
        trade_offs.push(
            "Or narrow the range: raise the lightest load that must switch softly, or lower the highest input voltage."
                .to_owned(),
        );
    }
    // The impedances to offer: the interval's ends and geometric middle,
    // or the two bounds where it is empty.
    let zs: Vec<f64> = if feasible && zvs_min == stress_max {
        // An interval of zero width: one impedance, one row.
        vec![zvs_min]
    } else if feasible {
        vec![zvs_min, (zvs_min * stress_max).sqrt(), stress_max]
    } else {
        [zvs_min, stress_max]
            .into_iter()
            .filter(|z| *z > 0.0)
            .collect()
    };
    let mid = zs.get(zs.len() / 2).copied();
    let f0 = match (inp.f0_hz, inp.fs_max_hz, mid) {
        (Some(f0), _, _) => Some(f0),
        (None, Some(fs_max), Some(z)) => {
            // fs scales with f0 at a fixed Z0: the largest f0 whose
            // regulation stays below fs_max, from the range at 1 MHz.
            let at_1mhz = pair(inp, z, 1.0e6)?;
            match at_1mhz.fs_range_hz {
                Some((_, hi)) => Some(1.0e6 * fs_max / hi),
                None => {
                    warnings
                        .push("--fs-max sets f0 only for a buck with --vout; give --f0".to_owned());
                    None
                }
            }
        }
        _ => {
            warnings
                .push("give --f0 (or --fs-max with --vout for a buck) for Lr/Cr pairs".to_owned());
            None
        }
    };
    let mut pairs = Vec::new();
    if let Some(f0) = f0 {
        for z in &zs {
            let p = pair(inp, *z, f0)?;
            if let (Some(limit), Some((_, hi))) = (inp.fs_max_hz, p.fs_range_hz) {
                if hi > limit * (1.0 + 1e-9) {
                    warnings.push(format!(
                        "at Z0 = {:.3} ohm the output needs up to {:.0} Hz, above --fs-max {limit:.0} Hz: lower f0",
                        p.z0_ohm, hi
                    ));
                }
            }
            if let Some(u) = &p.unregulated {
                warnings.push(u.clone());
            }
            pairs.push(p);
        }
    }
    let coss_budget_f = pairs.get(pairs.len() / 2).map(|p| p.cr_f);
    let coss_budget_z0_ohm = pairs.get(pairs.len() / 2).map(|p| p.z0_ohm);
    Ok(SizeReport {
        z0_min_ohm: feasible.then_some(zvs_min),
        z0_max_ohm: feasible.then_some(stress_max),
        zvs_z0_min_ohm: zvs_min,
        stress_z0_max_ohm: stress_max,
        vds_limit_v: vmax,
        feasible,
        lightest_zvs_load_a: lightest,
        rating_needed_v: needed,
        valley_load_range_a: valley,
        trade_offs,
        f0_hz: f0,
        pairs,
        coss_budget_f,
        coss_budget_z0_ohm,
        warnings,
    })
}
