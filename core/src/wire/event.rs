//! [`Walk`](crate::wire::Walk) for the event queue: a child of `event` for its private
//! fields; the bytes are postcard's (see [`crate::wire`]): the waiting events as a
//! sequence, oldest first, then the dropped count. A sequence longer than the queue does
//! not decode. The events themselves are encoded and decoded by value, with the device-log
//! records' codec ([`Wire`](crate::wire::Wire)), so their code is shared with the records.

use super::EventQueue;
use crate::real::Real;
use crate::wire::{Transfer, Walk, Wire};

impl<R: Real, const Q: usize> Walk for EventQueue<R, Q> {
    fn walk<'t, 'a>(&mut self, t: &'t mut Transfer<'a>) -> &'t mut Transfer<'a> {
        if t.encoding() {
            let w = t.writer();
            w.varint32(self.events.len() as u32);
            for event in &self.events {
                event.put(w);
            }
        } else {
            let r = t.reader();
            let len = r.len();
            if len > Q {
                r.fail();
            }
            self.events.clear();
            for _ in 0..len.min(Q) {
                // Cannot be full: at most Q pushes.
                let _ = self.events.push_back(Wire::get(r));
            }
        }
        self.dropped.walk(t)
    }
}
