//! ADC codes as the firmware reads them.

/// A raw ADC conversion result (up to 16 bits), before any scaling.
#[repr(transparent)]
#[must_use]
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[cfg_attr(feature = "serde", serde(transparent))]
pub struct AdcCode(u16);

impl AdcCode {
    /// Wrap a raw code.
    pub const fn new(code: u16) -> Self {
        Self(code)
    }

    /// The raw code.
    #[must_use]
    pub const fn get(self) -> u16 {
        self.0
    }
}

/// An inclusive range of ADC codes, `lo..=hi`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct CodeRange {
    /// Lowest code in range.
    pub lo: u16,
    /// Highest code in range.
    pub hi: u16,
}

impl CodeRange {
    /// `code` moved to the nearest edge when outside the range.
    #[inline]
    #[must_use]
    pub const fn clamp(&self, code: AdcCode) -> u16 {
        let c = code.0;
        if c < self.lo {
            self.lo
        } else if c > self.hi {
            self.hi
        } else {
            c
        }
    }

    /// Number of codes in the range (`hi - lo + 1`; 0 when `lo > hi`).
    #[must_use]
    pub const fn len(&self) -> u32 {
        if self.hi < self.lo {
            0
        } else {
            (self.hi - self.lo) as u32 + 1
        }
    }

    /// Whether the range holds no code (`lo > hi`).
    #[must_use]
    pub const fn is_empty(&self) -> bool {
        self.hi < self.lo
    }
}
