//! [`Walk`](crate::wire::Walk) for the tabular CUSUM: a child of `detect::cusum` for its
//! private fields; the bytes are postcard's (see [`crate::wire`]).

use super::TabularCusum;
use crate::real::Real;
use crate::wire::walk_struct;

walk_struct!(impl[R: Real] TabularCusum<R> { upper, lower, upper_run, lower_run });
