//! A simulated crystal: a node timer that runs fast or slow by a set error.
//!
//! Every emulated node is clocked by the same host clock, so a crystal error has to be
//! put in by hand: the node's timer reads the true microseconds since boot scaled by
//! `1 + ppm·10⁻⁶`, wrapping at 2^32 like a free-running 32-bit hardware timer.

/// A timer at a nominal 1 MHz whose crystal is `ppm` parts per million off.
#[derive(Clone, Copy, Debug)]
pub struct Crystal {
    ppm: i32,
}

impl Crystal {
    /// A crystal `ppm` parts per million fast (negative: slow).
    pub const fn new(ppm: i32) -> Self {
        Crystal { ppm }
    }

    /// The error, ppm.
    pub const fn ppm(&self) -> i32 {
        self.ppm
    }

    /// The timer reading, in its own (erroneous) microsecond ticks, at `true_us`.
    pub fn ticks_at(&self, true_us: u64) -> u32 {
        // true_us < 2^52 for 142 years; the product stays far inside i128.
        let skew = i128::from(true_us) * i128::from(self.ppm) / 1_000_000;
        (i128::from(true_us) + skew) as u64 as u32
    }
}

#[cfg(test)]
mod tests {
    use super::Crystal;

    #[test]
    fn fast_crystal_gains_its_ppm() {
        // 10 s at +50 ppm: 500 µs ahead (the definition of ppm).
        assert_eq!(Crystal::new(50).ticks_at(10_000_000), 10_000_500);
        assert_eq!(Crystal::new(-50).ticks_at(10_000_000), 9_999_500);
    }
}
