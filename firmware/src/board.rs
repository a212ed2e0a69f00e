//! Board support for QEMU's `mps2-an386`: the FPGA I/O block's user LED 0 as an
//! embedded-hal `OutputPin`, and a stack high-water mark.

use core::convert::Infallible;

use embedded_hal::digital::{ErrorType, OutputPin};

/// The FPGA I/O LED register of the MPS2 AN385/AN386 images (bit n drives user LED n).
const FPGAIO_LED: *mut u32 = 0x4002_8000 as *mut u32;

/// User LED 0 of the board.
pub struct UserLed0 {
    _private: (),
}

impl UserLed0 {
    /// Takes the LED (one owner; created once by `main`).
    pub fn new() -> UserLed0 {
        UserLed0 { _private: () }
    }

    fn write(&mut self, on: bool) {
        // SAFETY: FPGAIO_LED is the board's memory-mapped LED register; only this type
        // touches bit 0 of it, and the firmware is single-threaded.
        unsafe {
            let value = core::ptr::read_volatile(FPGAIO_LED);
            let value = if on { value | 1 } else { value & !1 };
            core::ptr::write_volatile(FPGAIO_LED, value);
        }
    }

    /// True while the LED is lit (reads the register back).
    pub fn is_lit(&self) -> bool {
        // SAFETY: a volatile read of the board's LED register.
        unsafe { core::ptr::read_volatile(FPGAIO_LED) & 1 != 0 }
    }
}

impl ErrorType for UserLed0 {
    type Error = Infallible;
}

impl OutputPin for UserLed0 {
    fn set_low(&mut self) -> Result<(), Infallible> {
        self.write(false);
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Infallible> {
        self.write(true);
        Ok(())
    }
}

const PAINT: u32 = 0x5CA1_AB1E;
/// Bytes of stack painted below the current stack pointer at start.
pub const PAINTED: usize = 32 * 1024;

extern "C" {
    /// Top of the stack (cortex-m-rt's link.x: the end of RAM).
    static _stack_start: u32;
}

fn stack_top() -> usize {
    // Only the address of the linker symbol is taken, never its value.
    core::ptr::addr_of!(_stack_start) as usize
}

/// Fills `PAINTED` bytes below the current stack pointer (less 64 bytes for this function's
/// own frame) with a pattern.
#[inline(never)]
pub fn paint_stack() {
    let top = (cortex_m::register::msp::read() as usize - 64) & !3;
    let mut address = top - PAINTED;
    while address < top {
        // SAFETY: the addresses lie between the end of .bss/.uninit and the stack pointer in
        // the 4 MiB RAM of the board, memory nothing else uses.
        unsafe { core::ptr::write_volatile(address as *mut u32, PAINT) };
        address += 4;
    }
}

/// Peak stack use in bytes since `paint_stack`: from the top of the stack down to the
/// lowest overwritten word of the painted region (so it includes `main`'s own frame).
pub fn stack_used() -> usize {
    let top = (cortex_m::register::msp::read() as usize - 64) & !3;
    let mut address = top - PAINTED;
    // SAFETY: reads of the region written by `paint_stack`.
    while address < top && unsafe { core::ptr::read_volatile(address as *const u32) } == PAINT {
        address += 4;
    }
    stack_top() - address
}
