//! [`Walk`](crate::wire::Walk) for the level origin: a child of `origin` for its private
//! fields; the bytes are postcard's (see [`crate::wire`]).

use super::LevelOrigin;
use crate::real::Real;
use crate::wire::walk_struct;

walk_struct!(impl[R: Real] LevelOrigin<R> { value, stage });
