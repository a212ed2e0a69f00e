//! Equivalence of the hand-written codec with postcard + serde: the same bytes for random
//! monitor states (the walk, [`Walk`]) and records ([`Wire`]), the same verdict (and value)
//! on damaged and random input.

use std::vec::Vec;

use proptest::prelude::*;
use serde::de::DeserializeOwned;
use serde::Serialize;

use crate::event::{Event, EventKind, FieldSource, KindId, Named};
use crate::monitor::{Monitor, MonitorConfig};
use crate::real::Real;
use crate::record::{LogStart, Record};
use crate::sample::Sample;
use crate::wire::{decode_into, encode, take_from_bytes, to_slice, Walk, Wire};

/// postcard's bytes for `value`.
fn reference<T: Serialize>(value: &T) -> Vec<u8> {
    let mut buffer = std::vec![0u8; 1 << 14];
    let len = postcard::to_slice(value, &mut buffer).unwrap().len();
    buffer.truncate(len);
    buffer
}

/// The codec's bytes for `value`.
fn ours<T: Wire>(value: &T) -> Vec<u8> {
    let mut buffer = std::vec![0u8; 1 << 14];
    let len = to_slice(value, &mut buffer).unwrap();
    buffer.truncate(len);
    buffer
}

/// Both decoders on `bytes`: same verdict, and when both decode, the same bytes left and
/// the same value (compared by its postcard re-encoding).
fn same_decoding<T: Wire + Serialize + DeserializeOwned>(
    bytes: &[u8],
) -> Result<(), TestCaseError> {
    same_verdict(bytes, "codec", take_from_bytes::<T>(bytes))
}

/// postcard's decoding of `bytes` against `mine` (a value and the bytes it left, or a
/// failure): the same verdict, and when both decode, the same bytes left and the same
/// value (compared by its postcard re-encoding). `decoder` names `mine` in a failure.
fn same_verdict<T: Serialize + DeserializeOwned, E>(
    bytes: &[u8],
    decoder: &str,
    mine: Result<(T, usize), E>,
) -> Result<(), TestCaseError> {
    match (postcard::take_from_bytes::<T>(bytes), mine) {
        (Err(_), Err(_)) => Ok(()),
        (Ok((a, rest)), Ok((b, unused))) => {
            prop_assert_eq!(rest.len(), unused);
            prop_assert_eq!(reference(&a), reference(&b));
            Ok(())
        }
        (theirs, mine) => Err(TestCaseError::fail(std::format!(
            "postcard ok: {}, {decoder} ok: {} on {bytes:02x?}",
            theirs.is_ok(),
            mine.is_ok()
        ))),
    }
}

/// The walk's bytes for `value`.
fn walked<T: Walk>(value: &mut T) -> Vec<u8> {
    let mut buffer = std::vec![0u8; 1 << 14];
    let len = encode(value, &mut buffer).unwrap();
    buffer.truncate(len);
    buffer
}

/// A monitor decoded by the walk into a blank monitor (as a snapshot is), and the number
/// of bytes left after it.
fn decoded<R: Real, const P: usize>(
    bytes: &[u8],
) -> Result<(Monitor<R, P>, usize), crate::wire::Bad> {
    let mut monitor = Monitor::<R, P>::blank();
    let unused = decode_into(&mut monitor, bytes)?;
    Ok((monitor, unused))
}

/// postcard and the walk's decoder on `bytes`, read as a monitor: see [`same_verdict`].
fn same_monitor_decoding<R: Real, const P: usize>(bytes: &[u8]) -> Result<(), TestCaseError> {
    same_verdict(bytes, "walk", decoded::<R, P>(bytes))
}

/// Decoding in place does not depend on what the target held: into `used` (a monitor
/// with a state of its own) and into a blank monitor, `bytes` give the same verdict, and
/// when both decode, the same bytes left and the same encoding.
fn same_whatever_the_target<R: Real, const P: usize>(
    mut used: Monitor<R, P>,
    bytes: &[u8],
) -> Result<(), TestCaseError> {
    let into_used = decode_into(&mut used, bytes);
    match (decoded::<R, P>(bytes), into_used) {
        (Err(_), Err(_)) => Ok(()),
        (Ok((mut blank, rest)), Ok(unused)) => {
            prop_assert_eq!(rest, unused);
            prop_assert_eq!(walked(&mut blank), walked(&mut used));
            Ok(())
        }
        (into_blank, into_used) => Err(TestCaseError::fail(std::format!(
            "into a blank monitor ok: {}, into a used one ok: {} on {bytes:02x?}",
            into_blank.is_ok(),
            into_used.is_ok()
        ))),
    }
}

/// One step of a random feed: a level index, a noise draw, and what kind of sample.
type Step = (u8, i8, u8);

fn monitor<R: Real, const P: usize>(shape: u8, baseline: bool, steps: &[Step]) -> Monitor<R, P> {
    let mut config = MonitorConfig::<R>::default_for_range(R::ONE, R::from_f64(100.0));
    if P >= 3 {
        config.basis.quadratic = shape == 1;
        config.basis.temperature = shape == 2;
    }
    let mut monitor: Monitor<R, P> = Monitor::new(config).unwrap();
    if baseline {
        monitor
            .set_baseline([R::from_f64(0.3), R::TWO, R::ZERO, R::ZERO], None)
            .unwrap();
    }
    for (i, &(level, noise, kind)) in steps.iter().enumerate() {
        let seq = i as u64;
        let reference = R::from_f64(1.0 + f64::from(level % 40) * 2.5);
        let raw = R::from_f64(0.3)
            + R::TWO * reference
            + R::from_f64(f64::from(noise) * 0.01) * reference;
        let mut sample = match kind % 8 {
            0..=4 => Sample::check(seq, seq as f64, raw, reference),
            5 => Sample::reading(seq, seq as f64, raw),
            6 => Sample::check(
                seq,
                seq as f64,
                R::from_f64(f64::from(noise) * 1e6),
                reference,
            ),
            _ => Sample::check(seq, seq as f64 * 1e3, raw, R::NAN),
        };
        sample.temperature = Some(R::from_f64(15.0 + f64::from(kind % 11)));
        monitor.push(&sample);
        if kind % 3 == 0 {
            while monitor.pop_event().is_some() {}
        }
    }
    monitor
}

fn check_monitor<R: Real, const P: usize>(
    shape: u8,
    baseline: bool,
    steps: &[Step],
    flips: &[(usize, u8)],
) -> Result<(), TestCaseError> {
    let mut monitor = monitor::<R, P>(shape, baseline, steps);
    let bytes = walked(&mut monitor);
    prop_assert_eq!(&bytes, &reference(&monitor));
    // Decoding gives back the same state, every byte of it.
    let (mut back, unused) = decoded::<R, P>(&bytes).unwrap();
    prop_assert_eq!(unused, 0);
    prop_assert_eq!(walked(&mut back), bytes.clone());
    // Damaged: both decoders agree.
    let mut damaged = bytes.clone();
    for &(at, value) in flips {
        let at = at % damaged.len();
        damaged[at] = value;
    }
    same_monitor_decoding::<R, P>(&damaged)?;
    let cut = flips.first().map_or(0, |&(at, _)| at % (bytes.len() + 1));
    same_monitor_decoding::<R, P>(&bytes[..cut])?;
    // The in-place decoder overwrites whatever the target held (another state here: the
    // monitor that wrote the bytes, run on for a few samples).
    let mut other = monitor;
    for (i, &(level, _, _)) in steps.iter().take(8).enumerate() {
        let reference = R::from_f64(2.0 + f64::from(level % 40));
        let seq = 1_000_000 + i as u64;
        other.push(&Sample::check(
            seq,
            seq as f64,
            R::TWO * reference,
            reference,
        ));
    }
    same_whatever_the_target::<R, P>(other.clone(), &bytes)?;
    same_whatever_the_target::<R, P>(other.clone(), &damaged)?;
    same_whatever_the_target::<R, P>(other, &bytes[..cut])
}

/// Field values for [`event_kind`], from the description: floats alternate between `a`
/// and `b`, integers are `small` (a `u8` field) or `run`, flags and names follow `small`'s
/// bits.
struct Values {
    a: f64,
    b: f64,
    small: u8,
    run: u32,
    floats: usize,
    flags: u32,
}

impl<R: Real> FieldSource<R> for Values {
    type Error = core::convert::Infallible;
    fn real(&mut self, _: &'static str) -> Result<R, Self::Error> {
        self.floats += 1;
        Ok(R::from_f64(if self.floats % 2 == 1 {
            self.a
        } else {
            self.b
        }))
    }
    fn wide(&mut self, _: &'static str) -> Result<f64, Self::Error> {
        Ok(R::from_f64(self.b).to_f64())
    }
    fn integer(&mut self, _: &'static str, max: u32) -> Result<u32, Self::Error> {
        Ok(if max == u32::from(u8::MAX) {
            u32::from(self.small)
        } else {
            self.run
        })
    }
    fn flag(&mut self, _: &'static str) -> Result<bool, Self::Error> {
        self.flags += 1;
        Ok(u32::from(self.small) >> (self.flags % 8) & 1 == 1)
    }
    fn name<T: Named>(&mut self, _: &'static str) -> Result<T, Self::Error> {
        Ok(T::ALL[usize::from(self.small) % T::ALL.len()])
    }
}

/// An event of every kind (`variant` modulo the number of kinds), built from the one
/// description, so a field added to a kind is generated here too.
fn event_kind<R: Real>(variant: u8, a: f64, b: f64, small: u8, run: u32) -> EventKind<R> {
    let id = KindId::ALL[usize::from(variant) % KindId::COUNT];
    let mut values = Values {
        a,
        b,
        small,
        run,
        floats: 0,
        flags: 0,
    };
    match EventKind::from_fields(id, &mut values) {
        Ok(kind) => kind,
        Err(never) => match never {},
    }
}

#[allow(clippy::too_many_arguments)]
fn check_record<R: Real>(
    which: u8,
    seq: u64,
    a: f64,
    b: f64,
    small: u8,
    run: u32,
    options: (bool, bool),
    flips: &[(usize, u8)],
) -> Result<(), TestCaseError> {
    let record: Record<R> = match which % 3 {
        0 => Record::Start(LogStart {
            magic: *b"SClg",
            version: run as u16,
            real_bits: small,
        }),
        1 => Record::Sample(Sample {
            seq,
            t: b,
            raw: R::from_f64(a),
            reference: options.0.then(|| R::from_f64(b)),
            temperature: options.1.then(|| R::from_f64(a)),
            averaged: 1,
        }),
        _ => Record::Event(Event {
            seq,
            kind: event_kind(small, a, b, small, run),
        }),
    };
    let bytes = ours(&record);
    prop_assert_eq!(&bytes, &reference(&record));
    let (back, unused) = take_from_bytes::<Record<R>>(&bytes).unwrap();
    prop_assert_eq!(unused, 0);
    prop_assert_eq!(back, record);
    let mut damaged = bytes.clone();
    for &(at, value) in flips {
        let at = at % damaged.len();
        damaged[at] = value;
    }
    same_decoding::<Record<R>>(&damaged)
}

fn steps() -> impl Strategy<Value = Vec<Step>> {
    proptest::collection::vec(any::<Step>(), 0..400)
}

fn flips() -> impl Strategy<Value = Vec<(usize, u8)>> {
    proptest::collection::vec(any::<(usize, u8)>(), 1..6)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn monitor_f32_p2(baseline in any::<bool>(), steps in steps(), flips in flips()) {
        check_monitor::<f32, 2>(0, baseline, &steps, &flips)?;
    }

    #[test]
    fn monitor_f32_p3(shape in 0u8..3, baseline in any::<bool>(), steps in steps(), flips in flips()) {
        check_monitor::<f32, 3>(shape, baseline, &steps, &flips)?;
    }

    #[test]
    fn monitor_f64_p2(baseline in any::<bool>(), steps in steps(), flips in flips()) {
        check_monitor::<f64, 2>(0, baseline, &steps, &flips)?;
    }

    #[test]
    fn monitor_f64_p3(shape in 0u8..3, baseline in any::<bool>(), steps in steps(), flips in flips()) {
        check_monitor::<f64, 3>(shape, baseline, &steps, &flips)?;
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    #[test]
    fn records_match_postcard(
        which in any::<u8>(), seq in any::<u64>(), a in any::<f64>(), b in any::<f64>(),
        small in any::<u8>(), run in any::<u32>(), options in any::<(bool, bool)>(),
        flips in flips(),
    ) {
        check_record::<f32>(which, seq, a, b, small, run, options, &flips)?;
        check_record::<f64>(which, seq, a, b, small, run, options, &flips)?;
    }

    #[test]
    fn random_bytes_decode_alike(bytes in proptest::collection::vec(any::<u8>(), 0..64)) {
        same_decoding::<Record<f32>>(&bytes)?;
        same_decoding::<Record<f64>>(&bytes)?;
        same_decoding::<u16>(&bytes)?;
        same_decoding::<u32>(&bytes)?;
        same_decoding::<u64>(&bytes)?;
        same_decoding::<Option<bool>>(&bytes)?;
    }

    #[test]
    fn random_payloads_decode_alike(bytes in proptest::collection::vec(any::<u8>(), 0..1500)) {
        same_monitor_decoding::<f32, 3>(&bytes)?;
        same_monitor_decoding::<f64, 2>(&bytes)?;
    }
}
