//! An `embedded-hal` 1.0 output pin over a memory-mapped register bit.

use core::convert::Infallible;
use embedded_hal::digital::{ErrorType, OutputPin, StatefulOutputPin};

/// One bit of a read-write output register (an LED or GPIO output latch), driven by
/// read-modify-write. Copies are handles to the same bit.
#[derive(Clone, Copy, Debug)]
pub struct RegisterPin {
    /// Address of the output register.
    addr: usize,
    /// The pin's bit.
    mask: u32,
}

impl RegisterPin {
    /// A pin on bit `bit` of the 32-bit register at `addr`.
    ///
    /// # Safety
    /// `addr` must be a device register that reads back the output latch and tolerates
    /// read-modify-write, and nothing else may drive that bit meanwhile.
    pub const unsafe fn new(addr: usize, bit: u32) -> Self {
        RegisterPin {
            addr,
            mask: 1 << (bit & 31),
        }
    }

    fn read(&self) -> u32 {
        // SAFETY: `new`'s contract: a readable device register.
        unsafe { core::ptr::read_volatile(self.addr as *const u32) }
    }

    fn write(&mut self, value: u32) {
        // SAFETY: `new`'s contract: a writable device register.
        unsafe { core::ptr::write_volatile(self.addr as *mut u32, value) }
    }
}

impl ErrorType for RegisterPin {
    type Error = Infallible;
}

impl OutputPin for RegisterPin {
    fn set_low(&mut self) -> Result<(), Infallible> {
        let v = self.read() & !self.mask;
        self.write(v);
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Infallible> {
        let v = self.read() | self.mask;
        self.write(v);
        Ok(())
    }
}

impl StatefulOutputPin for RegisterPin {
    fn is_set_high(&mut self) -> Result<bool, Infallible> {
        Ok(self.read() & self.mask != 0)
    }
    fn is_set_low(&mut self) -> Result<bool, Infallible> {
        Ok(self.read() & self.mask == 0)
    }
}
