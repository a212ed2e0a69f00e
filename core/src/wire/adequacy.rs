//! [`Walk`](crate::wire::Walk) for the mean check: a child of `adequacy` for its private
//! fields; the bytes are postcard's (see [`crate::wire`]).

use super::MeanCheck;
use crate::real::Real;
use crate::wire::walk_struct;

walk_struct!(impl[R: Real, const BINS: usize] MeanCheck<R, BINS> {
    sums, counts, since_reset, armed
});
