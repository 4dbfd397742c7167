//! The least-squares fit of the tank to captures: Levenberg-Marquardt
//! (the `levenberg-marquardt` crate, MINPACK's algorithm) over Lr, the
//! fixed capacitance, a scale on the Coss curve, the loop resistance and
//! the turn-off driver delay, the residuals being each capture's samples
//! less the model's trace over its [`span`](super::span), weighted by the
//! capture's noise.
//!
//! Uncertainties: the covariance s²·(JᵀJ)⁻¹ of the weighted residuals'
//! Jacobian J at the fit, s² their sum of squares over m − n (the textbook
//! linearised estimate: Press et al., Numerical Recipes, 3rd ed., section
//! 15.5). It counts the noise the captures show; what they cannot show
//! (the model's own assumptions, drift with temperature) it does not.
//!
//! A parameter the fit drives past its physical bound (a negative
//! capacitance, scale or resistance) is held at the bound and the others
//! fitted again.

use levenberg_marquardt::{LeastSquaresProblem, LevenbergMarquardt};
use nalgebra::storage::Owned;
use nalgebra::{DMatrix, DVector, Dyn};
use timing_core::CellPoint;

use super::error::FitError;
use super::model::{model_trace, TankGuess};
use super::span::{span, Span};
use crate::input::capture::Capture;
use crate::input::design::DesignSpec;

/// A capture and the converter point it was taken at.
#[derive(Debug, Clone, Copy)]
pub struct Shot<'a> {
    /// The capture.
    pub capture: &'a Capture,
    /// Input voltage, volt.
    pub vin_v: f64,
    /// Output current, ampere.
    pub io_a: f64,
}

/// A fitted quantity.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Param {
    /// Resonant inductance.
    Lr,
    /// Fixed capacitance across the switch.
    Cr,
    /// Scale on the Coss curve.
    CossScale,
    /// Loop resistance.
    RTank,
    /// Turn-off driver delay.
    DelayOff,
    /// The converter diode's forward drop seen by the ring.
    DiodeDrop,
}

impl Param {
    /// All of them, in order.
    pub const ALL: [Self; 6] = [
        Self::Lr,
        Self::Cr,
        Self::CossScale,
        Self::RTank,
        Self::DelayOff,
        Self::DiodeDrop,
    ];

    /// The JSON key of the value (with `_sigma` its uncertainty).
    #[must_use]
    pub const fn key(self) -> &'static str {
        match self {
            Self::Lr => "lr_h",
            Self::Cr => "cr_f",
            Self::CossScale => "coss_scale",
            Self::RTank => "r_tank_ohm",
            Self::DelayOff => "driver_delay_off_s",
            Self::DiodeDrop => "diode_drop_v",
        }
    }

    fn get(self, g: &TankGuess) -> f64 {
        match self {
            Self::Lr => g.lr_h,
            Self::Cr => g.cr_f,
            Self::CossScale => g.coss_scale,
            Self::RTank => g.r_tank_ohm,
            Self::DelayOff => g.delay_off_s,
            Self::DiodeDrop => g.diode_drop_v,
        }
    }

    fn set(self, g: &mut TankGuess, x: f64) {
        match self {
            Self::Lr => g.lr_h = x,
            Self::Cr => g.cr_f = x,
            Self::CossScale => g.coss_scale = x,
            Self::RTank => g.r_tank_ohm = x,
            Self::DelayOff => g.delay_off_s = x,
            Self::DiodeDrop => g.diode_drop_v = x,
        }
    }

    /// The lowest value the circuit allows (the inductance has its own,
    /// positive, floor; the curve's scale stays positive, as a curve of
    /// zero capacitance is none).
    const fn floor(self) -> Option<f64> {
        match self {
            Self::Cr | Self::RTank | Self::DiodeDrop => Some(0.0),
            Self::CossScale => Some(1e-3),
            Self::Lr | Self::DelayOff => None,
        }
    }
}

/// The result of a fit.
#[derive(Debug, Clone, PartialEq)]
pub struct TankFit {
    /// The fitted tank and delay.
    pub tank: TankGuess,
    /// One standard deviation of each quantity, in its unit (0 for one
    /// held fixed), in [`Param::ALL`]'s order.
    pub sigma: [f64; 6],
    /// Which quantities were held, and why.
    pub held: Vec<(Param, &'static str)>,
    /// The switch capacitance's charge-equivalent value Q(V)/V at the
    /// highest cell voltage of the captures (fixed part plus the scaled
    /// curve), farad, and its standard deviation: the total the ring sees.
    pub c_total_f: (f64, f64),
    /// That cell voltage, volt.
    pub c_total_at_v: f64,
    /// Per capture: RMS of the samples less the fitted model over its span
    /// (volt), the samples counted, and the capture's noise (volt RMS).
    pub residuals: Vec<(f64, usize, f64)>,
    /// The spans used.
    pub spans: Vec<Span>,
    /// Residual evaluations the solver made.
    pub evaluations: usize,
}

impl TankFit {
    /// The fitted value of `p`.
    #[must_use]
    pub fn value(&self, p: Param) -> f64 {
        p.get(&self.tank)
    }

    /// Its standard deviation.
    #[must_use]
    pub fn sigma_of(&self, p: Param) -> f64 {
        self.sigma[p as usize]
    }
}

/// A capture ready for the residuals.
struct Prepared<'a> {
    path: &'a str,
    cell_v: f64,
    vin_v: f64,
    io_a: f64,
    times: &'a [f64],
    samples: &'a [f64],
    weight: f64,
}

/// The problem in scaled units: each free quantity over its scale, so
/// that all are of order one for the solver.
struct Problem<'a> {
    design: &'a DesignSpec,
    shots: &'a [Prepared<'a>],
    base: TankGuess,
    free: Vec<Param>,
    scale: [f64; 6],
    x: DVector<f64>,
    /// The inductance's floor: a thousandth of the design's.
    lr_floor: f64,
    /// Why the model last failed, for the message.
    failure: std::cell::RefCell<Option<timing_core::Error>>,
}

impl Problem<'_> {
    fn guess(&self, x: &DVector<f64>) -> TankGuess {
        let mut g = self.base;
        for (k, &p) in self.free.iter().enumerate() {
            let mut value = x[k] * self.scale[p as usize];
            if let Some(lo) = p.floor() {
                value = value.max(lo);
            }
            p.set(&mut g, value);
        }
        g.lr_h = g.lr_h.max(self.lr_floor);
        if g.cr_f <= 0.0 && (g.coss_scale <= 0.0 || self.design.real.coss.is_empty()) {
            // No capacitance at all: the least the fit's scale allows.
            g.cr_f = 1e-6 * self.scale[Param::Cr as usize];
        }
        g
    }

    fn residuals_of(&self, g: &TankGuess) -> Option<DVector<f64>> {
        let m: usize = self.shots.iter().map(|s| s.times.len()).sum();
        let mut r = DVector::zeros(m);
        let mut at = 0;
        for s in self.shots {
            let p = match model_trace(self.design, g, s.vin_v, s.io_a, s.times) {
                Ok(p) => p,
                Err(e) => {
                    *self.failure.borrow_mut() = Some(e);
                    return None;
                }
            };
            for (k, (y, q)) in s.samples.iter().zip(&p).enumerate() {
                if q.is_finite() {
                    r[at + k] = (y - q) * s.weight;
                }
            }
            at += s.times.len();
        }
        Some(r)
    }

    /// Central differences, a step of 1e-5 of each scaled quantity (the
    /// model is smooth in them: fixed-angle steps that scale with the
    /// tank).
    fn jacobian_at(&self, x: &DVector<f64>) -> Option<DMatrix<f64>> {
        let n = x.len();
        let mut columns = Vec::with_capacity(n);
        for k in 0..n {
            let h = 1e-5 * x[k].abs().max(1e-2);
            let (mut up, mut down) = (x.clone(), x.clone());
            up[k] += h;
            down[k] -= h;
            let a = self.residuals_of(&self.guess(&up))?;
            let b = self.residuals_of(&self.guess(&down))?;
            columns.push((a - b) / (2.0 * h));
        }
        Some(DMatrix::from_columns(&columns))
    }
}

impl LeastSquaresProblem<f64, Dyn, Dyn> for Problem<'_> {
    type ResidualStorage = Owned<f64, Dyn>;
    type JacobianStorage = Owned<f64, Dyn, Dyn>;
    type ParameterStorage = Owned<f64, Dyn>;

    fn set_params(&mut self, x: &DVector<f64>) {
        self.x.copy_from(x);
    }

    fn params(&self) -> DVector<f64> {
        self.x.clone()
    }

    fn residuals(&self) -> Option<DVector<f64>> {
        self.residuals_of(&self.guess(&self.x))
    }

    fn jacobian(&self) -> Option<DMatrix<f64>> {
        self.jacobian_at(&self.x)
    }
}

/// Fit `design`'s tank to `shots`, from the design's values and the
/// turn-off delay read off the first capture's edge: first over each
/// capture's swing (to the window's opening or near the valley), then,
/// from there, over the whole ring.
///
/// Accuracy: on captures simulated by ngspice and sampled like an 8-bit
/// scope, Lr and the total capacitance come out within 1 %, the loop
/// resistance within 15 % and the delay within 1 ns (`cargo test -p
/// cross-checks --test fit_ngspice -- --nocapture`).
///
/// # Errors
/// [`FitError`]: no captures, a point the cell cannot have, a capture
/// with no usable ring, a model that cannot be evaluated, a solver that
/// does not converge.
pub fn fit(design: &DesignSpec, shots: &[Shot<'_>]) -> Result<TankFit, FitError> {
    let first = shots.first().ok_or(FitError::NoCaptures)?;
    let mut spans = Vec::new();
    let (mut swing, mut ring) = (Vec::new(), Vec::new());
    for s in shots {
        let path = s.capture.path.clone();
        let cell: CellPoint<f64> =
            design
                .cell(s.vin_v, s.io_a)
                .map_err(|source| FitError::Point {
                    path: path.clone(),
                    vin_v: s.vin_v,
                    io_a: s.io_a,
                    source,
                })?;
        let sp =
            span(s.capture, cell.v_volt()).map_err(|reason| FitError::Capture { path, reason })?;
        spans.push(sp);
        // The quantisation of an 8-bit scope alone is 0.1 % of its range.
        let weight = 1.0 / s.capture.noise_v.max(1e-4 * sp.peak_v);
        for (out, end) in [(&mut swing, sp.end), (&mut ring, sp.ring_end)] {
            out.push(Prepared {
                path: &s.capture.path,
                cell_v: cell.v_volt(),
                vin_v: s.vin_v,
                io_a: s.io_a,
                times: &s.capture.time_s[sp.first..end],
                samples: &s.capture.switch_v[sp.first..end],
                weight,
            });
        }
    }
    let mut start = TankGuess::of(design);
    start.delay_off_s = delay_from_edge(design, &start, first, spans[0].edge_s)?;
    // Scales: the design's values, the capacitance its charge-equivalent
    // at the first capture's cell voltage, the resistance the tank's
    // characteristic impedance, the delay its 1/w0.
    let c_ref = charge_equivalent(design, &start, swing[0].cell_v).map_err(FitError::Model)?;
    let z0 = (start.lr_h / c_ref).sqrt();
    let t0 = (start.lr_h * c_ref).sqrt();
    let scale = [start.lr_h, c_ref, 1.0, z0, t0, 1.0];
    let mut fitting = Fitting {
        design,
        scale,
        lr_floor: 1e-3 * start.lr_h,
        free: Param::ALL
            .into_iter()
            .filter(|&p| p != Param::CossScale || !design.real.coss.is_empty())
            .collect(),
        held: Vec::new(),
        evaluations: 0,
    };
    if design.real.coss.is_empty() {
        fitting.held.push((
            Param::CossScale,
            "the design has no Coss curve: `cr` is the whole capacitance",
        ));
    }
    let over_swing = fitting.run(&swing, start)?;
    let over_ring = fitting.run(&ring, over_swing.guess(&over_swing.x))?;
    let fitted = over_ring.guess(&over_ring.x);
    let sigma = sigmas(&over_ring, &fitting.free, &scale)?;
    finish(fitting, &ring, fitted, sigma, spans)
}

/// The fit's running state: what is free, what is held and why.
struct Fitting<'a> {
    design: &'a DesignSpec,
    scale: [f64; 6],
    lr_floor: f64,
    free: Vec<Param>,
    held: Vec<(Param, &'static str)>,
    evaluations: usize,
}

impl<'a> Fitting<'a> {
    /// Solve over `shots` from `base`; a quantity driven past its floor is
    /// held there and the rest solved again.
    fn run(
        &mut self,
        shots: &'a [Prepared<'a>],
        mut base: TankGuess,
    ) -> Result<Problem<'a>, FitError> {
        loop {
            let x0 = DVector::from_iterator(
                self.free.len(),
                self.free
                    .iter()
                    .map(|&p| p.get(&base) / self.scale[p as usize]),
            );
            let problem = Problem {
                design: self.design,
                shots,
                base,
                free: self.free.clone(),
                scale: self.scale,
                x: x0,
                lr_floor: self.lr_floor,
                failure: std::cell::RefCell::new(None),
            };
            let (solved, report) = LevenbergMarquardt::new()
                .with_patience(400)
                .minimize(problem);
            self.evaluations += report.number_of_evaluations;
            if !report.termination.was_successful()
                && !matches!(
                    report.termination,
                    levenberg_marquardt::TerminationReason::NoImprovementPossible(_)
                )
            {
                let why = match (&report.termination, solved.failure.borrow().as_ref()) {
                    (levenberg_marquardt::TerminationReason::User(_), Some(e)) => {
                        let g = solved.guess(&solved.x);
                        format!(
                            "the model failed on the way, at Lr {}, C {}, R {}: {e}",
                            crate::units::format_si(g.lr_h, "H"),
                            crate::units::format_si(g.cr_f, "F"),
                            crate::units::format_si(g.r_tank_ohm, "ohm")
                        )
                    }
                    (t, _) => format!("{t:?}"),
                };
                return Err(FitError::NotConverged(why));
            }
            let scale = self.scale;
            let past: Vec<Param> = self
                .free
                .iter()
                .enumerate()
                .filter(|&(k, p)| {
                    p.floor()
                        .is_some_and(|lo| solved.x[k] * scale[*p as usize] <= lo)
                })
                .map(|(_, &p)| p)
                .collect();
            if past.is_empty() {
                return Ok(solved);
            }
            base = solved.guess(&solved.x);
            for p in past {
                p.set(&mut base, p.floor().unwrap_or(0.0));
                self.free.retain(|&q| q != p);
                self.held.push((
                    p,
                    if p == Param::CossScale {
                        "the fit drove it to zero: held at 0.001"
                    } else {
                        "the fit drove it below zero: held at zero"
                    },
                ));
            }
        }
    }
}

/// The delay that puts the model's edge (the time the switch voltage
/// passes [`super::span::EDGE_FRACTION`] of the cell voltage) on the
/// capture's.
fn delay_from_edge(
    design: &DesignSpec,
    g: &TankGuess,
    shot: &Shot<'_>,
    edge_s: f64,
) -> Result<f64, FitError> {
    let cell: CellPoint<f64> = design
        .cell(shot.vin_v, shot.io_a)
        .map_err(FitError::Model)?;
    // The linear charge to a quarter of the cell voltage, Q(V/4)/I: the
    // charge of the whole capacitance at that voltage.
    let v = super::span::EDGE_FRACTION * cell.v_volt();
    let tank = g.tank(design);
    let q = tank.capacitance().map_err(FitError::Model)?.charge(v);
    Ok(edge_s - q / cell.i_amp())
}

fn charge_equivalent(
    design: &DesignSpec,
    g: &TankGuess,
    v: f64,
) -> Result<f64, timing_core::Error> {
    Ok(g.tank(design).capacitance()?.charge_equivalent(v))
}

/// One standard deviation of each quantity from the weighted Jacobian at
/// the fit (in [`Param::ALL`]'s order; 0 for a held one) and the
/// covariance of the scaled free quantities.
fn sigmas(
    p: &Problem<'_>,
    free: &[Param],
    scale: &[f64; 6],
) -> Result<([f64; 6], DMatrix<f64>), FitError> {
    let no = || FitError::NotConverged("the model failed at the fitted values".into());
    let r = p.residuals().ok_or_else(no)?;
    let j = p.jacobian().ok_or_else(no)?;
    let (m, n) = (r.len(), free.len());
    let s2 = r.norm_squared() / (m.saturating_sub(n).max(1)) as f64;
    let jtj = j.transpose() * &j;
    let inv = jtj
        .clone()
        .try_inverse()
        .or_else(|| jtj.pseudo_inverse(1e-12).ok())
        .ok_or_else(|| {
            FitError::NotConverged("the captures cannot tell the quantities apart".into())
        })?;
    let cov = inv * s2;
    let mut sigma = [0.0; 6];
    for (k, &q) in free.iter().enumerate() {
        sigma[q as usize] = cov[(k, k)].max(0.0).sqrt() * scale[q as usize];
    }
    Ok((sigma, cov))
}

fn finish(
    fitting: Fitting<'_>,
    shots: &[Prepared<'_>],
    tank: TankGuess,
    (sigma, cov): ([f64; 6], DMatrix<f64>),
    spans: Vec<Span>,
) -> Result<TankFit, FitError> {
    let Fitting {
        design,
        scale,
        held,
        evaluations,
        free,
        ..
    } = fitting;
    let v_top = shots.iter().map(|s| s.cell_v).fold(0.0, f64::max);
    let c_total = charge_equivalent(design, &tank, v_top).map_err(FitError::Model)?;
    // Q(V)/V = Cr + s*Qcoss(V)/V: linear in the two.
    let curve_part = if design.real.coss.is_empty() || tank.coss_scale == 0.0 {
        0.0
    } else {
        (c_total - tank.cr_f) / tank.coss_scale
    };
    // Var = g^T cov g, g in scaled units: dC/dx = dC/dvalue * scale.
    let g = DVector::from_iterator(
        free.len(),
        free.iter().map(|&p| match p {
            Param::Cr => scale[p as usize],
            Param::CossScale => curve_part * scale[p as usize],
            _ => 0.0,
        }),
    );
    let var = (g.transpose() * &cov * &g)[(0, 0)];
    let mut residuals = Vec::new();
    for s in shots {
        let p = model_trace(design, &tank, s.vin_v, s.io_a, s.times).map_err(FitError::Model)?;
        let (sum, n) = s
            .samples
            .iter()
            .zip(&p)
            .filter(|(_, q)| q.is_finite())
            .fold((0.0, 0usize), |(a, n), (y, q)| {
                (a + (y - q) * (y - q), n + 1)
            });
        let noise = 1.0 / s.weight;
        residuals.push(((sum / n.max(1) as f64).sqrt(), n, noise));
        // Clipping the parser could not see (a short run at the top of the
        // vertical range): the samples at the capture's highest value sit
        // below the fitted ring, where unclipped they would be the noise's
        // highest excursions above it.
        let top = s.samples.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let under: Vec<f64> = s
            .samples
            .iter()
            .zip(&p)
            .filter(|&(&y, &q)| q.is_finite() && y >= top)
            .map(|(&y, &q)| q - y)
            .collect();
        let cut = under.len();
        if cut >= 3 && under.iter().sum::<f64>() / cut as f64 > noise {
            let peak = p
                .iter()
                .copied()
                .filter(|q| q.is_finite())
                .fold(f64::NEG_INFINITY, f64::max);
            return Err(FitError::Capture {
                path: s.path.to_owned(),
                reason: format!(
                    "the trace tops out at {top:.3} V where the fitted ring peaks at {peak:.3} V ({cut} samples): the scope's vertical range clipped the ring; widen the range and capture again"
                ),
            });
        }
    }
    Ok(TankFit {
        tank,
        sigma,
        held,
        c_total_f: (c_total, var.max(0.0).sqrt()),
        c_total_at_v: v_top,
        residuals,
        spans,
        evaluations,
    })
}
