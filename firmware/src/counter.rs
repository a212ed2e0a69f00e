//! Instruction counting with SysTick on the core clock.
//!
//! SysTick counts down from 0xFF_FFFF once per core clock tick; a push takes far fewer than
//! 2^24 ticks, so the difference of two readings modulo 2^24 is the elapsed tick count.
//! Under QEMU with `-icount shift=0` that is deterministic (40 instructions per tick on
//! `mps2-an386`, checked by [`Counter::calibrate`]).

use cortex_m::peripheral::syst::SystClkSource;
use cortex_m::peripheral::SYST;

const RELOAD: u32 = 0x00FF_FFFF;

/// A free-running SysTick.
pub struct Counter {
    _systick: SYST,
}

impl Counter {
    /// Starts SysTick on the core clock, no interrupt.
    pub fn start(mut systick: SYST) -> Counter {
        systick.set_clock_source(SystClkSource::Core);
        systick.set_reload(RELOAD);
        systick.clear_current();
        systick.disable_interrupt();
        systick.enable_counter();
        Counter { _systick: systick }
    }

    /// The current count.
    #[inline(always)]
    pub fn now(&self) -> u32 {
        SYST::get_current()
    }

    /// Ticks since `before` (SysTick counts down).
    #[inline(always)]
    pub fn since(&self, before: u32) -> u32 {
        before.wrapping_sub(SYST::get_current()) & RELOAD
    }

    /// Runs a loop of known instruction count and returns (instructions, ticks).
    ///
    /// The loop body is 100 `nop`s, a `subs` and a `bne`: 102 instructions per pass, 200
    /// passes, plus the `movs` that sets the counter: 20,401 instructions.
    #[inline(never)]
    pub fn calibrate(&self) -> (u32, u32) {
        const PASSES: u32 = 200;
        let before = self.now();
        // SAFETY: the block only uses the scratch register it declares and touches no memory.
        unsafe {
            core::arch::asm!(
                "movs {n}, #{passes}",
                "2:",
                ".rept 100",
                "nop",
                ".endr",
                "subs {n}, {n}, #1",
                "bne 2b",
                n = out(reg) _,
                passes = const PASSES,
                options(nomem, nostack),
            );
        }
        let ticks = self.since(before);
        (PASSES * 102 + 1, ticks)
    }
}

/// Sum, count and extremes of the tick counts of one kind of push.
#[derive(Clone, Copy, Debug, Default)]
pub struct Tally {
    /// Pushes counted.
    pub pushes: u32,
    /// Total ticks.
    pub ticks: u64,
    /// Largest single push.
    pub max: u32,
    min: Option<u32>,
}

impl Tally {
    /// Counts one push.
    pub fn add(&mut self, ticks: u32) {
        self.pushes += 1;
        self.ticks += u64::from(ticks);
        self.max = self.max.max(ticks);
        self.min = Some(self.min.map_or(ticks, |m| m.min(ticks)));
    }

    /// Smallest single push (0 when none).
    pub fn min_or_zero(&self) -> u32 {
        self.min.unwrap_or(0)
    }
}
