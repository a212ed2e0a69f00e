//! [`Walk`](crate::wire::Walk) for the ladder's state: a child of `ladder` for its private
//! fields; the bytes are postcard's (see [`crate::wire`]).

use super::PowerLadder;
use crate::real::Real;
use crate::wire::walk_struct;

walk_struct!(impl[R: Real, const P: usize] PowerLadder<R, P> {
    rungs, log_level_sum, sample_weight, active, candidate, lead, checks, since_decision,
    recent_switches, left, held,
});
