//! On-board check that the square root the core uses on this board (the FPU's `VSQRT.F32`,
//! through `steadycal-fpu`) returns the same bits as libm's software `sqrtf`, which is what
//! the host's replay is held to: every exponent of a positive `f32` with a spread of
//! mantissas, plus zero, the smallest subnormal and infinity. Prints
//! `sqrt_check inputs=N mismatches=M`; the QEMU comparison test requires `mismatches=0`.

/// Inputs compared and how many differed.
pub fn run() -> (u32, u32) {
    let mut inputs = 0u32;
    let mut mismatches = 0u32;
    let mut compare = |x: f32| {
        inputs += 1;
        if steadycal_fpu::sqrt_f32(x).to_bits() != libm::sqrtf(x).to_bits() {
            mismatches += 1;
        }
    };
    for exponent in 0u32..0xff {
        let mut mantissa = 0u32;
        while mantissa < 1 << 23 {
            compare(f32::from_bits(exponent << 23 | mantissa));
            mantissa += 65_537;
        }
        compare(f32::from_bits(exponent << 23 | ((1 << 23) - 1)));
    }
    compare(f32::from_bits(1));
    compare(f32::INFINITY);
    (inputs, mismatches)
}
