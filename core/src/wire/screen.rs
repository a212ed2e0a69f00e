//! [`Walk`](crate::wire::Walk) for the sample screen: a child of `detect::screen` for its
//! private fields; the bytes are postcard's (see [`crate::wire`]).

use super::Screen;
use crate::real::Real;
use crate::wire::walk_struct;

walk_struct!(impl[R: Real] Screen<R> {
    last_raw_bits, identical_run, window_checks, window_raw_low, window_raw_high,
    window_prediction_low, window_prediction_high, spikes_in_a_row, unresponsive,
    last_check_t,
});
