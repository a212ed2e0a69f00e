//! [`Wire`] for the spread-jump CUSUM: a child of `detect::spread_jump` for its private
//! fields; the bytes are postcard's (see [`crate::wire`]).

use super::SpreadJumpCusum;
use crate::real::Real;
use crate::wire::wire_struct;

wire_struct!(impl[R: Real] SpreadJumpCusum<R> { sum, run });
