//! Where in a capture the model follows the circuit, read off the capture
//! itself: from before the turn-off edge, over the linear charge and the
//! ring's peak, to a little past the swing's return to zero (the window's
//! opening) or to most of the way to the valley where the swing stops
//! short of zero: the swing, which a fit from the design's values can
//! match without mistaking one ring period for another. Then on to the
//! capture's end or the gate's turn-on, where captured: the ring left to
//! itself, whose decay pins the loop resistance. A capture whose switch
//! voltage goes to zero after the swing and stays there to its end shows
//! a turn-on (normal switching rather than a single pulse): there only
//! the swing is fitted.
//!
//! A capture that holds no usable ring for the cell voltage is refused
//! with the reason: it starts after the edge, its swing never reaches the
//! cell voltage (a wrong --vin, probe attenuation or channel), or it ends
//! before the swing returns.

use crate::input::capture::Capture;

/// Share of the cell voltage at which the turn-off edge is timed.
pub const EDGE_FRACTION: f64 = 0.25;

/// How the swing ends in a capture.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SwingEnd {
    /// The switch voltage returns to zero (ZVS): the first sample at or
    /// below the zero level after the peak, second.
    Zero {
        /// Time, second.
        at_s: f64,
    },
    /// The swing stops short of zero: the valley (lowest sample after the
    /// peak, before the ring rises again), second and volt.
    Valley {
        /// Time, second.
        at_s: f64,
        /// Switch voltage there, volt.
        volts: f64,
    },
}

/// The part of a capture a fit uses, and its landmarks.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Span {
    /// First sample used (index).
    pub first: usize,
    /// One past the last sample of the swing (index).
    pub end: usize,
    /// One past the last sample of the whole ring (index): the capture's
    /// end, or the gate's turn-on.
    pub ring_end: usize,
    /// Time the switch voltage first passes [`EDGE_FRACTION`] of the cell
    /// voltage, second.
    pub edge_s: f64,
    /// Time of the highest sample, second.
    pub peak_s: f64,
    /// The highest sample, volt.
    pub peak_v: f64,
    /// How the swing ends.
    pub swing_end: SwingEnd,
}

/// The span of `capture` for a cell at `cell_v` volt (the clamp voltage:
/// buck Vin, boost Vout, buck-boost Vin + Vout).
///
/// # Errors
/// The reason, naming the values, when the capture holds no usable ring.
pub fn span(capture: &Capture, cell_v: f64) -> Result<Span, String> {
    let (t, v) = (&capture.time_s, &capture.switch_v);
    let n = t.len().min(v.len());
    let edge_level = EDGE_FRACTION * cell_v;
    let edge = (0..n).find(|&k| v[k] > edge_level).ok_or_else(|| {
        let top = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        format!(
            "the switch voltage never rises above {edge_level:.3} V (a quarter of the cell voltage {cell_v:.3} V; highest sample {top:.3} V): no turn-off edge in the capture, or a wrong --vin or probe attenuation"
        )
    })?;
    // A few samples before the edge place it; the trigger at the turn-off
    // command with some pre-trigger gives many.
    if edge < 5 {
        return Err(format!(
            "the switch voltage is already above {edge_level:.3} V at sample {edge} ({}): the capture starts after the turn-off edge; trigger on the turn-off command with some pre-trigger",
            crate::units::format_si(t[edge], "s")
        ));
    }
    let edge_s = {
        // Between the two samples around the level.
        let (a, b) = (v[edge - 1], v[edge]);
        let f = if b > a {
            (edge_level - a) / (b - a)
        } else {
            1.0
        };
        t[edge - 1] + f * (t[edge] - t[edge - 1])
    };
    // The swing peaks above the cell voltage (the ring's centre is the
    // cell voltage less the loop's drop, and it starts below it with the
    // current flowing: Erickson and Maksimovic, ch. 20, the ZCS/ZVS
    // quasi-resonant switch). A trace that stays below it is another
    // voltage or scale.
    let high = (edge..n).find(|&k| v[k] >= 0.95 * cell_v).ok_or_else(|| {
        let top = v[edge..n].iter().copied().fold(f64::NEG_INFINITY, f64::max);
        format!(
            "the switch voltage peaks at {top:.3} V, below the cell voltage of {cell_v:.3} V: check --vin (and --io), the probe's attenuation and the channel"
        )
    })?;
    // The peak: the highest sample of the first swing, before the voltage
    // has come back down below the edge level.
    let down = (high..n).find(|&k| v[k] < edge_level).unwrap_or(n);
    let peak = (edge..down)
        .max_by(|&a, &b| v[a].total_cmp(&v[b]))
        .unwrap_or(edge);
    let (peak_s, peak_v) = (t[peak], v[peak]);
    if peak + 2 >= n {
        return Err(format!(
            "the capture ends at its highest sample ({}): capture longer, past the ring's return",
            crate::units::format_si(peak_s, "s")
        ));
    }
    let zero_level = (0.03 * cell_v).max(4.0 * capture.noise_v);
    let swing_end = match (peak..n).find(|&k| v[k] <= zero_level) {
        Some(k) => SwingEnd::Zero { at_s: t[k] },
        None => {
            let valley = (peak..n)
                .min_by(|&a, &b| v[a].total_cmp(&v[b]))
                .unwrap_or(n - 1);
            // A valley at the capture's end may be a swing cut short.
            let rises = v[valley..n]
                .iter()
                .any(|&x| x > v[valley] + 0.1 * (peak_v - v[valley]));
            if !rises {
                return Err(format!(
                    "the capture ends before the swing returns (its lowest sample after the peak, {:.3} V, is at its end, {}): capture longer",
                    v[valley],
                    crate::units::format_si(t[valley], "s")
                ));
            }
            SwingEnd::Valley {
                at_s: t[valley],
                volts: v[valley],
            }
        }
    };
    let rise = peak_s - edge_s;
    let from = edge_s - 2.0 * rise.max(0.0);
    let until = match swing_end {
        SwingEnd::Zero { at_s } => at_s + 0.1 * (at_s - edge_s),
        SwingEnd::Valley { at_s, .. } => peak_s + 0.8 * (at_s - peak_s),
    };
    // The gate, where captured, turning on again ends the ring.
    let gate_on = match &capture.gate {
        Some(g) => {
            let (lo, hi) = g
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                    (a.min(x), b.max(x))
                });
            let mid = 0.5 * (lo + hi);
            (edge..n).find(|&k| g.get(k).is_some_and(|&x| x > mid && hi > lo))
        }
        None => None,
    };
    // Without a gate column, a turn-on shows as the switch voltage going
    // to zero after the swing and staying there to the capture's end (a
    // capture of normal switching, or of a deck that turns the gate on):
    // the ring does not go on by itself, so only the swing is fitted.
    // (Held there for at least as long as the swing took: the free ring
    // passes near zero at the end of each period, but only briefly.)
    let swing_s = match swing_end {
        SwingEnd::Zero { at_s } | SwingEnd::Valley { at_s, .. } => at_s - edge_s,
    };
    let settled = v[..n]
        .iter()
        .rposition(|&x| x > 0.1 * cell_v)
        .map(|k| k + 1)
        .filter(|&k| k > peak && k < n && t[n - 1] - t[k] >= swing_s);
    let ring_end = match (gate_on, settled) {
        (Some(k), _) => k,
        (None, Some(_)) => 0,
        (None, None) => n,
    };
    let until = gate_on.map_or(until, |k| until.min(t[k]));
    let first = t.partition_point(|&x| x < from);
    let end = t.partition_point(|&x| x <= until).min(n);
    if end <= first + crate::input::capture::MIN_SAMPLES / 2 {
        return Err(format!(
            "only {} samples span the turn-off and the swing: sample faster",
            end.saturating_sub(first)
        ));
    }
    Ok(Span {
        first,
        end,
        // (0: the swing only.)
        ring_end: ring_end.max(end),
        edge_s,
        peak_s,
        peak_v,
        swing_end,
    })
}
