//! A hand-written encoder and decoder of the snapshot payload and the device-log records
//! that writes exactly the bytes `postcard` (with the serde derives of the state types)
//! writes, without serde.
//!
//! Why: on the board, the serde/postcard code of the whole `Monitor` (visitors, field
//! identifiers, error plumbing, one monomorphized path per type) took most of the core's
//! flash (see `firmware/README.md`, "Footprint"). This module is straight-line code per
//! type. The serde derives stay on every type for the host (JSON, TOML, tests) and are
//! dead code the linker drops on a board.
//!
//! Two shapes of code, one format:
//! - The snapshot's state types have one walk each ([`Walk`]) that serves both
//!   directions: it visits the fields in wire order and each leaf (a number, a flag, a
//!   unit enum) is one out-of-line call ([`Transfer::value`]) that writes or reads, so
//!   the board holds one copy of the per-field code, not an encoder and a decoder.
//!   Decoding is in place, into a zeroed monitor (`Monitor::blank`).
//! - The device-log records and the events (also the elements of the snapshot's event
//!   queue) are encoded and decoded by value ([`Wire`]).
//!
//! # Wire format (postcard 1.x, as the serde derives drive it)
//! - `u8` one raw byte; `bool` one byte, 0 or 1.
//! - `u16`, `u32`, `u64`, `usize` (sequence lengths): unsigned LEB128 varints of at most
//!   3, 5, 10 bytes (`usize` as `u32` on 32-bit targets, `u64` on 64-bit ones); on the
//!   last allowed byte only the bits the type still has may be set. Overlong but
//!   in-range encodings are accepted, as postcard accepts them.
//! - `f32`/`f64`: raw IEEE 754 bits, little-endian, so every bit (NaN payloads included)
//!   comes back.
//! - `Option<T>`: a tag byte 0 (`None`) or 1 (`Some`, then `T`).
//! - enums: the variant index as a `u32` varint, then the variant's fields.
//! - structs, tuples and fixed arrays: their fields in order, no length, no names.
//! - sequences (the event queue, a fit's numbers): a `usize` length, then the elements.
//!
//! # Invariants
//! - Decoding never panics: every read is bounds-checked and any fault (bytes ending, a
//!   bad tag, bool, varint or variant index, a length the type cannot hold) is a [`Bad`].
//! - Every loop of a decoder is bounded by a capacity of the type (an array length, `P`,
//!   `Q`), never by a length read from the input.
//! - For every value, [`Wire::put`] and [`encode`] write the bytes `postcard::to_slice`
//!   writes, and [`Wire::get`] and [`decode_into`] accept exactly the inputs
//!   `postcard::take_from_bytes` accepts, with the same value (the property tests in
//!   `core/src/codec_tests.rs` check both directions; `decode_into` also gives the same
//!   result whatever the target held before).
//!
//! # Layering
//! This module is the bottom layer of the snapshot and the device log: the machinery
//! ([`Writer`], [`Reader`], [`Walk`], [`Transfer`]) and the impls for numbers, flags,
//! options and arrays. It imports only [`crate::real`]. Each type's walk or impl lives
//! beside the type, written with the macros here ([`walk_struct`], [`wire_struct`],
//! [`wire_unit_enum`]), so no field changes visibility and nothing here knows the types
//! above it. The equivalence tests against postcard are in `core/src/codec_tests.rs`.

use crate::real::Real;

/// The output buffer is full.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Full;

/// The input does not decode.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Bad;

/// Writes into a byte slice, front to back. A write past the end sets a sticky flag
/// (checked once, by [`to_slice`]) instead of returning an error per field: one branch in
/// the writer rather than one per field in every encoder keeps the code small.
pub(crate) struct Writer<'a> {
    out: &'a mut [u8],
    at: usize,
    full: bool,
}

impl<'a> Writer<'a> {
    /// A writer at the start of `out`.
    pub(crate) fn new(out: &'a mut [u8]) -> Self {
        Writer {
            out,
            at: 0,
            full: false,
        }
    }

    /// Appends one byte (or marks the writer full).
    #[inline(never)]
    pub(crate) fn byte(&mut self, value: u8) {
        match self.out.get_mut(self.at) {
            Some(slot) => {
                *slot = value;
                self.at += 1;
            }
            None => self.full = true,
        }
    }

    /// Appends the `len` low bytes of `bits`, little-endian (a float's raw bits).
    #[inline(never)]
    pub(crate) fn bits(&mut self, bits: u64, len: usize) {
        for byte in bits.to_le_bytes().iter().take(len) {
            self.byte(*byte);
        }
    }

    /// Appends the four bytes of `bits`, little-endian (an `f32`'s raw bits). One
    /// argument register where [`Writer::bits`] takes three and a stack slot: six bytes
    /// less per float field at every call site.
    #[inline(never)]
    pub(crate) fn word(&mut self, bits: u32) {
        for byte in bits.to_le_bytes() {
            self.byte(byte);
        }
    }

    /// Appends an unsigned LEB128 varint of a value of at most 32 bits (`u16`, `u32`,
    /// lengths and variant indexes): the same bytes as [`Writer::varint`], with one
    /// argument register instead of a pair at the call sites.
    #[inline(never)]
    pub(crate) fn varint32(&mut self, value: u32) {
        self.varint(u64::from(value));
    }

    /// Appends an unsigned LEB128 varint.
    #[inline(never)]
    pub(crate) fn varint(&mut self, mut value: u64) {
        while value >= 0x80 {
            self.byte(value as u8 | 0x80);
            value >>= 7;
        }
        self.byte(value as u8);
    }
}

/// Reads a byte slice, front to back. A fault (bytes ending, a bad tag, varint or
/// length) sets a sticky flag and the readers return zeros from then on, so decoders are
/// straight-line code; [`take_from_bytes`] checks the flag once at the end. Every loop a
/// decoder runs is bounded by a capacity of the type, never by a length read from the
/// input, so a fault cannot make decoding run long.
pub(crate) struct Reader<'a> {
    bytes: &'a [u8],
    at: usize,
    bad: bool,
}

impl<'a> Reader<'a> {
    /// A reader at the start of `bytes`.
    pub(crate) fn new(bytes: &'a [u8]) -> Self {
        Reader {
            bytes,
            at: 0,
            bad: false,
        }
    }

    /// Marks the input as not decodable (out of line: one call instead of the flag's
    /// address arithmetic at each of the decoders' many checks).
    #[inline(never)]
    pub(crate) fn fail(&mut self) {
        self.bad = true;
    }

    /// The next byte (0 once the input has failed or ended).
    #[inline(never)]
    pub(crate) fn byte(&mut self) -> u8 {
        match self.bytes.get(self.at) {
            Some(&value) if !self.bad => {
                self.at += 1;
                value
            }
            _ => {
                self.bad = true;
                0
            }
        }
    }

    /// `len` bytes as the low bytes of a little-endian integer (a float's raw bits).
    #[inline(never)]
    pub(crate) fn bits(&mut self, len: usize) -> u64 {
        let mut bits = 0u64;
        for i in 0..len.min(8) {
            bits |= u64::from(self.byte()) << (8 * i);
        }
        bits
    }

    /// Four bytes as a little-endian `u32` (an `f32`'s raw bits); 0 once the input has
    /// failed or ended.
    #[inline(never)]
    pub(crate) fn word(&mut self) -> u32 {
        self.bits(4) as u32
    }

    /// A `bool`: one byte, 0 or 1; any other byte fails the input.
    #[inline(never)]
    pub(crate) fn bool(&mut self) -> bool {
        let byte = self.byte();
        if byte > 1 {
            self.fail();
        }
        byte == 1
    }

    /// An enum variant index below `count`; a larger one fails the input and gives 0.
    #[inline(never)]
    pub(crate) fn variant_below(&mut self, count: usize) -> usize {
        let index = self.variant() as usize;
        if index < count {
            index
        } else {
            self.fail();
            0
        }
    }

    /// A varint of an unsigned type of `bits` bits (16, 32 or 64): at most
    /// `ceil(bits / 7)` bytes, and the last of those carries only the bits left.
    #[inline(never)]
    pub(crate) fn varint(&mut self, bits: u32) -> u64 {
        let max_len = bits.div_ceil(7);
        let last_max = (1u8 << (bits % 7)) - 1;
        let mut out = 0u64;
        for i in 0..max_len {
            let byte = self.byte();
            out |= u64::from(byte & 0x7f) << (7 * i);
            if byte & 0x80 == 0 {
                if i == max_len - 1 && byte > last_max {
                    break;
                }
                return out;
            }
        }
        self.bad = true;
        0
    }

    /// A sequence length (`usize` varint of this target's pointer width).
    pub(crate) fn len(&mut self) -> usize {
        self.varint(usize::BITS) as usize
    }

    /// An enum variant index (`u32` varint).
    pub(crate) fn variant(&mut self) -> u32 {
        self.varint(32) as u32
    }
}

/// A value with a postcard-compatible encoding, encoded and decoded by value: the
/// device-log records, the events (in records and in the snapshot's event queue) and the
/// leaves of the snapshot walk (numbers, flags, unit enums; see [`Transfer::value`]).
pub(crate) trait Wire: Sized {
    /// Appends the encoding of `self`.
    fn put(&self, w: &mut Writer<'_>);
    /// Reads one value (any value when the reader fails; the caller then discards it).
    fn get(r: &mut Reader<'_>) -> Self;
}

/// The encoding of `value` into `out`; returns the length written.
pub(crate) fn to_slice<T: Wire>(value: &T, out: &mut [u8]) -> Result<usize, Full> {
    let mut w = Writer::new(out);
    value.put(&mut w);
    if w.full {
        return Err(Full);
    }
    Ok(w.at)
}

/// One value from the front of `bytes`, and the number of bytes left after it.
pub(crate) fn take_from_bytes<T: Wire>(bytes: &[u8]) -> Result<(T, usize), Bad> {
    let mut r = Reader::new(bytes);
    let value = T::get(&mut r);
    if r.bad {
        return Err(Bad);
    }
    Ok((value, bytes.len() - r.at))
}

/// A value of the snapshot, visited field by field in wire order by one function that
/// serves both directions: with an encoding [`Transfer`] it writes the fields, with a
/// decoding one it overwrites them, in place, with what the input holds. Saving and
/// restoring share the one compiled walk of each type, which keeps the board's flash
/// small; that is why the walk takes `&mut self` in both directions (an encoding walk
/// changes nothing).
///
/// A walk's loops run to a capacity of the type (an array length, `P`, `Q`), never to a
/// length read from the input.
pub(crate) trait Walk {
    /// Visits the fields of `self` in wire order: writes them when `t` encodes, overwrites
    /// them when it decodes. Returns `t`, and a walk hands the returned `t` to the next
    /// field: on Arm it is then already in the first argument register when the next
    /// field's call is made, one instruction (2 bytes of flash) less per field.
    fn walk<'t, 'a>(&mut self, t: &'t mut Transfer<'a>) -> &'t mut Transfer<'a>;
}

/// A value to decode an optional value into: decoding a `Some` into a `None`,
/// `Option::walk` sets `Some(blank)` and walks into it, so a decoded `Some` takes the same
/// walk as an encoded one. The value never shows (the walk overwrites every field); a
/// function, not a constant, because zeros built in place take less flash than a copied
/// constant.
pub(crate) trait Blank {
    /// The placeholder.
    fn blank() -> Self;
}

/// The state of one walk ([`Walk`]): the direction, and a [`Writer`] when encoding or a
/// [`Reader`] when decoding (the other one is empty and unused).
pub(crate) struct Transfer<'a> {
    writer: Writer<'a>,
    reader: Reader<'a>,
    encoding: bool,
}

impl<'a> Transfer<'a> {
    /// True when this walk writes (encodes); false when it reads (decodes).
    pub(crate) fn encoding(&self) -> bool {
        self.encoding
    }

    /// The writer (encoding), for a walk that writes a length or a tag of its own.
    pub(crate) fn writer(&mut self) -> &mut Writer<'a> {
        &mut self.writer
    }

    /// The reader (decoding), for a walk that reads a length or a tag of its own.
    pub(crate) fn reader(&mut self) -> &mut Reader<'a> {
        &mut self.reader
    }

    /// The tag of an `Option`: writes whether there is a value (`present`) and returns it,
    /// or reads and returns the tag (a `bool` on the wire: 0 `None`, 1 `Some`, anything
    /// else fails the input). Out of line: one copy for every optional field.
    #[inline(never)]
    pub(crate) fn option_tag(&mut self, present: bool) -> bool {
        if self.encoding {
            self.writer.byte(u8::from(present));
            present
        } else {
            self.reader.bool()
        }
    }

    /// A leaf of a walk (a number, a flag, a unit enum), written or read by value with its
    /// [`Wire`] impl. Out of line, one function per type: every field of that type in
    /// every walk is one call with the field's address, and the direction is tested here.
    /// Returns `self` (see [`Walk::walk`]).
    #[inline(never)]
    pub(crate) fn value<T: Wire>(&mut self, value: &mut T) -> &mut Self {
        if self.encoding {
            value.put(&mut self.writer);
        } else {
            *value = T::get(&mut self.reader);
        }
        self
    }
}

/// The encoding of `value` into `out`, by its walk; returns the length written. `value`
/// is not changed (the walk takes `&mut` because decoding shares it).
pub(crate) fn encode<T: Walk>(value: &mut T, out: &mut [u8]) -> Result<usize, Full> {
    let mut t = Transfer {
        writer: Writer::new(out),
        reader: Reader::new(&[]),
        encoding: true,
    };
    value.walk(&mut t);
    if t.writer.full {
        return Err(Full);
    }
    Ok(t.writer.at)
}

/// Decodes one value from the front of `bytes` into `value`, in place, by its walk;
/// returns the number of bytes left after it. Every field the encoding holds is
/// overwritten; fields it does not hold (derived ones) are left as they are. On an error
/// `value` holds whatever was read and must be discarded.
pub(crate) fn decode_into<T: Walk>(value: &mut T, bytes: &[u8]) -> Result<usize, Bad> {
    let mut t = Transfer {
        writer: Writer::new(&mut []),
        reader: Reader::new(bytes),
        encoding: false,
    };
    value.walk(&mut t);
    if t.reader.bad {
        return Err(Bad);
    }
    Ok(bytes.len() - t.reader.at)
}

impl<R: Real> Walk for R {
    #[inline]
    fn walk<'t, 'a>(&mut self, t: &'t mut Transfer<'a>) -> &'t mut Transfer<'a> {
        t.value(self)
    }
}

impl<R: Real> Blank for R {
    #[inline]
    fn blank() -> Self {
        R::ZERO
    }
}

/// [`Walk`] by value ([`Transfer::value`]) for integers and flags.
macro_rules! walk_by_value {
    ($($ty:ty),*) => {$(
        impl Walk for $ty {
            #[inline]
            fn walk<'t, 'a>(&mut self, t: &'t mut Transfer<'a>) -> &'t mut Transfer<'a> {
                t.value(self)
            }
        }
    )*};
}
walk_by_value!(u8, bool, u16, u32, u64);

impl<T: Walk + Blank> Walk for Option<T> {
    fn walk<'t, 'a>(&mut self, t: &'t mut Transfer<'a>) -> &'t mut Transfer<'a> {
        // The tag, then the value if there is one. Decoding a `Some` into a `None` puts a
        // blank there first; into a `Some` it walks over the old value, which is the same
        // (a walk overwrites every field of the value).
        if t.option_tag(self.is_some()) {
            self.get_or_insert_with(T::blank).walk(t)
        } else {
            *self = None;
            t
        }
    }
}

impl<T: Walk, const N: usize> Walk for [T; N] {
    fn walk<'t, 'a>(&mut self, mut t: &'t mut Transfer<'a>) -> &'t mut Transfer<'a> {
        for value in self.iter_mut() {
            t = value.walk(t);
        }
        t
    }
}

impl<R: Real> Wire for R {
    #[inline]
    fn put(&self, w: &mut Writer<'_>) {
        if R::BITS == 32 {
            w.word(self.to_bits_u64() as u32);
        } else {
            w.bits(self.to_bits_u64(), (R::BITS / 8) as usize);
        }
    }

    #[inline]
    fn get(r: &mut Reader<'_>) -> Self {
        // The raw bits, every one kept (a NaN payload too).
        let bits = if R::BITS == 32 {
            u64::from(r.word())
        } else {
            r.bits((R::BITS / 8) as usize)
        };
        R::from_bits_u64(bits)
    }
}

impl Wire for u8 {
    #[inline]
    fn put(&self, w: &mut Writer<'_>) {
        w.byte(*self);
    }
    #[inline]
    fn get(r: &mut Reader<'_>) -> Self {
        r.byte()
    }
}

impl Wire for bool {
    #[inline]
    fn put(&self, w: &mut Writer<'_>) {
        w.byte(u8::from(*self));
    }
    #[inline]
    fn get(r: &mut Reader<'_>) -> Self {
        r.bool()
    }
}

macro_rules! wire_uint {
    ($put:ident: $($ty:ty),*) => {$(
        impl Wire for $ty {
            #[inline]
            fn put(&self, w: &mut Writer<'_>) {
                w.$put((*self).into());
            }
            #[inline]
            fn get(r: &mut Reader<'_>) -> Self {
                // In range by the last-byte check of `varint`.
                r.varint(<$ty>::BITS) as $ty
            }
        }
    )*};
}
wire_uint!(varint32: u16, u32);
wire_uint!(varint: u64);

impl<T: Wire> Wire for Option<T> {
    fn put(&self, w: &mut Writer<'_>) {
        match self {
            None => w.byte(0),
            Some(value) => {
                w.byte(1);
                value.put(w);
            }
        }
    }
    fn get(r: &mut Reader<'_>) -> Self {
        // The tag is a `bool` on the wire: 0 `None`, 1 `Some`, anything else fails.
        if r.bool() {
            Some(T::get(r))
        } else {
            None
        }
    }
}

impl<T: Wire + Copy + Default, const N: usize> Wire for [T; N] {
    fn put(&self, w: &mut Writer<'_>) {
        for value in self {
            value.put(w);
        }
    }
    fn get(r: &mut Reader<'_>) -> Self {
        let mut out = [T::default(); N];
        for value in out.iter_mut() {
            *value = T::get(r);
        }
        out
    }
}

/// `Wire` for a struct of the device-log records: its fields in declaration order, every
/// field listed.
macro_rules! wire_struct {
    (impl[$($gen:tt)*] $ty:ty { $($field:ident),* $(,)? }) => {
        impl<$($gen)*> $crate::wire::Wire for $ty {
            fn put(&self, w: &mut $crate::wire::Writer<'_>) {
                $( $crate::wire::Wire::put(&self.$field, w); )*
            }
            fn get(r: &mut $crate::wire::Reader<'_>) -> Self {
                Self { $( $field: $crate::wire::Wire::get(r), )* }
            }
        }
    };
}
pub(crate) use wire_struct;

/// [`Walk`] for a struct of the snapshot: its fields in declaration order, every field
/// listed (checked by the compiler). With `blank:`, also
/// [`Blank`] (the value an `Option` of the struct is decoded into).
macro_rules! walk_struct {
    (impl[$($gen:tt)*] $ty:ty { $($field:ident),* $(,)? } blank: $blank:expr) => {
        $crate::wire::walk_struct!(impl[$($gen)*] $ty { $($field),* });
        impl<$($gen)*> $crate::wire::Blank for $ty {
            #[inline]
            fn blank() -> Self {
                $blank
            }
        }
    };
    (impl[$($gen:tt)*] $ty:ty { $($field:ident),* $(,)? }) => {
        impl<$($gen)*> $crate::wire::Walk for $ty {
            fn walk<'t, 'a>(
                &mut self,
                t: &'t mut $crate::wire::Transfer<'a>,
            ) -> &'t mut $crate::wire::Transfer<'a> {
                // A pattern naming every field (compiles to nothing): a field added to the
                // struct breaks this build until it is listed here.
                let Self { $($field: _),* } = self;
                $( let t = $crate::wire::Walk::walk(&mut self.$field, t); )*
                t
            }
        }
    };
}
pub(crate) use walk_struct;

/// `Wire` for an enum of unit variants, listed in declaration order; [`Walk`] by value
/// ([`Transfer::value`]) and [`Blank`] (the first variant).
macro_rules! wire_unit_enum {
    ($ty:ident { $first:ident $(, $variant:ident)* $(,)? }) => {
        impl $crate::wire::Wire for $ty {
            fn put(&self, w: &mut $crate::wire::Writer<'_>) {
                w.varint32(*self as u32);
            }
            // Out of line: the index-to-variant lookup once per enum, not at every field.
            #[inline(never)]
            fn get(r: &mut $crate::wire::Reader<'_>) -> Self {
                const ALL: &[$ty] = &[$ty::$first $(, $ty::$variant)*];
                // In range: `variant_below` gives 0 for an index past the end.
                ALL.get(r.variant_below(ALL.len())).copied().unwrap_or(ALL[0])
            }
        }

        impl $crate::wire::Walk for $ty {
            #[inline]
            fn walk<'t, 'a>(
                &mut self,
                t: &'t mut $crate::wire::Transfer<'a>,
            ) -> &'t mut $crate::wire::Transfer<'a> {
                t.value(self)
            }
        }

        impl $crate::wire::Blank for $ty {
            #[inline]
            fn blank() -> Self {
                $ty::$first
            }
        }
    };
}
pub(crate) use wire_unit_enum;
