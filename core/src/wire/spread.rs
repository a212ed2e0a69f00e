//! [`Walk`](crate::wire::Walk) for the spread profile: a child of `spread` for its private
//! fields; the bytes are postcard's (see [`crate::wire`]).

use super::{BinAccumulator, KoenkerSums, SpreadConfig, SpreadProfile};
use crate::real::Real;
use crate::wire::walk_struct;

walk_struct!(impl[R: Real] BinAccumulator<R> { weight, mean, comoment, mean_log_level });
walk_struct!(impl[R: Real] KoenkerSums<R> {
    weight, weight_squares, mean_level, mean_square, level_comoment, square_comoment,
    cross_comoment,
});
walk_struct!(impl[R: Real, const BINS: usize] SpreadProfile<R, BINS> {
    config, log_level_low, bins_per_log_unit, accepting, koenker, scale, sample_weight, bins,
});

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
