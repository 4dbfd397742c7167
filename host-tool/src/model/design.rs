//! A design as the model uses it: the validated design file
//! ([`DesignSpec`], plain data) with what its model builds from it once and
//! keeps: the ring's events over its range ([`crate::tank::event_grid`]),
//! the ideal tank's turn-on over its loads ([`crate::tank::load_grid`]),
//! and the robust windows of its readings ([`crate::model::robust_aim`]).
//!
//! [`Design`] dereferences to its [`DesignSpec`], so `design.tank` or
//! `design.vin_codes` read the data directly. A change through `&mut`
//! forgets everything built from the old data, so nothing stale survives.

use std::ops::{Deref, DerefMut};

use crate::input::design::{DesignError, DesignSpec};
use crate::model::robust_aim::{AimCache, RobustAim};
use crate::tank::cell_box::cell_box;
use crate::tank::event_grid::EventGrid;
use crate::tank::load_grid::LoadGrid;

/// A validated design and what its model builds from it on first use.
#[derive(Debug, Clone)]
pub struct Design {
    spec: DesignSpec,
    /// The robust windows of the readings, built on first use.
    aim: AimCache,
    /// The ring's events over the design range, built on first use.
    events: Lazy<EventGrid>,
    /// The ideal tank's turn-on over the design's loads, built on first use.
    loads: Lazy<LoadGrid>,
}

impl From<DesignSpec> for Design {
    fn from(spec: DesignSpec) -> Self {
        Self {
            spec,
            aim: AimCache::default(),
            events: Lazy::default(),
            loads: Lazy::default(),
        }
    }
}

impl Deref for Design {
    type Target = DesignSpec;
    fn deref(&self) -> &DesignSpec {
        &self.spec
    }
}

impl DerefMut for Design {
    /// The data, to change: everything built from it is forgotten first.
    fn deref_mut(&mut self) -> &mut DesignSpec {
        self.aim = AimCache::default();
        self.events = Lazy::default();
        self.loads = Lazy::default();
        &mut self.spec
    }
}

/// Something a design builds on first use and keeps (`None`: it does not
/// apply to the design or could not be built). A clone starts empty, as
/// [`AimCache`].
struct Lazy<T>(std::sync::OnceLock<Option<T>>);

impl<T> Default for Lazy<T> {
    fn default() -> Self {
        Self(std::sync::OnceLock::new())
    }
}

impl<T> Clone for Lazy<T> {
    fn clone(&self) -> Self {
        Self::default()
    }
}

impl<T> std::fmt::Debug for Lazy<T> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self.0.get() {
            None => "Lazy(not built)",
            Some(Some(_)) => "Lazy(built)",
            Some(None) => "Lazy(none)",
        })
    }
}

impl Design {
    /// Read and validate a design file.
    ///
    /// # Errors
    /// [`DesignError`].
    pub fn load(path: &std::path::Path) -> Result<Self, DesignError> {
        DesignSpec::load(path).map(Self::from)
    }

    /// Parse and validate design-file text; `origin` names it in errors
    /// and locates the files it names (a Coss curve).
    ///
    /// # Errors
    /// [`DesignError::Malformed`] or [`DesignError::Invalid`].
    pub fn parse(text: &str, origin: &str) -> Result<Self, DesignError> {
        DesignSpec::parse(text, origin).map(Self::from)
    }

    /// The validated design file's data.
    #[must_use]
    pub fn spec(&self) -> &DesignSpec {
        &self.spec
    }

    /// The robust windows of the design's readings under its `[tolerance]`
    /// table (`None` without one), built on the first call (about a second
    /// on two cores with a Coss curve) and kept until the design changes.
    ///
    /// # Errors
    /// timing-core's error for a point the model refuses.
    pub fn robust_aim(&self) -> Result<Option<&RobustAim>, timing_core::Error> {
        self.aim.get(self)
    }

    /// The cell's voltage and current ranges over the design range;
    /// `None` where a corner is refused. Codes at or below the sensor zero read no current
    /// (the model refuses them whatever a grid holds): the lowest current
    /// taken is at least 1e-3 of the highest.
    fn cell_range(&self) -> Option<((f64, f64), (f64, f64))> {
        let (v, i) = (self.vin_codes, self.io_codes);
        let io_hi = self.io_of(i.hi);
        let io_lo = self.io_of(i.lo).max(1e-3 * io_hi);
        let vin = (self.vin_of(v.lo), self.vin_of(v.hi));
        cell_box(self.topology, self.vout_v, vin, (io_lo, io_hi)).ok()
    }

    /// The ring's events tabulated over the design's cell range
    /// ([`crate::tank::event_grid`]), built on the first call (about 0.1 s on two
    /// cores) and kept; `None` for an ideal tank or where the grid cannot
    /// be built (the ring then answers every point).
    #[must_use]
    pub fn event_grid(&self) -> Option<&EventGrid> {
        self.events
            .0
            .get_or_init(|| {
                let Ok(crate::tank::real_tank::CellSolver::Ring(ring)) = self.real.solver() else {
                    return None;
                };
                let (cv, ci) = self.cell_range()?;
                EventGrid::new(&ring, cv, ci).ok()
            })
            .as_ref()
    }

    /// The ideal tank's turn-on tabulated over the design's normalised
    /// loads ([`crate::tank::load_grid`]), built on the first call (milliseconds)
    /// and kept; `None` for a tank that needs the ring or where the table
    /// cannot be built (timing-core's transition then answers every point).
    #[must_use]
    pub fn load_grid(&self) -> Option<&LoadGrid> {
        self.loads
            .0
            .get_or_init(|| {
                let Ok(crate::tank::real_tank::CellSolver::Ideal(tank)) = self.real.solver() else {
                    return None;
                };
                // J = I*Z0/V is least at the least current and the
                // highest voltage of the cell's range, and the reverse.
                let (v, i) = self.cell_range()?;
                let (lo, hi) = (i.0 * tank.z0_ohm() / v.1, i.1 * tank.z0_ohm() / v.0);
                LoadGrid::new(&tank, lo, hi).ok()
            })
            .as_ref()
    }
}
