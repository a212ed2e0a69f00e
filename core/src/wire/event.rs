//! [`Walk`] for the event queue: a child of `event` for its private fields; the bytes are
//! postcard's (see [`crate::wire`]): the waiting events as a sequence, oldest first, then
//! the dropped count. A sequence longer than the queue does not decode. The events
//! themselves are encoded and decoded by value, with the device-log records' codec
//! ([`Wire`]), so their code is shared with the records.

use super::EventQueue;
use crate::real::Real;
use crate::wire::{part, Place, Transfer, Walk, Wire};

impl<R: Real, const Q: usize> Walk for EventQueue<R, Q> {
    fn walk(mut place: Place<'_, Self>, t: &mut Transfer<'_>) {
        match part!(place.events) {
            Place::Encode(events) => {
                let w = t.writer();
                w.varint32(events.len() as u32);
                for event in events {
                    event.put(w);
                }
            }
            Place::Decode(events) => {
                let r = t.reader();
                let len = r.len();
                if len > Q {
                    r.fail();
                }
                events.clear();
                for _ in 0..len.min(Q) {
                    // Cannot be full: at most Q pushes.
                    let _ = events.push_back(Wire::get(r));
                }
            }
        }
        Walk::walk(part!(place.dropped), t);
    }
}
