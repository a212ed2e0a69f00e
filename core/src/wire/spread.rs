//! [`Wire`] for the spread profile: a child of `spread` for its private fields; the bytes
//! are postcard's (see [`crate::wire`]).

use super::{BinAccumulator, KoenkerSums, SpreadConfig, SpreadProfile};
use crate::real::Real;
use crate::wire::{wire_struct, Reader, Wire, Writer};

wire_struct!(impl[R: Real] BinAccumulator<R> { weight, mean, comoment, mean_log_level });
wire_struct!(impl[R: Real] KoenkerSums<R> {
    weight, weight_squares, mean_level, mean_square, level_comoment, square_comoment,
    cross_comoment,
});

impl<R: Real, const BINS: usize> Wire for SpreadProfile<R, BINS> {
    fn put(&self, w: &mut Writer<'_>) {
        self.config.put(w);
        self.log_level_low.put(w);
        self.bins_per_log_unit.put(w);
        self.accepting.put(w);
        self.koenker.put(w);
        self.scale.put(w);
        self.sample_weight.put(w);
        for bin in &self.bins {
            bin.put(w);
        }
    }

    fn get(r: &mut Reader<'_>) -> Self {
        let mut profile = SpreadProfile {
            config: Wire::get(r),
            log_level_low: Wire::get(r),
            bins_per_log_unit: Wire::get(r),
            accepting: Wire::get(r),
            koenker: Wire::get(r),
            scale: Wire::get(r),
            sample_weight: Wire::get(r),
            bins: [BinAccumulator {
                weight: R::ZERO,
                mean: R::ZERO,
                comoment: R::ZERO,
                mean_log_level: R::ZERO,
            }; BINS],
        };
        for bin in profile.bins.iter_mut() {
            *bin = Wire::get(r);
        }
        profile
    }
    fn read(&mut self, r: &mut Reader<'_>) {
        self.config.read(r);
        self.log_level_low.read(r);
        self.bins_per_log_unit.read(r);
        self.accepting.read(r);
        self.koenker.read(r);
        self.scale.read(r);
        self.sample_weight.read(r);
        for bin in self.bins.iter_mut() {
            bin.read(r);
        }
    }
}

impl<R: Real, const BINS: usize> SpreadProfile<R, BINS> {
    /// A profile of zeros to decode into (every field is then overwritten).
    pub(crate) fn blank() -> Self {
        let z = R::ZERO;
        SpreadProfile {
            config: SpreadConfig {
                level_low: z,
                level_high: z,
                forgetting: z,
            },
            log_level_low: z,
            bins_per_log_unit: z,
            accepting: false,
            koenker: KoenkerSums::EMPTY,
            scale: z,
            sample_weight: z,
            bins: [BinAccumulator::EMPTY; BINS],
        }
    }
}
