//! [`Wire`] for the drift detector: a child of `detect::drift` for its private fields; the
//! bytes are postcard's (see [`crate::wire`]).

use super::DriftDetector;
use crate::real::Real;
use crate::wire::wire_struct;

wire_struct!(impl[R: Real] DriftDetector<R> { baseline, status });
