//! 128-bit arithmetic kept out of line.
//!
//! On a 32-bit core every 128-bit multiply or overflow check expands to a
//! long instruction sequence; the forecasts' least-squares sums use dozens of
//! them. Calling these few functions instead keeps one copy of each sequence
//! (on the nRF52840 that is the difference between fitting the flash budget
//! and missing it by half). Plain integer types keep their own methods.

/// Checked and saturating 128-bit arithmetic, never inlined.
pub trait Wide: Sized {
    /// `checked_mul`.
    fn wide_mul(self, rhs: Self) -> Option<Self>;
    /// `checked_add`.
    fn wide_add(self, rhs: Self) -> Option<Self>;
    /// `checked_sub`.
    fn wide_sub(self, rhs: Self) -> Option<Self>;
    /// `checked_div`.
    fn wide_div(self, rhs: Self) -> Option<Self>;
    /// `saturating_mul`.
    fn sat_mul(self, rhs: Self) -> Self;
    /// `saturating_add`.
    fn sat_add(self, rhs: Self) -> Self;
    /// `saturating_sub`.
    fn sat_sub(self, rhs: Self) -> Self;
}

impl Wide for i128 {
    #[inline(never)]
    fn wide_mul(self, rhs: Self) -> Option<Self> {
        self.checked_mul(rhs)
    }
    #[inline(never)]
    fn wide_add(self, rhs: Self) -> Option<Self> {
        self.checked_add(rhs)
    }
    #[inline(never)]
    fn wide_sub(self, rhs: Self) -> Option<Self> {
        self.checked_sub(rhs)
    }
    #[inline(never)]
    fn wide_div(self, rhs: Self) -> Option<Self> {
        self.checked_div(rhs)
    }
    #[inline(never)]
    fn sat_mul(self, rhs: Self) -> Self {
        self.saturating_mul(rhs)
    }
    #[inline(never)]
    fn sat_add(self, rhs: Self) -> Self {
        self.saturating_add(rhs)
    }
    #[inline(never)]
    fn sat_sub(self, rhs: Self) -> Self {
        self.saturating_sub(rhs)
    }
}
