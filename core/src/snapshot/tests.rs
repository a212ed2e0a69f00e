//! Unit tests of `core/src/snapshot.rs` (a child module: private items are in reach).

use super::*;
use crate::event::{Event, EventKind};
use crate::monitor::MonitorConfig;
use crate::sample::Sample;
use proptest::prelude::*;

#[test]
fn sealing_appends_the_crc_or_refuses_without_room() {
    // "123456789" is the catalogue check input; CRC-32/ISO-HDLC gives 0xCBF43926
    // (crc-catalog 2.5.0 `CRC_32_ISO_HDLC.check`; CPython 3.11 `zlib.crc32` agrees).
    let mut bytes = *b"123456789....";
    assert_eq!(seal_crc32(&mut bytes, 9), Some(13));
    assert_eq!(bytes[9..], 0xCBF4_3926u32.to_le_bytes());
    assert_eq!(seal_crc32(&mut bytes, 10), None);
    assert_eq!(seal_crc32(&mut bytes, usize::MAX), None);
}

fn run(monitor: &mut Monitor<f32>, from: u64, to: u64) {
    // A deterministic proportional-error line (invented, for the test).
    for i in from..to {
        let reference = 1.0 + (i % 40) as f32 * 2.5;
        let noise = 0.01 * reference * (((i * 7919) % 17) as f32 - 8.0) / 8.0;
        let sample = if i % 5 == 4 {
            Sample::reading(i, i as f64, 0.3 + 2.0 * reference)
        } else {
            Sample::check(i, i as f64, 0.3 + 2.0 * reference + noise, reference)
        };
        monitor.push(&sample);
        while monitor.pop_event().is_some() {}
    }
}

fn fresh() -> Monitor<f32> {
    Monitor::new(MonitorConfig::default_for_range(1.0, 100.0)).unwrap()
}

#[test]
fn round_trip_is_bit_exact() {
    let mut monitor = fresh();
    run(&mut monitor, 0, 1500);
    let mut a = [0u8; MAX_SNAPSHOT_LEN];
    let len = monitor.snapshot(&mut a).unwrap();
    let mut restored: Monitor<f32> = Monitor::restore(&a[..len]).unwrap();
    let mut b = [0u8; MAX_SNAPSHOT_LEN];
    assert_eq!(restored.snapshot(&mut b).unwrap(), len);
    assert_eq!(&a[..len], &b[..len]);
    std::eprintln!(
        "encoded Monitor<f32> after 1500 samples: {len} bytes (bound {MAX_SNAPSHOT_LEN})"
    );
}

#[test]
fn a_snapshot_leaves_the_monitor_as_it_was() {
    // A baseline (an optional state present), waiting events (runs of rejected
    // samples left in the queue) and a run of rejections under way, so every kind of
    // field is walked.
    let mut monitor = fresh();
    run(&mut monitor, 0, 700);
    monitor.set_baseline([0.3, 2.0, 0.0, 0.0], None).unwrap();
    for i in 700..703 {
        monitor.push(&Sample::check(i, i as f64, f32::NAN, 10.0));
        monitor.push(&Sample::check(i, i as f64, 10.0, f32::NAN));
    }
    assert!(monitor.clone().pop_event().is_some());
    let twin = monitor.clone();
    let before = std::format!("{monitor:?}");
    let mut first = [0u8; MAX_SNAPSHOT_LEN];
    let len = monitor.snapshot(&mut first).unwrap();
    // Every field as it was (derived ones included), and the next snapshot the same.
    assert_eq!(std::format!("{monitor:?}"), before);
    let mut second = [0u8; MAX_SNAPSHOT_LEN];
    assert_eq!(monitor.snapshot(&mut second).unwrap(), len);
    assert_eq!(&first[..len], &second[..len]);
    // A snapshot refused for want of room changes nothing either.
    let mut small = [0u8; 64];
    assert!(monitor.snapshot(&mut small).is_err());
    assert_eq!(std::format!("{monitor:?}"), before);
    // And the monitor goes on exactly as a copy that was never saved.
    let mut twin = twin;
    run(&mut monitor, 703, 900);
    run(&mut twin, 703, 900);
    let mut a = [0u8; MAX_SNAPSHOT_LEN];
    let mut b = [0u8; MAX_SNAPSHOT_LEN];
    let len = monitor.snapshot(&mut a).unwrap();
    assert_eq!(twin.snapshot(&mut b).unwrap(), len);
    assert_eq!(&a[..len], &b[..len]);
}

#[test]
fn each_fault_has_its_own_error() {
    let mut monitor = fresh();
    run(&mut monitor, 0, 300);
    let mut buffer = [0u8; MAX_SNAPSHOT_LEN + 8];
    let len = monitor.snapshot(&mut buffer).unwrap();
    let good = &buffer[..len];
    let restore = |bytes: &[u8]| Monitor::<f32>::restore(bytes).map(|_| ());
    assert_eq!(
        restore(&good[..5]),
        Err(SnapshotError::Truncated { found: 5 })
    );
    let mut bad = std::vec::Vec::from(good);
    bad[0] ^= 0x20;
    assert!(matches!(restore(&bad), Err(SnapshotError::BadMagic { .. })));
    let mut bad = std::vec::Vec::from(good);
    bad[4] = (FORMAT_VERSION + 1) as u8;
    assert_eq!(
        restore(&bad),
        Err(SnapshotError::UnknownVersion {
            found: FORMAT_VERSION + 1
        })
    );
    assert!(matches!(
        restore(&good[..len - 1]),
        Err(SnapshotError::ShortPayload { .. })
    ));
    assert!(matches!(
        restore(&buffer[..len + 1]),
        Err(SnapshotError::LongPayload { .. })
    ));
    let mut bad = std::vec::Vec::from(good);
    bad[HEADER_LEN + 10] ^= 1;
    assert!(matches!(restore(&bad), Err(SnapshotError::BadCrc { .. })));
    assert!(matches!(
        Monitor::<f64>::restore(good).map(|_| ()),
        Err(SnapshotError::LayoutMismatch { .. })
    ));
    assert!(matches!(
        Monitor::<f32, 3, 8, 8>::restore(good).map(|_| ()),
        Err(SnapshotError::LayoutMismatch { .. })
    ));
    let mut small = [0u8; 64];
    assert_eq!(
        monitor.snapshot(&mut small),
        Err(SnapshotError::BufferTooSmall { capacity: 64 })
    );
}

/// Rewrites the payload of a good snapshot and fixes its CRC (to reach the checks
/// behind the CRC).
fn reseal(bytes: &mut [u8]) {
    let body = bytes.len() - CRC_LEN;
    let payload_len = (body - HEADER_LEN) as u32;
    bytes[10..14].copy_from_slice(&payload_len.to_le_bytes());
    let crc = CRC32.checksum(&bytes[..body]);
    bytes[body..].copy_from_slice(&crc.to_le_bytes());
}

#[test]
fn checks_behind_the_crc() {
    let mut monitor = fresh();
    let mut buffer = [0u8; MAX_SNAPSHOT_LEN];
    let len = monitor.snapshot(&mut buffer).unwrap();
    // One extra payload byte: leftover.
    let mut bytes = std::vec::Vec::from(&buffer[..len - CRC_LEN]);
    bytes.push(0);
    bytes.extend_from_slice(&[0; CRC_LEN]);
    reseal(&mut bytes);
    assert_eq!(
        Monitor::<f32>::restore(&bytes).map(|_| ()),
        Err(SnapshotError::PayloadLeftover { unused: 1 })
    );
    // Half the payload: malformed.
    let mut bytes = std::vec::Vec::from(&buffer[..HEADER_LEN + 40]);
    bytes.extend_from_slice(&[0; CRC_LEN]);
    reseal(&mut bytes);
    assert_eq!(
        Monitor::<f32>::restore(&bytes).map(|_| ()),
        Err(SnapshotError::MalformedPayload)
    );
    // An unusable configuration: forgetting (the second field of the config, after
    // the basis) set to 2.
    let mut config = *monitor.config();
    config.forgetting = 2.0;
    let mut broken = std::vec::Vec::from(&buffer[..len]);
    let mut probe = [0u8; 256];
    let good_config = postcard::to_slice(monitor.config(), &mut probe)
        .unwrap()
        .len();
    let mut probe2 = [0u8; 256];
    let bad_config = postcard::to_slice(&config, &mut probe2).unwrap();
    assert_eq!(bad_config.len(), good_config);
    broken[HEADER_LEN..HEADER_LEN + good_config].copy_from_slice(bad_config);
    reseal(&mut broken);
    assert!(matches!(
        Monitor::<f32>::restore(&broken).map(|_| ()),
        Err(SnapshotError::InvalidConfig(ConfigError::Forgetting))
    ));
}

/// A serde serializer that adds up the *largest* postcard encoding of every value it
/// visits: each integer at its maximum varint length (u16 3, u32 5, u64 10 bytes),
/// floats at their width, enum tags and sequence lengths at 1 byte (fewer than 128
/// variants and elements everywhere in the monitor). `None` cannot show the size of
/// the `Some` it could be, so it is counted in `nones`; sequences (the event queue) in
/// `seq_elements`.
#[derive(Default)]
struct MaxSize {
    total: usize,
    nones: usize,
    seq_elements: usize,
}

#[derive(Debug)]
struct Never;
impl core::fmt::Display for Never {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str("never")
    }
}
impl serde::ser::StdError for Never {}
impl serde::ser::Error for Never {
    fn custom<T: core::fmt::Display>(_: T) -> Self {
        Never
    }
}

macro_rules! fixed {
    ($($name:ident: $ty:ty => $len:expr),* $(,)?) => {
        $(fn $name(self, _: $ty) -> Result<(), Never> { self.total += $len; Ok(()) })*
    };
}

impl serde::Serializer for &mut MaxSize {
    type Ok = ();
    type Error = Never;
    type SerializeSeq = Self;
    type SerializeTuple = Self;
    type SerializeTupleStruct = Self;
    type SerializeTupleVariant = Self;
    type SerializeMap = Self;
    type SerializeStruct = Self;
    type SerializeStructVariant = Self;
    fixed! {
        serialize_bool: bool => 1, serialize_i8: i8 => 1, serialize_u8: u8 => 1,
        serialize_i16: i16 => 3, serialize_u16: u16 => 3,
        serialize_i32: i32 => 5, serialize_u32: u32 => 5,
        serialize_i64: i64 => 10, serialize_u64: u64 => 10,
        serialize_f32: f32 => 4, serialize_f64: f64 => 8, serialize_char: char => 4,
    }
    fn serialize_str(self, v: &str) -> Result<(), Never> {
        self.total += 10 + v.len();
        Ok(())
    }
    fn serialize_bytes(self, v: &[u8]) -> Result<(), Never> {
        self.total += 10 + v.len();
        Ok(())
    }
    fn serialize_none(self) -> Result<(), Never> {
        self.total += 1;
        self.nones += 1;
        Ok(())
    }
    fn serialize_some<T: ?Sized + serde::Serialize>(self, v: &T) -> Result<(), Never> {
        self.total += 1;
        v.serialize(self)
    }
    fn serialize_unit(self) -> Result<(), Never> {
        Ok(())
    }
    fn serialize_unit_struct(self, _: &'static str) -> Result<(), Never> {
        Ok(())
    }
    fn serialize_unit_variant(self, _: &'static str, _: u32, _: &'static str) -> Result<(), Never> {
        self.total += 1;
        Ok(())
    }
    fn serialize_newtype_struct<T: ?Sized + serde::Serialize>(
        self,
        _: &'static str,
        v: &T,
    ) -> Result<(), Never> {
        v.serialize(self)
    }
    fn serialize_newtype_variant<T: ?Sized + serde::Serialize>(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        v: &T,
    ) -> Result<(), Never> {
        self.total += 1;
        v.serialize(self)
    }
    fn serialize_seq(self, len: Option<usize>) -> Result<Self, Never> {
        self.total += 1;
        self.seq_elements += len.unwrap_or(0);
        Ok(self)
    }
    fn serialize_tuple(self, _: usize) -> Result<Self, Never> {
        Ok(self)
    }
    fn serialize_tuple_struct(self, _: &'static str, _: usize) -> Result<Self, Never> {
        Ok(self)
    }
    fn serialize_tuple_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Self, Never> {
        self.total += 1;
        Ok(self)
    }
    fn serialize_map(self, _: Option<usize>) -> Result<Self, Never> {
        self.total += 10;
        Ok(self)
    }
    fn serialize_struct(self, _: &'static str, _: usize) -> Result<Self, Never> {
        Ok(self)
    }
    fn serialize_struct_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Self, Never> {
        self.total += 1;
        Ok(self)
    }
}

// Every compound serializer of `MaxSize` adds up its elements and ends with nothing more:
// one impl body, written once for each trait (a method with a `$key` also gets the field's
// name, which costs nothing).
macro_rules! compound {
    ($($trait:ident { $($method:ident $(($key:ty))?),+ })*) => {$(
        impl serde::ser::$trait for &mut MaxSize {
            type Ok = ();
            type Error = Never;
            $(
                fn $method<T: ?Sized + serde::Serialize>(
                    &mut self,
                    $(_: $key,)?
                    v: &T,
                ) -> Result<(), Never> {
                    v.serialize(&mut **self)
                }
            )+
            fn end(self) -> Result<(), Never> {
                Ok(())
            }
        }
    )*};
}
compound! {
    SerializeSeq { serialize_element }
    SerializeTuple { serialize_element }
    SerializeTupleStruct { serialize_field }
    SerializeTupleVariant { serialize_field }
    SerializeMap { serialize_key, serialize_value }
    SerializeStruct { serialize_field(&'static str) }
    SerializeStructVariant { serialize_field(&'static str) }
}

fn max_size<T: serde::Serialize>(value: &T) -> MaxSize {
    let mut size = MaxSize::default();
    value.serialize(&mut size).unwrap();
    size
}

/// The largest encoded snapshot of a default monitor, by [`MaxSize`]: a monitor after a
/// long run with a baseline set and drift evaluated (so its options are filled), every
/// integer at its maximum varint length, the event queue full of the largest event,
/// and, for each `None` left, the largest optional state (the drift status) at twice
/// its in-memory size.
fn worst_case<R: Real>(temperature: bool) -> usize {
    let mut config = MonitorConfig::<R>::default_for_range(R::ONE, R::from_f64(100.0));
    // With a temperature term every fit has three parameters (the most `P = 3` holds).
    config.basis.temperature = temperature;
    let mut monitor: Monitor<R> = Monitor::new(config).unwrap();
    monitor
        .set_baseline([R::from_f64(0.3), R::TWO, R::ZERO, R::ZERO], None)
        .unwrap();
    for i in 0..3000u64 {
        let reference = R::from_f64(1.0 + (i % 40) as f64 * 2.5);
        let noise = R::from_f64(0.02 * (((i * 7919) % 17) as f64 - 8.0));
        let raw = R::from_f64(0.3) + R::TWO * reference + noise * reference;
        let mut sample = Sample::check(i, i as f64, raw, reference);
        if temperature {
            sample.temperature = Some(R::from_f64(15.0 + (i % 11) as f64));
        }
        monitor.push(&sample);
        while monitor.pop_event().is_some() {}
    }
    let size = max_size(&monitor);
    let largest = Event {
        seq: u64::MAX,
        kind: EventKind::MeanMisfit {
            rung: crate::transform::Rung::Log,
            statistic: R::MAX,
            dof: u8::MAX,
            suggest_quadratic: true,
            suggest_temperature: true,
        },
    };
    let event = max_size(&largest).total.max(
        max_size(&Event {
            seq: u64::MAX,
            kind: EventKind::GainDrift {
                change: R::MAX,
                uncertainty: R::MAX,
                severity: crate::event::Severity::Alarm,
            },
        })
        .total,
    );
    let option_slack = 2 * core::mem::size_of::<crate::detect::drift::DriftStatus<R>>();
    std::eprintln!(
        "max-size walk (f{}): {} bytes, {} None, {} waiting events; event {} bytes",
        R::BITS,
        size.total,
        size.nones,
        size.seq_elements,
        event
    );
    // The walked monitor's queue is empty (drained above): allow a full queue of the
    // largest event on top.
    HEADER_LEN + size.total + 8 * event + size.nones * option_slack + CRC_LEN
}

#[test]
fn worst_case_fits_the_bound() {
    let f32_len = worst_case::<f32>(false).max(worst_case::<f32>(true));
    let f64_len = worst_case::<f64>(false).max(worst_case::<f64>(true));
    let f64_bound = max_snapshot_len::<f64, 3, 16, 8>();
    std::eprintln!(
        "worst case encoded: f32 {f32_len} (bound {MAX_SNAPSHOT_LEN}), f64 {f64_len} (bound {f64_bound})"
    );
    assert!(f32_len <= MAX_SNAPSHOT_LEN);
    assert!(MAX_SNAPSHOT_LEN <= max_snapshot_len::<f32, 3, 16, 8>());
    assert!(f64_len <= f64_bound);
}

#[test]
fn default_sizes() {
    // Measured figures for the README: a fresh default monitor and one after a run.
    let mut fresh32: Monitor<f32> = fresh();
    let mut buffer = [0u8; 8192];
    let fresh32_len = fresh32.snapshot(&mut buffer).unwrap();
    let config = MonitorConfig::<f64>::default_for_range(1.0, 100.0);
    let mut fresh64: Monitor<f64> = Monitor::new(config).unwrap();
    let fresh64_len = fresh64.snapshot(&mut buffer).unwrap();
    std::eprintln!(
        "fresh default snapshot: f32 {fresh32_len} bytes, f64 {fresh64_len} bytes; MAX_SNAPSHOT_LEN {MAX_SNAPSHOT_LEN}"
    );
    assert!(fresh32_len <= MAX_SNAPSHOT_LEN);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]
    #[test]
    fn decode_never_panics_on_arbitrary_bytes(bytes in proptest::collection::vec(any::<u8>(), 0..2200)) {
        let _ = Monitor::<f32>::restore(&bytes);
        let _ = Monitor::<f64>::restore(&bytes);
    }

    #[test]
    fn decode_never_panics_on_damaged_snapshots(
        flips in proptest::collection::vec((any::<usize>(), any::<u8>()), 1..8),
        reseal_crc in any::<bool>(),
        cut in any::<usize>(),
    ) {
        let mut monitor = fresh();
        run(&mut monitor, 0, 260);
        let mut buffer = [0u8; MAX_SNAPSHOT_LEN];
        let len = monitor.snapshot(&mut buffer).unwrap();
        let mut bytes = std::vec::Vec::from(&buffer[..len]);
        for (at, value) in flips {
            let at = HEADER_LEN + at % (len - HEADER_LEN - CRC_LEN);
            bytes[at] = value;
        }
        if reseal_crc {
            reseal(&mut bytes);
        }
        if let Ok(mut restored) = Monitor::<f32>::restore(&bytes) {
            // A restored monitor must also survive pushes.
            run(&mut restored, 260, 300);
        }
        let cut = cut % (bytes.len() + 1);
        let _ = Monitor::<f32>::restore(&bytes[..cut]);
    }
}
