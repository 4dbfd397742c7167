//! A table in memory, as generation builds it and every later stage reads
//! it: sensing, layout, entries, and the validated timing-core table over
//! them.

use timing_core::table::{DelayTable, Fallback, Layout, Sensing};

/// A table in memory, with what generation knows about it.
#[derive(Debug, Clone, PartialEq)]
pub struct Generated {
    /// Sensing description.
    pub sensing: Sensing,
    /// Layout.
    pub layout: Layout,
    /// Fractional bits of the entries.
    pub frac_bits: u8,
    /// Fallback.
    pub fallback: Fallback,
    /// Entries.
    pub entries: Vec<u16>,
}

impl Generated {
    /// The validated timing-core table over these entries.
    ///
    /// # Errors
    /// timing-core's [`timing_core::table::TableError`] (a generator bug if it happens).
    pub fn table(&self) -> Result<DelayTable<&[u16]>, timing_core::table::TableError> {
        DelayTable::new(
            self.sensing,
            self.layout,
            self.frac_bits,
            self.fallback,
            self.entries.as_slice(),
        )
    }

    /// Bytes of the entries.
    #[must_use]
    pub fn table_bytes(&self) -> usize {
        self.entries.len() * 2
    }

    /// Layout name: `ratio` or `grid`.
    #[must_use]
    pub fn layout_name(&self) -> &'static str {
        match self.layout {
            Layout::Ratio(_) => "ratio",
            Layout::LogRatio(_) => "log-ratio",
            Layout::LogUniform(_) => "log-uniform",
            Layout::Grid(_) => "grid",
            Layout::RecipRatio(_) => "recip-ratio",
            Layout::LogVolt(_) => "log-volt",
            Layout::Margin(_) => "margin",
            Layout::RatioVolt(_) => "ratio-volt",
        }
    }
}
