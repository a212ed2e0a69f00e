//! The broker's confirmations of what steadycal publishes (QoS 1 `PUBACK`s), counted per
//! publication by packet id, so that a save point knows when everything published so far
//! is confirmed.
//!
//! Invariant: `published = unsent + awaiting + confirmed + given_up`, each term counting
//! publications, and a publication is confirmed at most once. A publication is `unsent`
//! from its hand-over to the client until the client writes it with a packet id, then
//! awaited (by packet id) until the broker acknowledges that id. The client writes what a
//! lost connection left unacknowledged again with the same packet id (MQTT 3.1.1, section
//! 4.4), so a second write of an awaited id is the same publication; an acknowledgement of
//! an id not awaited (the client reports one before refusing it) confirms nothing. When
//! the broker kept no session the client drops what was awaited and what it had not
//! written when the connection ended ([`Confirmations::new_session`]): given up. What
//! stays unconfirmed past a save point's wait is given up too ([`Confirmations::lapse`]),
//! but the client still holds it: a lapsed publication written or acknowledged later is
//! awaited or confirmed after all. The client writes in hand-over order, so a first write
//! is of the oldest publication not yet written: a lapsed one before a later one.

use std::collections::BTreeSet;

/// The counts of [`Confirmations`], as the status reports them.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Counts {
    /// Publications handed to the client.
    pub published: u64,
    /// Confirmed by the broker.
    pub confirmed: u64,
    /// Neither confirmed nor given up.
    pub unconfirmed: u64,
    /// Given up unconfirmed.
    pub given_up: u64,
}

/// The confirmations of one client's publications.
#[derive(Debug, Default)]
pub struct Confirmations {
    published: u64,
    /// Handed, not written.
    unsent: u64,
    /// Written, not acknowledged.
    awaiting: BTreeSet<u16>,
    confirmed: u64,
    /// Dropped by the client (no session).
    dropped: u64,
    /// Written, given up unacknowledged; the client still holds them.
    lapsed: BTreeSet<u16>,
    /// Handed, given up unwritten; the client still holds them.
    lapsed_unsent: u64,
}

impl Confirmations {
    /// A publication handed to the client.
    pub fn handed(&mut self) {
        self.published += 1;
        self.unsent += 1;
    }

    /// The client wrote a publication with packet id `pkid`.
    pub fn written(&mut self, pkid: u16) {
        if self.awaiting.contains(&pkid) {
            return; // written again after a reconnection
        }
        if self.lapsed.remove(&pkid) {
            // a lapsed one written again after a reconnection
        } else if self.lapsed_unsent > 0 {
            self.lapsed_unsent -= 1;
        } else if self.unsent > 0 {
            self.unsent -= 1;
        } else {
            return; // not a publication handed over (none is)
        }
        self.awaiting.insert(pkid);
    }

    /// The broker acknowledged packet id `pkid`; true when it confirmed a publication.
    pub fn acknowledged(&mut self, pkid: u16) -> bool {
        let awaited = self.awaiting.remove(&pkid) || self.lapsed.remove(&pkid);
        if awaited {
            self.confirmed += 1;
        }
        awaited
    }

    /// The broker kept no session: the client dropped every publication written and not
    /// acknowledged, and the `unwritten` it had not written when the connection ended
    /// (the oldest ones not written). Returns how many were given up.
    pub fn new_session(&mut self, unwritten: u64) -> u64 {
        let before = self.dropped;
        self.dropped += (self.awaiting.len() + self.lapsed.len()) as u64;
        self.awaiting.clear();
        self.lapsed.clear();
        let lapsed = unwritten.min(self.lapsed_unsent);
        self.lapsed_unsent -= lapsed;
        let unsent = (unwritten - lapsed).min(self.unsent);
        self.unsent -= unsent;
        self.dropped += lapsed + unsent;
        self.dropped - before
    }

    /// Gives up waiting for what is not confirmed; returns how many.
    pub fn lapse(&mut self) -> u64 {
        let count = self.unsent + self.awaiting.len() as u64;
        self.lapsed.append(&mut self.awaiting);
        self.lapsed_unsent += self.unsent;
        self.unsent = 0;
        count
    }

    /// True when every publication is confirmed or given up.
    pub fn settled(&self) -> bool {
        self.unsent == 0 && self.awaiting.is_empty()
    }

    /// The counts.
    pub fn counts(&self) -> Counts {
        Counts {
            published: self.published,
            confirmed: self.confirmed,
            unconfirmed: self.unsent + self.awaiting.len() as u64,
            given_up: self.dropped + self.lapsed.len() as u64 + self.lapsed_unsent,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn a_publication_written_again_after_a_reconnection_is_confirmed_once() {
        let mut c = Confirmations::default();
        c.handed();
        c.handed();
        c.written(1);
        c.written(2);
        assert!(c.acknowledged(1));
        // The connection is lost before 2 is acknowledged; the client writes it again
        // with the same id, the broker acknowledges it; an acknowledgement repeated, or
        // of an id already confirmed, confirms nothing.
        c.written(2);
        assert!(c.acknowledged(2));
        assert!(!c.acknowledged(2));
        assert!(!c.acknowledged(1));
        assert_eq!(
            c.counts(),
            Counts {
                published: 2,
                confirmed: 2,
                unconfirmed: 0,
                given_up: 0
            }
        );
        assert!(c.settled());
    }

    #[test]
    fn what_a_new_session_dropped_is_given_up_and_what_it_kept_is_awaited() {
        let mut c = Confirmations::default();
        for pkid in 1..=3 {
            c.handed();
            c.written(pkid);
        }
        c.handed(); // not written when the connection ended: the client drops it
        c.handed(); // handed after the connection ended: the client keeps it
        assert!(!c.settled());
        assert_eq!(c.new_session(1), 4);
        assert!(!c.settled());
        // The client writes the one it kept, with id 1 again.
        c.written(1);
        assert!(c.acknowledged(1));
        assert!(c.settled());
        assert_eq!(
            c.counts(),
            Counts {
                published: 5,
                confirmed: 1,
                unconfirmed: 0,
                given_up: 4
            }
        );
    }

    #[test]
    fn a_lapsed_publication_confirmed_late_counts_once() {
        let mut c = Confirmations::default();
        c.handed();
        c.written(7);
        c.handed();
        assert_eq!(c.lapse(), 2);
        assert!(c.settled());
        // After a reconnection the client writes 7 again, then the unwritten one as 8.
        c.written(7);
        c.written(8);
        assert!(!c.settled());
        assert!(c.acknowledged(7));
        assert!(c.acknowledged(8));
        assert!(!c.acknowledged(7));
        assert_eq!(
            c.counts(),
            Counts {
                published: 2,
                confirmed: 2,
                unconfirmed: 0,
                given_up: 0
            }
        );
    }

    #[derive(Clone, Debug)]
    enum Step {
        Hand,
        Write(u16),
        Ack(u16),
        NewSession(u64),
        Lapse,
    }

    fn step() -> impl Strategy<Value = Step> {
        prop_oneof![
            3 => Just(Step::Hand),
            3 => (1u16..8).prop_map(Step::Write),
            3 => (1u16..8).prop_map(Step::Ack),
            1 => (0u64..4).prop_map(Step::NewSession),
            1 => Just(Step::Lapse),
        ]
    }

    proptest! {
        /// Whatever the order of writes, acknowledgements (repeated, stray), new sessions
        /// and lapses, the terms add up to what was published.
        #[test]
        fn the_counts_add_up(steps in proptest::collection::vec(step(), 0..200)) {
            let mut c = Confirmations::default();
            for step in steps {
                match step {
                    Step::Hand => c.handed(),
                    Step::Write(pkid) => c.written(pkid),
                    Step::Ack(pkid) => { c.acknowledged(pkid); }
                    Step::NewSession(unwritten) => { c.new_session(unwritten); }
                    Step::Lapse => { c.lapse(); }
                }
                let n = c.counts();
                prop_assert!(n.confirmed <= n.published);
                prop_assert_eq!(n.published, n.confirmed + n.unconfirmed + n.given_up);
            }
        }
    }
}
