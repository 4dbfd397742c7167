//! What the online trim needs from the model, per region of its design:
//! the margin from the instant the switch voltage crosses the comparator's
//! threshold to the aim (the firmware predicts that crossing, what the
//! capture sees, as the feed-forward command less its region's margin),
//! and the earliest crossing of the design (a comparator stuck low must not
//! pass as a plausible capture).

use timing_core::ring::RingCell;
use timing_core::trim::Regions;

use crate::input::design::DesignSpec;
use crate::input::trim_design::TrimSpec;

/// Code pairs sampled along each axis of a region.
const SAMPLES: u16 = 8;

/// Why a design's trim cannot be planned.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum TrimPlanError {
    /// The model refused a code pair of the range.
    #[error("the trim's model: {0}")]
    Model(#[from] timing_core::Error),
    /// A capture at the turn-off instant would pass as plausible.
    #[error(
        "trim.plausible = {plausible:.2} ticks: a comparator stuck low (captured at once, a residual of \
         {earliest:.2} ticks at the earliest opening with the comparator's delay) would pass as a capture \
         of the opening; give a plausible residual below {earliest:.2} ticks"
    )]
    StuckLowPasses {
        /// The plausible residual, ticks.
        plausible: f64,
        /// The smallest residual of a capture at once, ticks.
        earliest: f64,
    },
}

/// The model's side of a design's trim.
#[derive(Debug, Clone, PartialEq)]
pub struct TrimPlan {
    /// Per region, the mean over its ZVS code pairs of the nominal aim less
    /// the nominal threshold crossing, ticks (0 where no pair has ZVS).
    pub margin_ticks: Vec<f64>,
    /// The earliest nominal threshold crossing over the sampled pairs, in
    /// command ticks (`None`: no pair has ZVS).
    pub earliest_opening_ticks: Option<f64>,
}

impl TrimPlan {
    /// The plan of `design`'s trim `trim`: the nominal ring (or closed
    /// forms) at 8 x 8 code pairs spread over each region (ends included).
    ///
    /// # Errors
    /// timing-core's error where the model refuses a pair of the range
    /// (validation makes that rare: the range's corners were checked).
    pub fn new(design: &DesignSpec, trim: &TrimSpec) -> Result<Self, TrimPlanError> {
        let ring = RingCell::new(
            design.real.lr_h,
            design.real.capacitance()?,
            design.real.r_tank_ohm,
        )?;
        let (clock, lead) = (design.timer.clock_hz(), design.timer.lead_s());
        let p = design.position.get();
        let threshold = trim.comparator_threshold_v;
        let regions: &Regions = &trim.regions;
        let mut margin_ticks = Vec::with_capacity(regions.count());
        let mut earliest: Option<f64> = None;
        for r in 0..regions.count() {
            let Some(((v0, v1), (i0, i1))) = regions.codes(r) else {
                break;
            };
            let (mut sum, mut n) = (0.0, 0u32);
            for cv in spread(v0, v1) {
                for ci in spread(i0, i1) {
                    let cell = design.cell(design.vin_of(cv), design.io_of(ci))?;
                    let (t, crossing) = ring.threshold_crossing(&cell, threshold)?;
                    if let Some(w) = t.turn_on.window() {
                        let aim = w.open_s + p * w.width_s();
                        let seen = (crossing.unwrap_or(w.open_s) - lead) * clock;
                        sum += (aim - lead) * clock - seen;
                        n += 1;
                        earliest = Some(earliest.map_or(seen, |e: f64| e.min(seen)));
                    }
                }
            }
            margin_ticks.push(if n == 0 { 0.0 } else { sum / f64::from(n) });
        }
        let plausible = f64::from(trim.config.plausible_ticks());
        let comparator = f64::from(trim.config.comparator_ticks());
        if let Some(e) = earliest {
            // A comparator stuck low is captured at once: its residual is
            // -(comparator + predicted opening).
            if plausible >= e + comparator {
                return Err(TrimPlanError::StuckLowPasses {
                    plausible,
                    earliest: e + comparator,
                });
            }
        }
        Ok(Self {
            margin_ticks,
            earliest_opening_ticks: earliest,
        })
    }

    /// The margins rounded to whole ticks (what the firmware subtracts).
    #[must_use]
    pub fn margin_whole_ticks(&self) -> Vec<u16> {
        self.margin_ticks
            .iter()
            .map(|m| (m + 0.5).floor().clamp(0.0, f64::from(u16::MAX)) as u16)
            .collect()
    }
}

/// Up to [`SAMPLES`] codes spread evenly over `lo..=hi`, ends included.
fn spread(lo: u16, hi: u16) -> impl Iterator<Item = u16> {
    let span = u32::from(hi - lo);
    let n = u32::from(SAMPLES - 1).min(span);
    (0..=n).map(move |k| {
        let c = (span * k).checked_div(n).unwrap_or(0);
        lo + c as u16
    })
}
