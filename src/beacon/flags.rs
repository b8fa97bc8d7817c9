//! The flag byte of a beacon frame.

/// Advisory bits a sender sets about itself (byte 1 of the frame).
///
/// Version 1 defines [`Flags::PINNED`] and [`Flags::ISOLATED`]; the other six bits are
/// reserved. A version-1 decoder keeps reserved bits as they arrived (see [`Flags::bits`])
/// and gives them no meaning, so later advisory bits need no version change.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Flags(u8);

impl Flags {
    /// No flag set.
    pub const NONE: Flags = Flags(0);
    /// The sender's phase follows a reference (a pinned leader, a line-frequency or
    /// satellite pulse) rather than its neighbours. Bit 0.
    pub const PINNED: Flags = Flags(1 << 0);
    /// The sender has accepted no neighbour recently; its phase is free-running. Bit 1.
    pub const ISOLATED: Flags = Flags(1 << 1);
    /// The bits version 1 gives a meaning to.
    pub const DEFINED: Flags = Flags(Self::PINNED.0 | Self::ISOLATED.0);

    /// Flags from the raw byte, reserved bits included.
    pub const fn from_bits(bits: u8) -> Flags {
        Flags(bits)
    }

    /// The raw byte, reserved bits included.
    pub const fn bits(self) -> u8 {
        self.0
    }

    /// Whether every bit of `other` is set in `self`.
    pub const fn contains(self, other: Flags) -> bool {
        self.0 & other.0 == other.0
    }

    /// The bits of both.
    #[must_use]
    pub const fn union(self, other: Flags) -> Flags {
        Flags(self.0 | other.0)
    }

    /// `self` without the bits of `other`.
    #[must_use]
    pub const fn without(self, other: Flags) -> Flags {
        Flags(self.0 & !other.0)
    }

    /// The reserved bits that are set (non-zero only for frames from a newer sender).
    pub const fn reserved(self) -> Flags {
        Flags(self.0 & !Self::DEFINED.0)
    }
}

impl core::ops::BitOr for Flags {
    type Output = Flags;
    fn bitor(self, rhs: Flags) -> Flags {
        self.union(rhs)
    }
}

#[cfg(test)]
mod tests {
    use super::Flags;

    #[test]
    fn defined_bits_are_bit_0_and_bit_1() {
        // The layout table in the module docs names these positions.
        assert_eq!(Flags::PINNED.bits(), 0b0000_0001);
        assert_eq!(Flags::ISOLATED.bits(), 0b0000_0010);
        assert_eq!(Flags::DEFINED.bits(), 0b0000_0011);
    }

    #[test]
    fn set_operations() {
        let both = Flags::PINNED | Flags::ISOLATED;
        assert!(both.contains(Flags::PINNED));
        assert!(both.contains(Flags::ISOLATED));
        assert!(!Flags::PINNED.contains(both));
        assert_eq!(both.without(Flags::PINNED), Flags::ISOLATED);
        assert!(Flags::NONE.contains(Flags::NONE));
    }

    #[test]
    fn reserved_bits_are_kept_but_reported_apart() {
        let f = Flags::from_bits(0b1010_0001);
        assert_eq!(f.bits(), 0b1010_0001);
        assert!(f.contains(Flags::PINNED));
        assert_eq!(f.reserved().bits(), 0b1010_0000);
        assert_eq!(Flags::DEFINED.reserved(), Flags::NONE);
    }
}
