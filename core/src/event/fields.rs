//! What is generated from the one list of event kinds, and what each format needs of it.
//!
//! The event kinds are listed once, in [`event_kinds!`](crate::event_kinds): for each kind
//! its wire index, its name and its fields (name, type, documentation) in order. From that
//! list `describe_events!` generates the enum [`EventKind`], the field-less [`KindId`]
//! with its name and field table ([`KindId::fields`]), the field walk
//! ([`EventKind::for_each_field`]) that text formats write from (the host's JSON lines),
//! the construction from fields ([`EventKind::from_fields`]) that readers and tests build
//! events with, the change of float type ([`EventKind::map_real`], device logs of another
//! precision) and the wire codec (the device-log records and the snapshot's event queue).
//! A crate that needs straight-line code per field (the board's event lines) passes a
//! macro of its own to `event_kinds!`. Adding a field to a kind is one line in the list;
//! every format follows.
//!
//! # Invariants
//! - The field order is the declaration order in every format: the wire (postcard's order
//!   for the serde derives), the walk, the table of [`KindId::fields`].
//! - A kind's wire index is its position in the declaration (checked at compile time).
//! - Nothing here allocates or panics.
//!
//! [`EventKind`]: crate::event::EventKind
//! [`KindId`]: crate::event::KindId
//! [`KindId::fields`]: crate::event::KindId::fields
//! [`EventKind::for_each_field`]: crate::event::EventKind::for_each_field
//! [`EventKind::from_fields`]: crate::event::EventKind::from_fields
//! [`EventKind::map_real`]: crate::event::EventKind::map_real

/// How a field is written: the formats choose their text or bytes by it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Shape {
    /// A number of the monitor's float type `R` (wire: its raw bits; text: the shortest
    /// decimal that reads back as the value in `R`, `null` when not finite).
    Real,
    /// An `f64` whatever `R` is (wire: its raw bits).
    Wide,
    /// An unsigned integer (wire: one byte for a `u8`, a varint for a `u32`).
    Integer,
    /// A flag.
    Flag,
    /// A name out of a fixed set (a rung, a reason, a direction, a severity, an alarm;
    /// wire: the variant index).
    Name,
}

/// One field of an event kind, as [`KindId::fields`](crate::event::KindId::fields) lists it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct FieldInfo {
    /// The field's name (the key in JSON lines, `KEY=` in the board's lines).
    pub key: &'static str,
    /// How it is written.
    pub shape: Shape,
}

/// One field's value, handed to a [`FieldSink`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum FieldValue<R> {
    /// [`Shape::Real`].
    Real(R),
    /// [`Shape::Wide`].
    Wide(f64),
    /// [`Shape::Integer`].
    Integer(u32),
    /// [`Shape::Flag`].
    Flag(bool),
    /// [`Shape::Name`]: the value's name.
    Name(&'static str),
}

impl<R> FieldValue<R> {
    /// The shape of this value.
    pub const fn shape(&self) -> Shape {
        match self {
            FieldValue::Real(_) => Shape::Real,
            FieldValue::Wide(_) => Shape::Wide,
            FieldValue::Integer(_) => Shape::Integer,
            FieldValue::Flag(_) => Shape::Flag,
            FieldValue::Name(_) => Shape::Name,
        }
    }
}

/// Takes an event's fields one by one, in order (see
/// [`EventKind::for_each_field`](crate::event::EventKind::for_each_field)). A closure
/// `FnMut(&'static str, FieldValue<R>) -> Result<(), E>` is one.
pub trait FieldSink<R> {
    /// What stops the walk.
    type Error;
    /// One field: its key and value.
    fn field(&mut self, key: &'static str, value: FieldValue<R>) -> Result<(), Self::Error>;
}

impl<R, E, F: FnMut(&'static str, FieldValue<R>) -> Result<(), E>> FieldSink<R> for F {
    type Error = E;
    #[inline]
    fn field(&mut self, key: &'static str, value: FieldValue<R>) -> Result<(), E> {
        self(key, value)
    }
}

/// A value out of a fixed set of names (the field types of [`Shape::Name`]).
pub trait Named: Copy + 'static {
    /// Every value, in declaration order (the wire's variant order).
    const ALL: &'static [Self];
    /// The value's name as every format writes it.
    fn name(self) -> &'static str;
}

/// Gives an event's fields one by one, in order, to build it (see
/// [`EventKind::from_fields`](crate::event::EventKind::from_fields)): a parser of a text
/// format, a test's generator.
pub trait FieldSource<R> {
    /// What stops the construction (a missing key, a value of the wrong type).
    type Error;
    /// A [`Shape::Real`] field.
    fn real(&mut self, key: &'static str) -> Result<R, Self::Error>;
    /// A [`Shape::Wide`] field.
    fn wide(&mut self, key: &'static str) -> Result<f64, Self::Error>;
    /// A [`Shape::Integer`] field; a value above `max` (the field type's largest) must be
    /// an error.
    fn integer(&mut self, key: &'static str, max: u32) -> Result<u32, Self::Error>;
    /// A [`Shape::Flag`] field.
    fn flag(&mut self, key: &'static str) -> Result<bool, Self::Error>;
    /// A [`Shape::Name`] field: one of `T::ALL`.
    fn name<T: Named>(&mut self, key: &'static str) -> Result<T, Self::Error>;
}

/// Generates the event types and their formats from the list of kinds (invoked as
/// `event_kinds!(describe_events)`; see the module documentation).
macro_rules! describe_events {
    (
        $(
            $(#[$vmeta:meta])*
            $Variant:ident = $index:literal $name:literal {
                $( $(#[$fmeta:meta])* $field:ident : $fty:ident ),* $(,)?
            }
        )*
    ) => {
        /// What happened. Declared once, with every field, by [`event_kinds!`]: the wire
        /// codec, the host's JSON lines, the board's event lines and the conversion between
        /// float types are all derived from that list (see [`fields`](crate::event::fields)).
        #[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
        pub enum EventKind<R> {
            $(
                $(#[$vmeta])*
                $Variant { $( $(#[$fmeta])* $field: $fty, )* },
            )*
        }

        /// An event's kind without its fields: its name, wire index and field table.
        #[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
        pub enum KindId {
            $( $(#[$vmeta])* $Variant, )*
        }

        // The wire index written beside each kind is its position (postcard's variant
        // index for the serde derive).
        const _: () = { $( assert!(KindId::$Variant as usize == $index); )* };

        impl KindId {
            /// Number of event kinds.
            pub const COUNT: usize = [$($name),*].len();

            /// Every kind, in wire order.
            pub const ALL: [KindId; KindId::COUNT] = [$(KindId::$Variant),*];

            /// The kind's name as every format writes it.
            pub const fn name(self) -> &'static str {
                match self {
                    $( KindId::$Variant => $name, )*
                }
            }

            /// Position in [`Self::ALL`], which is the kind's wire index.
            pub const fn index(self) -> usize {
                self as usize
            }

            /// The kind's fields, in order.
            pub const fn fields(self) -> &'static [$crate::event::FieldInfo] {
                match self {
                    $( KindId::$Variant => &[ $( $crate::event::FieldInfo {
                        key: stringify!($field),
                        shape: $crate::event::describe_events!(@shape $fty),
                    } ),* ], )*
                }
            }

            /// The kind of a name written by [`Self::name`].
            pub fn from_name(name: &str) -> Option<KindId> {
                Self::ALL.into_iter().find(|id| id.name() == name)
            }
        }

        impl<R> EventKind<R> {
            /// Every event name, in wire order (for counting tables).
            pub const NAMES: [&'static str; KindId::COUNT] = [$($name),*];

            /// The kind without its fields.
            pub const fn id(&self) -> KindId {
                match self {
                    $( EventKind::$Variant { .. } => KindId::$Variant, )*
                }
            }

            /// The event's name as every format writes it.
            pub const fn name(&self) -> &'static str {
                // Matched directly (not through `id`): one table on a board, not two.
                match self {
                    $( EventKind::$Variant { .. } => $name, )*
                }
            }

            /// Hands every field, in order, to `sink`; stops at the sink's first error.
            #[inline]
            pub fn for_each_field<S: $crate::event::FieldSink<R>>(
                &self,
                sink: &mut S,
            ) -> Result<(), S::Error>
            where
                R: Copy,
            {
                match *self {
                    $( EventKind::$Variant { $($field),* } => {
                        $( sink.field(
                            stringify!($field),
                            $crate::event::describe_events!(@value $fty $field),
                        )?; )*
                    } )*
                }
                Ok(())
            }

            /// The event of kind `id` with the fields `source` gives, asked in order.
            pub fn from_fields<S: $crate::event::FieldSource<R>>(
                id: KindId,
                source: &mut S,
            ) -> Result<Self, S::Error> {
                Ok(match id {
                    $( KindId::$Variant => EventKind::$Variant { $(
                        $field: $crate::event::describe_events!(
                            @take $fty source stringify!($field)
                        ),
                    )* }, )*
                })
            }

            /// The same event with every float of type `R` converted by `convert` (fields
            /// of other types, `f64` ones included, are kept as they are).
            pub fn map_real<T>(self, mut convert: impl FnMut(R) -> T) -> EventKind<T> {
                match self {
                    $( EventKind::$Variant { $($field),* } => EventKind::$Variant { $(
                        $field: $crate::event::describe_events!(@map $fty convert $field),
                    )* }, )*
                }
            }
        }

        impl<R: $crate::real::Real> $crate::wire::Wire for EventKind<R> {
            fn put(&self, w: &mut $crate::wire::Writer<'_>) {
                // The variant index first, written once (the match compiles to a load of
                // the discriminant), then the variant's fields.
                let index = match self {
                    $( EventKind::$Variant { .. } => $index, )*
                };
                w.byte(index);
                match self {
                    $( EventKind::$Variant { $($field),* } => {
                        $( $crate::wire::Wire::put($field, w); )*
                    } )*
                }
            }

            fn get(r: &mut $crate::wire::Reader<'_>) -> Self {
                match r.variant() {
                    $( $index => EventKind::$Variant {
                        $( $field: $crate::wire::Wire::get(r), )*
                    }, )*
                    _ => {
                        // The input has failed; the value is discarded.
                        r.fail();
                        EventKind::Cleared {
                            alarm: $crate::event::AlarmKind::BiasShift,
                        }
                    }
                }
            }
        }
    };

    (@shape R) => { $crate::event::Shape::Real };
    (@shape f64) => { $crate::event::Shape::Wide };
    (@shape u8) => { $crate::event::Shape::Integer };
    (@shape u32) => { $crate::event::Shape::Integer };
    (@shape bool) => { $crate::event::Shape::Flag };
    (@shape $named:ident) => { $crate::event::Shape::Name };

    (@value R $v:ident) => { $crate::event::FieldValue::Real($v) };
    (@value f64 $v:ident) => { $crate::event::FieldValue::Wide($v) };
    (@value u8 $v:ident) => { $crate::event::FieldValue::Integer($v as u32) };
    (@value u32 $v:ident) => { $crate::event::FieldValue::Integer($v) };
    (@value bool $v:ident) => { $crate::event::FieldValue::Flag($v) };
    (@value $named:ident $v:ident) => {
        $crate::event::FieldValue::Name($crate::event::Named::name($v))
    };

    (@take R $s:ident $key:expr) => { $s.real($key)? };
    (@take f64 $s:ident $key:expr) => { $s.wide($key)? };
    // In range: the source refuses a value above `max`.
    (@take u8 $s:ident $key:expr) => { $s.integer($key, u8::MAX as u32)? as u8 };
    (@take u32 $s:ident $key:expr) => { $s.integer($key, u32::MAX)? };
    (@take bool $s:ident $key:expr) => { $s.flag($key)? };
    (@take $named:ident $s:ident $key:expr) => { $s.name::<$named>($key)? };

    (@map R $f:ident $v:ident) => { $f($v) };
    (@map $other:ident $f:ident $v:ident) => { $v };
}
pub(crate) use describe_events;

#[cfg(test)]
mod tests {
    use std::vec::Vec;

    use super::*;
    use crate::event::{EventKind, KindId};

    /// Gives the fields of a walk back in order, checking each key (a replay of
    /// [`EventKind::for_each_field`] through [`EventKind::from_fields`]).
    struct Replay<R: 'static>(Vec<(&'static str, FieldValue<R>)>);

    impl<R: Copy> Replay<R> {
        fn next(&mut self, key: &'static str) -> Result<FieldValue<R>, ()> {
            match self.0.first().copied() {
                Some((k, value)) if k == key => {
                    self.0.remove(0);
                    Ok(value)
                }
                _ => Err(()),
            }
        }
    }

    impl<R: Copy> FieldSource<R> for Replay<R> {
        type Error = ();
        fn real(&mut self, key: &'static str) -> Result<R, ()> {
            match self.next(key)? {
                FieldValue::Real(v) => Ok(v),
                _ => Err(()),
            }
        }
        fn wide(&mut self, key: &'static str) -> Result<f64, ()> {
            match self.next(key)? {
                FieldValue::Wide(v) => Ok(v),
                _ => Err(()),
            }
        }
        fn integer(&mut self, key: &'static str, max: u32) -> Result<u32, ()> {
            match self.next(key)? {
                FieldValue::Integer(v) if v <= max => Ok(v),
                _ => Err(()),
            }
        }
        fn flag(&mut self, key: &'static str) -> Result<bool, ()> {
            match self.next(key)? {
                FieldValue::Flag(v) => Ok(v),
                _ => Err(()),
            }
        }
        fn name<T: Named>(&mut self, key: &'static str) -> Result<T, ()> {
            match self.next(key)? {
                FieldValue::Name(n) => T::ALL.iter().copied().find(|v| v.name() == n).ok_or(()),
                _ => Err(()),
            }
        }
    }

    /// Distinct values for every field of every kind: the `i`-th field takes `i`-derived
    /// values (a float `i + 0.25`, the `i`-th name of its set, ...).
    struct Counting(u32);

    impl FieldSource<f32> for Counting {
        type Error = ();
        fn real(&mut self, _: &'static str) -> Result<f32, ()> {
            self.0 += 1;
            Ok(self.0 as f32 + 0.25)
        }
        fn wide(&mut self, _: &'static str) -> Result<f64, ()> {
            self.0 += 1;
            Ok(f64::from(self.0) + 0.1)
        }
        fn integer(&mut self, _: &'static str, max: u32) -> Result<u32, ()> {
            self.0 += 1;
            Ok(self.0.min(max))
        }
        fn flag(&mut self, _: &'static str) -> Result<bool, ()> {
            self.0 += 1;
            Ok(self.0 % 2 == 1)
        }
        fn name<T: Named>(&mut self, _: &'static str) -> Result<T, ()> {
            self.0 += 1;
            Ok(T::ALL[self.0 as usize % T::ALL.len()])
        }
    }

    fn walk<R: Copy + 'static>(kind: &EventKind<R>) -> Vec<(&'static str, FieldValue<R>)> {
        let mut fields = Vec::new();
        kind.for_each_field(&mut |key, value| {
            fields.push((key, value));
            Ok::<(), ()>(())
        })
        .unwrap();
        fields
    }

    #[test]
    fn every_kind_walks_its_table_and_builds_back() {
        let mut names = Vec::new();
        for id in KindId::ALL {
            let kind = EventKind::<f32>::from_fields(id, &mut Counting(id.index() as u32)).unwrap();
            assert_eq!(kind.id(), id);
            assert_eq!(kind.name(), id.name());
            assert_eq!(KindId::from_name(id.name()), Some(id));
            let fields = walk(&kind);
            // The walk gives the table's keys and shapes, in the table's order.
            let table: Vec<_> = id.fields().iter().map(|f| (f.key, f.shape)).collect();
            let walked: Vec<_> = fields.iter().map(|(k, v)| (*k, v.shape())).collect();
            assert_eq!(walked, table, "{}", id.name());
            // Built back from its own fields, the event is the same.
            assert_eq!(EventKind::from_fields(id, &mut Replay(fields)), Ok(kind));
            // A change of float type and back keeps it (the values are exact in f32).
            assert_eq!(kind.map_real(f64::from).map_real(|v| v as f32), kind);
            names.push(id.name());
        }
        assert_eq!(names, EventKind::<f32>::NAMES);
        assert!(KindId::from_name("no_such_event").is_none());
    }

    #[test]
    fn a_missing_or_mistyped_field_is_refused() {
        let kind = EventKind::<f32>::from_fields(KindId::MeanMisfit, &mut Counting(0)).unwrap();
        let mut fields = walk(&kind);
        fields.pop();
        assert!(EventKind::from_fields(KindId::MeanMisfit, &mut Replay(fields)).is_err());
        let fields = std::vec![("reason", FieldValue::<f32>::Name("no_such_reason"))];
        assert!(EventKind::from_fields(KindId::SampleRejected, &mut Replay(fields)).is_err());
        let fields = std::vec![
            ("run", FieldValue::<f32>::Integer(3)),
            ("severity", FieldValue::Flag(true))
        ];
        assert!(EventKind::from_fields(KindId::SignalStuck, &mut Replay(fields)).is_err());
        let fields = std::vec![
            ("rung", FieldValue::<f32>::Name("log")),
            ("statistic", FieldValue::Real(1.0)),
            ("dof", FieldValue::Integer(256))
        ];
        assert!(EventKind::from_fields(KindId::MeanMisfit, &mut Replay(fields)).is_err());
    }
}
