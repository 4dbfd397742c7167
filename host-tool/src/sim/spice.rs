//! SPICE decks of the resonant switch cell, in standard syntax, and a runner
//! for Debian's `ngspice` in batch mode that reads back `.meas` results.
//!
//! The deck models the cell the way DESIGN.md section 6 describes: a
//! voltage-controlled switch with an antiparallel (body) diode, Cr across the
//! switch, Lr in series, the converter's diode, and the filter or storage
//! inductor as a constant current source. It starts in the on-state from a
//! DC operating point (inductors shorted, so the Lr current is exactly the
//! cell current) and turns the gate off at [`CellDeck::t_off_s`].
//!
//! Nodes: `in` (input), `a`/`a2` (switch side of Lr), `d` (the converter
//! diode's node at the big inductor), `sw` (switch voltage, as a node), `g`
//! (gate); `Vsense` carries the Lr current.
//!
//! About 520 lines with its tests: the deck writer and the `.meas` reader
//! must agree on every name, so they stay in one file.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::io::Write as _;
use std::process::{Command, Stdio};

use timing_core::Topology;

/// One simulation of a cell transition.
#[derive(Debug, Clone, PartialEq)]
pub struct CellDeck {
    /// Converter the cell sits in.
    pub topology: Topology,
    /// Resonant inductance, henry.
    pub lr_h: f64,
    /// Resonant capacitance (with `coss`, the fixed part in parallel with
    /// it; may then be 0), farad.
    pub cr_f: f64,
    /// The MOSFET's Coss curve, written as a behavioural capacitor whose
    /// capacitance is a function of the switch voltage (empty: none).
    pub coss: Vec<timing_core::coss::CossPoint<f64>>,
    /// Series resistance in the resonant loop (in series with Lr), ohm.
    pub r_tank_ohm: f64,
    /// Converter input voltage, volt.
    pub vin_v: f64,
    /// Converter output voltage (magnitude), volt; unused for the buck.
    pub vout_v: f64,
    /// Current of the filter (buck: output) or input/storage inductor, ampere:
    /// buck Io, boost Iin, buck-boost Iin + Io.
    pub inductor_current_a: f64,
    /// Gate turn-off instant in the simulation, second (t = 0 of the transition).
    pub t_off_s: f64,
    /// Gate turn-on instant, second from gate turn-off; `None` keeps the gate off.
    pub turn_on_s: Option<f64>,
    /// End of the simulation, second from gate turn-off.
    pub duration_s: f64,
    /// Largest time step, second.
    pub max_step_s: f64,
    /// If set, also report the average voltage of node `d` (the converter
    /// diode's node at the big inductor) from gate turn-off over this many
    /// seconds: over one switching period it is Vout for the buck.
    pub average_over_s: Option<f64>,
}

/// Names of the `.meas` results a deck from [`CellDeck::netlist`] prints.
pub mod meas {
    /// Switch voltage reaches the clamp voltage V (end of linear charge), s.
    pub const CHARGE_END: &str = "t_charge";
    /// Lr current first crosses zero falling (peak switch voltage), s.
    pub const PEAK: &str = "t_peak";
    /// Largest switch voltage, V.
    pub const PEAK_VOLTAGE: &str = "v_peak";
    /// Switch voltage first swings back through zero (window opens), s.
    pub const SWING_TO_ZERO: &str = "t_open";
    /// Lr current crosses zero rising: window close (ZVS) or valley (no ZVS), s.
    pub const CURRENT_ZERO_RISE: &str = "t_rise";
    /// Switch voltage at that instant, V.
    pub const VOLTAGE_AT_CURRENT_ZERO_RISE: &str = "v_rise";
    /// Average voltage of the diode node over [`super::CellDeck::average_over_s`], V.
    pub const DIODE_NODE_AVERAGE: &str = "v_diode_avg";
    /// Switch voltage at the gate's turn-on edge (when the deck turns the
    /// gate on again), V: about 0 for a zero-voltage turn-on.
    pub const VOLTAGE_AT_TURN_ON: &str = "v_on";
}

impl CellDeck {
    /// A single-pulse test of `tank` in a `topology` converter at input
    /// voltage `vin_v`, output `vout_v` (volt) and big-inductor current
    /// `current_a` (ampere): the gate turns off at `t_off_s` and stays off
    /// for `duration_s` (second); the largest step is 1/2000 of 1/w0 at the
    /// tank's smallest capacitance (its fastest ring). Set
    /// [`CellDeck::turn_on_s`] for a turn-on.
    #[must_use]
    pub fn single_pulse(
        topology: Topology,
        tank: &crate::tank::real_tank::RealTank,
        (vin_v, vout_v, current_a): (f64, f64, f64),
        t_off_s: f64,
        duration_s: f64,
    ) -> Self {
        let curve_min = tank.coss.iter().map(|p| p.farads).reduce(f64::min);
        let c_min = tank.cr_fixed_f + curve_min.unwrap_or(0.0);
        Self {
            topology,
            lr_h: tank.lr_h,
            cr_f: tank.cr_fixed_f,
            coss: tank.coss.clone(),
            r_tank_ohm: tank.r_tank_ohm,
            vin_v,
            vout_v,
            inductor_current_a: current_a,
            t_off_s,
            turn_on_s: None,
            duration_s,
            max_step_s: (tank.lr_h * c_min).sqrt() / 2000.0,
            average_over_s: None,
        }
    }

    /// The largest capacitance across the switch (fixed part plus the
    /// curve's largest value), farad: the scale for numerical settings.
    #[must_use]
    pub fn capacitance_scale_f(&self) -> f64 {
        self.cr_f + self.coss.iter().map(|p| p.farads).fold(0.0, f64::max)
    }

    /// The charge of the Coss curve as an expression of the switch voltage
    /// `v` ([`coss_charge_expression`]).
    #[must_use]
    pub fn coss_charge_expression(&self, v: &str) -> Option<String> {
        coss_charge_expression(&self.coss, v)
    }

    /// The clamp voltage V of the cell from the converter voltages
    /// (buck Vin, boost Vout, buck-boost Vin + Vout), volt.
    #[must_use]
    pub fn clamp_voltage_v(&self) -> f64 {
        match self.topology {
            Topology::Boost => self.vout_v,
            Topology::BuckBoost => self.vin_v + self.vout_v,
            _ => self.vin_v,
        }
    }

    /// The SPICE netlist (ngspice dialect only for `.meas`; the circuit is
    /// standard SPICE), with the most accurate solver settings.
    #[must_use]
    pub fn netlist(&self) -> String {
        self.netlist_with(&SOLVER_LADDER[0])
    }

    /// Simulate with ngspice, falling back along [`SOLVER_LADDER`] when a
    /// setting stalls ngspice's time step ("timestep too small", or a run
    /// that crawls past [`NGSPICE_TIME_LIMIT`]), which its near-ideal diodes
    /// provoke at some points. Returns the `.meas`
    /// results and the rung used.
    ///
    /// # Errors
    /// The last rung's [`SpiceError`] when every rung fails.
    pub fn simulate(&self) -> Result<(BTreeMap<String, f64>, usize), SpiceError> {
        down_the_ladder(|rung| run_ngspice(&self.netlist_with(&SOLVER_LADDER[rung])))
    }

    /// The netlist with the given solver settings.
    #[must_use]
    pub fn netlist_with(&self, solver: &Solver) -> String {
        let t0 = self.t_off_s;
        let mut d = String::new();
        let _ = writeln!(
            d,
            "* zvs-timing: {} ZVS quasi-resonant switch cell, gate off at {}",
            self.topology.name(),
            crate::units::format_si(t0, "s")
        );
        // Gate: on in the DC operating point, off at t0, optionally on again.
        let edge = 1e-12;
        let mut gate = format!("PWL(0 1 {t0:e} 1 {:e} 0", t0 + edge);
        if let Some(on) = self.turn_on_s {
            let _ = write!(gate, " {:e} 0 {:e} 1", t0 + on, t0 + on + edge);
        }
        gate.push(')');
        let _ = writeln!(d, "Vg g 0 {gate}");
        let (lr, i) = (self.lr_h, self.inductor_current_a);
        let cr = self.capacitance_scale_f();
        // Cr (fixed part) and Coss between `p` and `n` (switch voltage
        // V(p, n)); Lr in series with the loop resistance from `a` to `b`.
        let caps = |d: &mut String, p: &str, n: &str| {
            if self.cr_f > 0.0 {
                let _ = writeln!(d, "Cr {p} {n} {:e}", self.cr_f);
            }
            if let Some(q) = self.coss_charge_expression(&format!("V({p},{n})")) {
                let _ = writeln!(d, "Bcoss {p} {n} I=ddt({q})");
            }
        };
        let tank = |d: &mut String, a: &str, b: &str| {
            if self.r_tank_ohm > 0.0 {
                let _ = writeln!(d, "Lr {a} lr_r {lr:e}");
                let _ = writeln!(d, "Rtank lr_r {b} {:e}", self.r_tank_ohm);
            } else {
                let _ = writeln!(d, "Lr {a} {b} {lr:e}");
            }
        };
        // A high resistance across the converter diode (it leaks 1e-5 of the
        // cell current at the cell voltage) ties down the diode node while the
        // diode blocks.
        let r_leak = 1e5 * self.clamp_voltage_v() / i;
        match self.topology {
            Topology::Boost => {
                // Input inductor as a current source into d; switch from a2 to ground.
                let _ = writeln!(d, "Iin 0 d DC {i:e}");
                tank(&mut d, "d", "a");
                let _ = writeln!(d, "Vsense a a2 0");
                let _ = writeln!(d, "S1 a2 0 g 0 swmod");
                let _ = writeln!(d, "Dbody 0 a2 dbody");
                caps(&mut d, "a2", "0");
                let _ = writeln!(d, "Esw sw 0 a2 0 1");
                let _ = writeln!(d, "Dout d out dconv");
                let _ = writeln!(d, "Rleak d out {r_leak:e}");
                let _ = writeln!(d, "Vout out 0 DC {:e}", self.vout_v);
            }
            Topology::BuckBoost => {
                let _ = writeln!(d, "Vin in 0 DC {:e}", self.vin_v);
                let _ = writeln!(d, "S1 in a g 0 swmod");
                let _ = writeln!(d, "Dbody a in dbody");
                caps(&mut d, "in", "a");
                let _ = writeln!(d, "Esw sw 0 in a 1");
                tank(&mut d, "a", "a2");
                let _ = writeln!(d, "Vsense a2 d 0");
                // Storage inductor as a current sink; inverted output.
                let _ = writeln!(d, "Istore d 0 DC {i:e}");
                let _ = writeln!(d, "Dout out d dconv");
                let _ = writeln!(d, "Rleak out d {r_leak:e}");
                let _ = writeln!(d, "Vout out 0 DC {:e}", -self.vout_v);
            }
            _ => {
                let _ = writeln!(d, "Vin in 0 DC {:e}", self.vin_v);
                let _ = writeln!(d, "S1 in a g 0 swmod");
                let _ = writeln!(d, "Dbody a in dbody");
                caps(&mut d, "in", "a");
                let _ = writeln!(d, "Esw sw 0 in a 1");
                tank(&mut d, "a", "a2");
                let _ = writeln!(d, "Vsense a2 d 0");
                let _ = writeln!(d, "Dfw 0 d dconv");
                let _ = writeln!(d, "Rleak 0 d {r_leak:e}");
                // Output filter inductor plus load as a constant current sink.
                let _ = writeln!(d, "Io d 0 DC {i:e}");
            }
        }
        // Near-ideal parts, scaled to the point: the switch's on-resistance
        // drops 1e-4 of V at the cell current, a diode's series resistance
        // 1e-4 of V, and the junction (N = 0.05, saturation current 1e-5 of
        // the cell current, so it leaks that much when blocking) adds about
        // 15 mV at the cell current. The clamps then sit within about 0.1 % of
        // the ideal cell's at 12 V, less at higher voltage.
        let r_unit = self.clamp_voltage_v() / self.inductor_current_a;
        let _ = writeln!(
            d,
            ".model swmod SW(VT=0.5 VH=0.1 RON={:e} ROFF=1e9)",
            1e-4 * r_unit
        );
        let is = 1e-5 * i;
        let _ = writeln!(
            d,
            ".model dbody D(IS={is:e} N=0.05 RS={:e})",
            solver.diode_rs * r_unit
        );
        // The converter diode's node has no other capacitance: a junction
        // capacitance of Cr/1000 keeps its internal node well-posed. It sits in
        // parallel with Cr only while the diode blocks (the linear charge),
        // lengthening it by 0.1 %.
        let _ = writeln!(
            d,
            ".model dconv D(IS={is:e} N=0.05 RS={:e} CJO={:e})",
            solver.diode_rs * r_unit,
            solver.diode_cj * cr
        );
        // The on-state as the DC solution's starting guess: with a loop
        // resistance ngspice's operating point of the boost otherwise settles
        // on a state with the output diode carrying hundreds of amperes
        // backwards (found with a 0.2 ohm loop).
        let (ron, r) = (1e-4 * r_unit, self.r_tank_ohm);
        let on_state = match self.topology {
            Topology::Boost => [("a2", i * ron), ("a", i * ron), ("d", i * (ron + r))],
            Topology::BuckBoost => [
                ("a", self.vin_v - i * ron),
                ("a2", self.vin_v - i * (ron + r)),
                ("d", self.vin_v - i * (ron + r)),
            ],
            _ => [
                ("a", self.vin_v - i * ron),
                ("a2", self.vin_v - i * (ron + r)),
                ("d", self.vin_v - i * (ron + r)),
            ],
        };
        let _ = writeln!(
            d,
            ".nodeset {}",
            on_state
                .iter()
                .map(|(n, v)| format!("v({n})={v:e}"))
                .collect::<Vec<_>>()
                .join(" ")
        );
        let _ = writeln!(
            d,
            ".options reltol={:e} abstol=1e-10 vntol=1e-7 method=gear",
            solver.reltol
        );
        let step = self.max_step_s;
        let _ = writeln!(d, ".tran {step:e} {:e} 0 {step:e}", t0 + self.duration_s);
        let v = self.clamp_voltage_v();
        // Measure from a moment after the gate edge: the switch's step from
        // RON to ROFF leaves a one-step numerical spike in the Lr current that
        // a zero-crossing search would otherwise take for an event. 1e-3/w0 is
        // far shorter than any interval of the transition.
        let from = format!("FROM={:e}", t0 + 1e-3 * (self.lr_h * cr).sqrt());
        let _ = writeln!(
            d,
            ".meas tran {} WHEN v(sw)={v:e} RISE=1 {from}",
            meas::CHARGE_END
        );
        let _ = writeln!(
            d,
            ".meas tran {} WHEN i(vsense)=0 FALL=1 {from}",
            meas::PEAK
        );
        let _ = writeln!(d, ".meas tran {} MAX v(sw) {from}", meas::PEAK_VOLTAGE);
        let _ = writeln!(
            d,
            ".meas tran {} WHEN v(sw)=0 FALL=1 {from}",
            meas::SWING_TO_ZERO
        );
        let _ = writeln!(
            d,
            ".meas tran {} WHEN i(vsense)=0 RISE=1 {from}",
            meas::CURRENT_ZERO_RISE
        );
        let _ = writeln!(
            d,
            ".meas tran {} FIND v(sw) WHEN i(vsense)=0 RISE=1 {from}",
            meas::VOLTAGE_AT_CURRENT_ZERO_RISE
        );
        if let Some(on) = self.turn_on_s {
            let _ = writeln!(
                d,
                ".meas tran {} FIND v(sw) AT={:e}",
                meas::VOLTAGE_AT_TURN_ON,
                t0 + on
            );
        }
        if let Some(span) = self.average_over_s {
            let _ = writeln!(
                d,
                ".meas tran {} AVG v(d) {from} TO={:e}",
                meas::DIODE_NODE_AVERAGE,
                t0 + span
            );
        }
        let _ = writeln!(d, ".end");
        d
    }
}

/// The charge of a Coss curve as an expression of the switch voltage
/// `v` (a SPICE expression such as `V(in,a)`), for a behavioural current
/// source `I=ddt(Q)`: Q(v) = c0*v + sum of slope changes/2 * max(0, v -
/// vk)^2, whose derivative is the curve (linear between the points, flat
/// above the last). Charge-based, so charge is conserved exactly, and
/// smooth (C continuous), which ngspice's Newton iteration needs: a
/// capacitance expression with kinks made it crawl. A curve starting at
/// 0 V continues its first piece below zero (the switch sits a few
/// millivolts either side of 0 V when on), as the host's ring integrator
/// does inside a step. `None` for an empty curve.
#[must_use]
pub fn coss_charge_expression(
    coss: &[timing_core::coss::CossPoint<f64>],
    v: &str,
) -> Option<String> {
    let first = coss.first()?;
    let slope_after = |k: usize| match (coss.get(k), coss.get(k + 1)) {
        (Some(p), Some(q)) => (q.farads - p.farads) / (q.volts - p.volts),
        _ => 0.0,
    };
    let mut e = format!("({:e})*({v})", first.farads);
    let mut slope = 0.0;
    for (k, p) in coss.iter().enumerate() {
        let next = slope_after(k);
        let change = next - slope;
        if change != 0.0 {
            if k == 0 && p.volts <= 0.0 {
                let _ = write!(e, " + ({:e})*({v})*({v})", change / 2.0);
            } else {
                let _ = write!(
                    e,
                    " + ({:e})*max(0, {v} - ({:e}))**2",
                    change / 2.0,
                    p.volts
                );
            }
        }
        slope = next;
    }
    Some(e)
}

/// `run` with each rung of [`SOLVER_LADDER`] in turn (its index given)
/// until one does not stall ngspice's time step ("timestep too small", or
/// a run past [`NGSPICE_TIME_LIMIT`]): its result and the rung. Any other
/// error ends the climb.
///
/// # Errors
/// The last rung's [`SpiceError`] when every rung stalls, or the first
/// other error.
pub fn down_the_ladder<T>(
    run: impl Fn(usize) -> Result<T, SpiceError>,
) -> Result<(T, usize), SpiceError> {
    let mut last = None;
    for k in 0..SOLVER_LADDER.len() {
        match run(k) {
            Ok(m) => return Ok((m, k)),
            Err(SpiceError::Failed { status, stderr }) if stderr.contains("Timestep too small") => {
                last = Some(SpiceError::Failed { status, stderr });
            }
            Err(e @ SpiceError::TimedOut(_)) => last = Some(e),
            Err(e) => return Err(e),
        }
    }
    Err(last.unwrap_or(SpiceError::Failed {
        status: "none".into(),
        stderr: "no solver settings".into(),
    }))
}

/// Numerical settings of a deck: how ideal its diodes are and how tight
/// ngspice's tolerances. Each costs accuracy against the ideal cell: the
/// diode series resistance drops `diode_rs` of V at the cell current, the
/// junction capacitance `diode_cj` of Cr lengthens the linear charge by as
/// much.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Solver {
    /// ngspice `reltol`.
    pub reltol: f64,
    /// Diode series resistance, in units of V/I.
    pub diode_rs: f64,
    /// Converter-diode junction capacitance, in units of Cr.
    pub diode_cj: f64,
}

/// Solver settings in the order tried (the time step, 1/2000 of 1/w0,
/// sets the accuracy more than `reltol` does); [`CellDeck::simulate`]
/// tries them in turn. The last rung still keeps each effect at or below
/// 0.1 % of V or Cr.
pub const SOLVER_LADDER: [Solver; 3] = [
    Solver {
        reltol: 1e-4,
        diode_rs: 1e-4,
        diode_cj: 1e-3,
    },
    Solver {
        reltol: 1e-5,
        diode_rs: 1e-4,
        diode_cj: 1e-3,
    },
    Solver {
        reltol: 1e-4,
        diode_rs: 1e-3,
        diode_cj: 1e-3,
    },
];

/// What can go wrong running ngspice.
#[derive(Debug, thiserror::Error)]
pub enum SpiceError {
    /// The `ngspice` program is not on the PATH.
    #[error("ngspice is not installed or not on the PATH ({0}); install it with `apt-get install ngspice`")]
    NotFound(std::io::Error),
    /// Any other I/O failure talking to ngspice.
    #[error("running ngspice: {0}")]
    Io(#[from] std::io::Error),
    /// ngspice ran past its time limit and was stopped.
    #[error("ngspice did not finish within {0:?}")]
    TimedOut(std::time::Duration),
    /// ngspice exited with an error.
    #[error("ngspice failed (exit {status}): {stderr}")]
    Failed {
        /// Exit status.
        status: String,
        /// What ngspice wrote to stderr.
        stderr: String,
    },
}

/// Whether an `ngspice` executable can be started.
#[must_use]
pub fn ngspice_available() -> bool {
    Command::new("ngspice")
        .arg("--version")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success())
}

/// Run `deck` through `ngspice -b` and return every `.meas` result that
/// ngspice printed as `name = value` (measurements that failed are absent).
///
/// # Errors
/// [`SpiceError`] when ngspice cannot be started or exits with an error.
pub fn run_ngspice(deck: &str) -> Result<BTreeMap<String, f64>, SpiceError> {
    run_ngspice_within(deck, NGSPICE_TIME_LIMIT)
}

/// Longest a single ngspice run may take before it is stopped; runs of these
/// decks take well under a second when the step control behaves.
pub const NGSPICE_TIME_LIMIT: std::time::Duration = std::time::Duration::from_secs(20);

/// [`run_ngspice`] with a time limit: a run still going after `limit` is
/// killed and reported as [`SpiceError::TimedOut`].
///
/// # Errors
/// As [`run_ngspice`], and [`SpiceError::TimedOut`].
pub fn run_ngspice_within(
    deck: &str,
    limit: std::time::Duration,
) -> Result<BTreeMap<String, f64>, SpiceError> {
    Ok(parse_meas(&ngspice_stdout(deck, limit)?))
}

/// Run `deck` through `ngspice -b` within `limit` and return what it
/// printed on standard output.
///
/// # Errors
/// As [`run_ngspice_within`].
pub fn ngspice_stdout(deck: &str, limit: std::time::Duration) -> Result<String, SpiceError> {
    let dir = std::env::temp_dir().join(format!(
        "zvs-timing-spice-{}-{}",
        std::process::id(),
        DECK_COUNTER.fetch_add(1, std::sync::atomic::Ordering::Relaxed)
    ));
    std::fs::create_dir_all(&dir)?;
    let result = run_in(&dir, deck, limit);
    let _ = std::fs::remove_dir_all(&dir);
    result
}

fn run_in(
    dir: &std::path::Path,
    deck: &str,
    limit: std::time::Duration,
) -> Result<String, SpiceError> {
    let path = dir.join("cell.cir");
    std::fs::File::create(&path)?.write_all(deck.as_bytes())?;
    // Output to files, not pipes, so a chatty run cannot block on a full pipe.
    let out_path = dir.join("stdout.txt");
    let err_path = dir.join("stderr.txt");
    let mut child = Command::new("ngspice")
        .arg("-b")
        .arg(&path)
        .current_dir(dir)
        .stdin(Stdio::null())
        .stdout(std::fs::File::create(&out_path)?)
        .stderr(std::fs::File::create(&err_path)?)
        .spawn()
        .map_err(|e| match e.kind() {
            std::io::ErrorKind::NotFound => SpiceError::NotFound(e),
            _ => SpiceError::Io(e),
        })?;
    let start = std::time::Instant::now();
    let status = loop {
        if let Some(status) = child.try_wait()? {
            break status;
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            return Err(SpiceError::TimedOut(limit));
        }
        std::thread::sleep(std::time::Duration::from_millis(5));
    };
    if !status.success() {
        return Err(SpiceError::Failed {
            status: status.to_string(),
            stderr: std::fs::read_to_string(&err_path).unwrap_or_default(),
        });
    }
    Ok(std::fs::read_to_string(&out_path)?)
}

static DECK_COUNTER: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);

/// Read `name = value [at= ...]` lines of ngspice's `.meas` report.
#[must_use]
pub fn parse_meas(stdout: &str) -> BTreeMap<String, f64> {
    stdout
        .lines()
        .filter_map(|line| {
            let (name, rest) = line.split_once('=')?;
            let name = name.trim();
            if name.is_empty() || name.contains(char::is_whitespace) {
                return None;
            }
            let value: f64 = rest.split_whitespace().next()?.parse().ok()?;
            Some((name.to_ascii_lowercase(), value))
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn meas_report_is_parsed() {
        let out = "Doing analysis\nt_charge            =   1.54394e-07\nv_peak              =  1.207967e+02 at=  2.839566e-07\nt_open = failed\nTotal analysis time (seconds) = 0.044\n";
        let m = parse_meas(out);
        assert_eq!(m.get("t_charge"), Some(&1.54394e-07));
        assert_eq!(m.get("v_peak"), Some(&120.7967));
        assert!(!m.contains_key("t_open"));
        assert!(!m.contains_key("total analysis time (seconds)"));
    }
}
