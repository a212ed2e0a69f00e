//! [`Walk`](crate::wire::Walk) for the drift detector: a child of `detect::drift` for its
//! private fields; the bytes are postcard's (see [`crate::wire`]).

use super::DriftDetector;
use crate::real::Real;
use crate::wire::walk_struct;

walk_struct!(impl[R: Real] DriftDetector<R> { baseline, status });
