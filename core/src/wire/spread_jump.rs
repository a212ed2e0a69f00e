//! [`Walk`](crate::wire::Walk) for the spread-jump CUSUM: a child of `detect::spread_jump`
//! for its private fields; the bytes are postcard's (see [`crate::wire`]).

use super::SpreadJumpCusum;
use crate::real::Real;
use crate::wire::walk_struct;

walk_struct!(impl[R: Real] SpreadJumpCusum<R> { sum, run });
