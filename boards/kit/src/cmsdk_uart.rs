//! The Arm CMSDK APB UART (as on the MPS2 boards and in QEMU's `mps2-*` machines).

/// One CMSDK APB UART at its base address.
#[derive(Debug)]
pub struct Uart {
    base: usize,
}

const DATA: usize = 0x00;
const STATE: usize = 0x04;
const CTRL: usize = 0x08;
const INTCLEAR: usize = 0x0C;
const BAUDDIV: usize = 0x10;

const STATE_TX_FULL: u32 = 1 << 0;
const STATE_RX_FULL: u32 = 1 << 1;
const CTRL_TX_EN: u32 = 1 << 0;
const CTRL_RX_EN: u32 = 1 << 1;
const CTRL_RX_INT_EN: u32 = 1 << 3;
const INT_RX: u32 = 1 << 1;

impl Uart {
    /// The UART at `base`: 0x4000_4000 + i·0x1000 for UART i < 4 on the MPS2 machines.
    ///
    /// # Safety
    /// `base` must be a CMSDK APB UART that nothing else uses.
    pub const unsafe fn new(base: usize) -> Self {
        Uart { base }
    }

    fn read(&self, offset: usize) -> u32 {
        // SAFETY: `new`'s contract: a device register of this UART.
        unsafe { core::ptr::read_volatile((self.base + offset) as *const u32) }
    }

    fn write(&mut self, offset: usize, value: u32) {
        // SAFETY: `new`'s contract: a device register of this UART.
        unsafe { core::ptr::write_volatile((self.base + offset) as *mut u32, value) }
    }

    /// Enable transmit and receive, with the receive interrupt, at `bauddiv` core clocks a
    /// bit (at least 16; QEMU does not pace the line, so it only has to be valid).
    pub fn enable(&mut self, bauddiv: u32) {
        self.write(BAUDDIV, bauddiv.max(16));
        self.write(CTRL, CTRL_TX_EN | CTRL_RX_EN | CTRL_RX_INT_EN);
    }

    /// A received byte, if one is waiting.
    pub fn try_read(&mut self) -> Option<u8> {
        if self.read(STATE) & STATE_RX_FULL != 0 {
            Some(self.read(DATA) as u8)
        } else {
            None
        }
    }

    /// True when a received byte is waiting.
    pub fn has_byte(&self) -> bool {
        self.read(STATE) & STATE_RX_FULL != 0
    }

    /// Send one byte, waiting for room first.
    pub fn write_byte(&mut self, byte: u8) {
        while self.read(STATE) & STATE_TX_FULL != 0 {}
        self.write(DATA, u32::from(byte));
    }

    /// Send `bytes`, waiting for room before each.
    pub fn write_all(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.write_byte(b);
        }
    }

    /// Acknowledge the receive interrupt (from its handler).
    pub fn clear_rx_interrupt(&mut self) {
        self.write(INTCLEAR, INT_RX);
    }
}
