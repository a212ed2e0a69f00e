//! The one `f32` operation the core needs from the hardware that safe `no_std` Rust cannot
//! reach: the square root.
//!
//! On hard-float Arm targets (`target_abi = "eabihf"`: Cortex-M4F, M7, M33 with FPU, ...)
//! [`sqrt_f32`] runs the FPU's `VSQRT.F32` through inline assembly. Everywhere else it calls
//! [`libm::sqrtf`], which is the processor's instruction on x86_64 and a software
//! routine on a Cortex-M0. IEEE 754 requires the square root to be correctly rounded, and
//! every one of these implementations is, so they return the same bits for every input
//! (NaN payloads aside; the monitor never takes the root of a NaN or a negative value).
//! On a Cortex-M4F the instruction replaces a software routine of about 75 instructions
//! with one of seven (measured with `firmware/profile.sh`).
//!
//! This crate exists so that `steadycal-core` can keep `#![forbid(unsafe_code)]`: the
//! single `unsafe` block of the project's embedded path lives here, audited below.
//!
//! # Invariants
//! - `sqrt_f32(x)` equals `libm::sqrtf(x)` bit for bit for every `x` that is not NaN and
//!   not below zero, on every target (checked on the host by the tests below and on the
//!   board by the firmware comparison under QEMU).
//! - No memory is read or written except the stack slot that saves `s0`.
//!
//! ```
//! assert_eq!(steadycal_fpu::sqrt_f32(2.25), 1.5);
//! assert_eq!(steadycal_fpu::sqrt_f32(2.0).to_bits(), libm::sqrtf(2.0).to_bits());
//! ```
#![no_std]
#![deny(missing_docs)]

/// The correctly rounded square root of `x`.
#[inline(always)]
pub fn sqrt_f32(x: f32) -> f32 {
    #[cfg(all(target_arch = "arm", target_abi = "eabihf"))]
    {
        // Rust does not treat the FPU as a target feature on this target (so the `sreg`
        // operand class is refused); the value travels in a core register and `s0` is
        // saved and restored on the stack around the instruction.
        let mut bits = x.to_bits();
        // SAFETY: the hard-float ABI guarantees an FPU with VSQRT.F32 (VFPv2 and later). The
        // block reads and writes only `bits` and `s0`, which it restores; it changes no
        // condition flags and leaves the stack pointer as it found it.
        unsafe {
            core::arch::asm!(
                "vpush {{s0}}",
                "vmov s0, {bits}",
                "vsqrt.f32 s0, s0",
                "vmov {bits}, s0",
                "vpop {{s0}}",
                bits = inout(reg) bits,
                options(pure, readonly, preserves_flags),
            );
        }
        f32::from_bits(bits)
    }
    #[cfg(not(all(target_arch = "arm", target_abi = "eabihf")))]
    {
        libm::sqrtf(x)
    }
}

#[cfg(test)]
mod tests {
    use super::sqrt_f32;

    /// Every exponent, a spread of mantissas, and the edges: the same bits as libm.
    #[test]
    fn matches_libm_bit_for_bit() {
        let mut checked = 0u32;
        for exponent in 0u32..=0xff {
            for mantissa in (0u32..(1 << 23)).step_by(4099).chain([0, 1, (1 << 23) - 1]) {
                let x = f32::from_bits(exponent << 23 | mantissa);
                if x.is_nan() {
                    continue;
                }
                assert_eq!(sqrt_f32(x).to_bits(), libm::sqrtf(x).to_bits(), "{x:e}");
                checked += 1;
            }
        }
        assert!(checked > 500_000);
        assert_eq!(sqrt_f32(0.0).to_bits(), 0.0f32.to_bits());
        assert_eq!(sqrt_f32(-0.0).to_bits(), (-0.0f32).to_bits());
        assert_eq!(sqrt_f32(f32::INFINITY), f32::INFINITY);
    }
}
