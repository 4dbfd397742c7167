//! A simulated capture: the switch-node voltage and the Lr current of a
//! [`CellDeck`] as ngspice computes them, interpolated linearly onto a
//! uniform time grid, as a scope would record the board. (ngspice's own
//! `.options interp` is not used: on a boost deck it put the turn-off edge
//! 8 ns early, found against its raw points.)
//! For bring-up dry runs of `fit` and for checking the fit against a
//! circuit simulator.

use super::spice::{
    down_the_ladder, ngspice_stdout, CellDeck, SpiceError, NGSPICE_TIME_LIMIT, SOLVER_LADDER,
};

/// A simulated waveform on a uniform grid.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Trace {
    /// Time from the gate's turn-off edge, second.
    pub time_s: Vec<f64>,
    /// Switch voltage, volt.
    pub switch_v: Vec<f64>,
    /// Lr current, ampere.
    pub inductor_a: Vec<f64>,
}

impl CellDeck {
    /// The deck's transient printed at every time point instead of
    /// measured: `.meas` lines dropped, `.print` added.
    #[must_use]
    pub fn trace_netlist(&self, rung: usize) -> String {
        let solver = SOLVER_LADDER[rung.min(SOLVER_LADDER.len() - 1)];
        let mut out = String::new();
        for line in self.netlist_with(&solver).lines() {
            if line.starts_with(".meas") {
                continue;
            }
            if line == ".end" {
                out += ".print tran v(sw) i(vsense)\n";
            }
            out += line;
            out.push('\n');
        }
        out
    }

    /// Simulate and return the trace every `step_s` second from the
    /// simulation's start (linear between ngspice's time points, which are
    /// at most [`CellDeck::max_step_s`] apart), the time axis shifted so
    /// that zero is the gate's turn-off ([`CellDeck::t_off_s`]). Falls back
    /// along the solver ladder as [`CellDeck::simulate`] does.
    ///
    /// # Errors
    /// [`SpiceError`] when every rung fails, or ngspice prints no rows.
    pub fn trace(&self, step_s: f64) -> Result<Trace, SpiceError> {
        let (text, _) =
            down_the_ladder(|rung| ngspice_stdout(&self.trace_netlist(rung), NGSPICE_TIME_LIMIT))?;
        let t = parse_print(&text, self.t_off_s).resampled(step_s);
        if t.time_s.len() < 2 {
            return Err(SpiceError::Failed {
                status: "0".into(),
                stderr: "no rows of `.print` output".into(),
            });
        }
        Ok(t)
    }
}

impl Trace {
    /// The trace at every `step_s` second from its first time point,
    /// linear between its points.
    #[must_use]
    pub fn resampled(&self, step_s: f64) -> Self {
        let (Some(&t0), Some(&t1)) = (self.time_s.first(), self.time_s.last()) else {
            return Self::default();
        };
        if step_s.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
            return Self::default();
        }
        let n = ((t1 - t0) / step_s).floor() as usize + 1;
        let mut out = Self::default();
        let mut k = 0;
        for j in 0..n {
            let t = t0 + j as f64 * step_s;
            while k + 2 < self.time_s.len() && self.time_s[k + 1] < t {
                k += 1;
            }
            let (ta, tb) = (
                self.time_s[k],
                self.time_s[(k + 1).min(self.time_s.len() - 1)],
            );
            let f = if tb > ta {
                ((t - ta) / (tb - ta)).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let lerp = |y: &[f64]| y[k] + (y[(k + 1).min(y.len() - 1)] - y[k]) * f;
            out.time_s.push(t);
            out.switch_v.push(lerp(&self.switch_v));
            out.inductor_a.push(lerp(&self.inductor_a));
        }
        out
    }
}

/// Rows `index time v(sw) i(vsense)` of ngspice's `.print` listing (page
/// headers and the rest skipped), time less `t_off_s`.
#[must_use]
pub fn parse_print(stdout: &str, t_off_s: f64) -> Trace {
    let mut t = Trace::default();
    for line in stdout.lines() {
        let f: Vec<&str> = line.split_whitespace().collect();
        if f.len() != 4 || f[0].parse::<u64>().is_err() {
            continue;
        }
        let x: Vec<f64> = f[1..].iter().filter_map(|s| s.parse().ok()).collect();
        if let [time, v, i] = x[..] {
            // Pages repeat no rows, but a listing restarted would.
            if t.time_s.last().is_some_and(|&p| time - t_off_s <= p) {
                continue;
            }
            t.time_s.push(time - t_off_s);
            t.switch_v.push(v);
            t.inductor_a.push(i);
        }
    }
    t
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn print_rows_are_read_and_headers_skipped() {
        let out = "Index   time            v(sw)           vsense#branch\n\
                   ------\n0\t0.000000e+00\t4.800049e-03\t6.000119e+00\t\n\
                   1\t5.000000e-10\t4.900049e-03\t6.000119e+00\t\n\
                   Index   time            v(sw)           vsense#branch\n\
                   2\t1.000000e-09\t5.000000e+01\t5.000000e+00\t\n";
        let t = parse_print(out, 5e-10);
        assert_eq!(t.time_s, vec![-5e-10, 0.0, 5e-10]);
        assert_eq!(t.switch_v[2], 50.0);
        assert_eq!(t.inductor_a[0], 6.000119);
        let r = t.resampled(2.5e-10);
        assert_eq!(r.time_s.len(), 5);
        assert!((r.switch_v[3] - (0.004900049 + 0.5 * (50.0 - 0.004900049))).abs() < 1e-9);
    }
}
