//! [`Wire`] for the monitor: a child of `monitor` for its private fields; the bytes are
//! postcard's (see [`crate::wire`]). The derived `ladder_config` is not written; decoding
//! puts a placeholder there, which `complete_restored` replaces; so are the derived
//! `alarm_flags`.

use super::{unset_ladder_config, Monitor};
use crate::real::Real;
use crate::wire::{Reader, Wire, Writer};

impl<R: Real, const P: usize, const BINS: usize, const Q: usize> Wire for Monitor<R, P, BINS, Q> {
    fn put(&self, w: &mut Writer<'_>) {
        self.config.put(w);
        self.ladder.put(w);
        self.spread.put(w);
        self.mean_check.put(w);
        self.events.put(w);
        self.counters.put(w);
        self.spread_raised.put(w);
        self.last_exponent.put(w);
        self.detectors.put(w);
    }

    fn get(r: &mut Reader<'_>) -> Self {
        Monitor {
            config: Wire::get(r),
            ladder_config: unset_ladder_config(),
            ladder: Wire::get(r),
            spread: Wire::get(r),
            mean_check: Wire::get(r),
            events: Wire::get(r),
            counters: Wire::get(r),
            spread_raised: Wire::get(r),
            last_exponent: Wire::get(r),
            detectors: Wire::get(r),
            alarm_flags: crate::sample::Flags::empty(),
        }
    }
}
