//! [`Wire`] for the ladder's state: a child of `ladder` for its private fields; the bytes
//! are postcard's (see [`crate::wire`]). The struct expression in `get` names every field,
//! so a field added to the state breaks this build until the codec handles it.

use super::{PowerLadder, RungState};
use crate::real::Real;
use crate::wire::{Reader, Wire, Writer};

impl<R: Real, const P: usize> Wire for PowerLadder<R, P> {
    fn put(&self, w: &mut Writer<'_>) {
        for rung in &self.rungs {
            rung.put(w);
        }
        self.log_level_sum.put(w);
        self.sample_weight.put(w);
        self.active.put(w);
        self.candidate.put(w);
        self.lead.put(w);
        self.checks.put(w);
        self.since_decision.put(w);
    }

    fn get(r: &mut Reader<'_>) -> Self {
        let rung = |r: &mut Reader<'_>| RungState::<R, P>::get(r);
        PowerLadder {
            rungs: [rung(r), rung(r), rung(r), rung(r), rung(r)],
            log_level_sum: Wire::get(r),
            sample_weight: Wire::get(r),
            active: Wire::get(r),
            candidate: Wire::get(r),
            lead: Wire::get(r),
            checks: Wire::get(r),
            since_decision: Wire::get(r),
        }
    }
    fn read(&mut self, r: &mut Reader<'_>) {
        for rung in &mut self.rungs {
            rung.read(r);
        }
        self.log_level_sum.read(r);
        self.sample_weight.read(r);
        self.active.read(r);
        self.candidate.read(r);
        self.lead.read(r);
        self.checks.read(r);
        self.since_decision.read(r);
    }
}
