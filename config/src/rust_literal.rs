//! A value as a Rust expression, for a board's build script to compile a configuration in
//! (`include!` of a generated file): derived from the core types' own serde description, so
//! a field added to a configuration type reaches the board without a hand-written list.
//!
//! - structs `Name { field: value, .. }`, unit enum variants `Name::Variant`, newtype and
//!   tuple variants `Name::Variant(..)`, `Option` as `Some(..)`/`None`;
//! - fixed arrays and tuples `[a, b, ..]`;
//! - floats as their exact bits, `f32::from_bits(0x3f7fbe77)` (every value, NaN payloads and
//!   infinities included, comes back bit for bit), integers and booleans as literals.
//!
//! Type names are written bare: the including file brings them into scope. Maps are refused.

use std::fmt::Write;

use serde::ser::{self, Serialize};

/// Why a value cannot be written.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct Unsupported(String);

impl ser::Error for Unsupported {
    fn custom<T: std::fmt::Display>(message: T) -> Self {
        Unsupported(message.to_string())
    }
}

/// The Rust expression of `value`.
pub fn to_rust<T: Serialize>(value: &T) -> Result<String, Unsupported> {
    let mut out = String::new();
    value.serialize(Writer { out: &mut out })?;
    Ok(out)
}

struct Writer<'a> {
    out: &'a mut String,
}

/// A compound being written: fields or elements separated by commas, then a closing text.
struct Compound<'a> {
    out: &'a mut String,
    close: &'static str,
}

impl Compound<'_> {
    fn element<T: Serialize + ?Sized>(&mut self, value: &T) -> Result<(), Unsupported> {
        value.serialize(Writer { out: self.out })?;
        self.out.push_str(", ");
        Ok(())
    }
    fn field<T: Serialize + ?Sized>(&mut self, key: &str, value: &T) -> Result<(), Unsupported> {
        let _ = write!(self.out, "{key}: ");
        self.element(value)
    }
    fn finish(self) -> Result<(), Unsupported> {
        self.out.push_str(self.close);
        Ok(())
    }
}

macro_rules! literal {
    ($($method:ident($type:ty)),*) => {$(
        fn $method(self, value: $type) -> Result<(), Unsupported> {
            let _ = write!(self.out, "{value}");
            Ok(())
        }
    )*};
}

impl<'a> ser::Serializer for Writer<'a> {
    type Ok = ();
    type Error = Unsupported;
    type SerializeSeq = Compound<'a>;
    type SerializeTuple = Compound<'a>;
    type SerializeTupleStruct = Compound<'a>;
    type SerializeTupleVariant = Compound<'a>;
    type SerializeMap = ser::Impossible<(), Unsupported>;
    type SerializeStruct = Compound<'a>;
    type SerializeStructVariant = Compound<'a>;

    literal!(
        serialize_bool(bool),
        serialize_i8(i8),
        serialize_i16(i16),
        serialize_i32(i32),
        serialize_i64(i64),
        serialize_u8(u8),
        serialize_u16(u16),
        serialize_u32(u32),
        serialize_u64(u64)
    );

    fn serialize_f32(self, value: f32) -> Result<(), Unsupported> {
        let _ = write!(self.out, "f32::from_bits({:#010x})", value.to_bits());
        Ok(())
    }
    fn serialize_f64(self, value: f64) -> Result<(), Unsupported> {
        let _ = write!(self.out, "f64::from_bits({:#018x})", value.to_bits());
        Ok(())
    }
    fn serialize_char(self, value: char) -> Result<(), Unsupported> {
        let _ = write!(self.out, "{value:?}");
        Ok(())
    }
    fn serialize_str(self, value: &str) -> Result<(), Unsupported> {
        let _ = write!(self.out, "{value:?}");
        Ok(())
    }
    fn serialize_bytes(self, value: &[u8]) -> Result<(), Unsupported> {
        let _ = write!(self.out, "{value:?}");
        Ok(())
    }
    fn serialize_none(self) -> Result<(), Unsupported> {
        self.out.push_str("None");
        Ok(())
    }
    fn serialize_some<T: Serialize + ?Sized>(self, value: &T) -> Result<(), Unsupported> {
        self.out.push_str("Some(");
        value.serialize(Writer { out: self.out })?;
        self.out.push(')');
        Ok(())
    }
    fn serialize_unit(self) -> Result<(), Unsupported> {
        self.out.push_str("()");
        Ok(())
    }
    fn serialize_unit_struct(self, name: &'static str) -> Result<(), Unsupported> {
        self.out.push_str(name);
        Ok(())
    }
    fn serialize_unit_variant(
        self,
        name: &'static str,
        _index: u32,
        variant: &'static str,
    ) -> Result<(), Unsupported> {
        let _ = write!(self.out, "{name}::{variant}");
        Ok(())
    }
    fn serialize_newtype_struct<T: Serialize + ?Sized>(
        self,
        name: &'static str,
        value: &T,
    ) -> Result<(), Unsupported> {
        let _ = write!(self.out, "{name}(");
        value.serialize(Writer { out: self.out })?;
        self.out.push(')');
        Ok(())
    }
    fn serialize_newtype_variant<T: Serialize + ?Sized>(
        self,
        name: &'static str,
        _index: u32,
        variant: &'static str,
        value: &T,
    ) -> Result<(), Unsupported> {
        let _ = write!(self.out, "{name}::{variant}(");
        value.serialize(Writer { out: self.out })?;
        self.out.push(')');
        Ok(())
    }
    fn serialize_seq(self, _len: Option<usize>) -> Result<Compound<'a>, Unsupported> {
        self.out.push('[');
        Ok(Compound {
            out: self.out,
            close: "]",
        })
    }
    fn serialize_tuple(self, len: usize) -> Result<Compound<'a>, Unsupported> {
        self.serialize_seq(Some(len))
    }
    fn serialize_tuple_struct(
        self,
        name: &'static str,
        _len: usize,
    ) -> Result<Compound<'a>, Unsupported> {
        let _ = write!(self.out, "{name}(");
        Ok(Compound {
            out: self.out,
            close: ")",
        })
    }
    fn serialize_tuple_variant(
        self,
        name: &'static str,
        _index: u32,
        variant: &'static str,
        _len: usize,
    ) -> Result<Compound<'a>, Unsupported> {
        let _ = write!(self.out, "{name}::{variant}(");
        Ok(Compound {
            out: self.out,
            close: ")",
        })
    }
    fn serialize_map(self, _len: Option<usize>) -> Result<Self::SerializeMap, Unsupported> {
        Err(Unsupported("a map has no Rust literal here".into()))
    }
    fn serialize_struct(
        self,
        name: &'static str,
        _len: usize,
    ) -> Result<Compound<'a>, Unsupported> {
        let _ = write!(self.out, "{name} {{ ");
        Ok(Compound {
            out: self.out,
            close: "}",
        })
    }
    fn serialize_struct_variant(
        self,
        name: &'static str,
        _index: u32,
        variant: &'static str,
        _len: usize,
    ) -> Result<Compound<'a>, Unsupported> {
        let _ = write!(self.out, "{name}::{variant} {{ ");
        Ok(Compound {
            out: self.out,
            close: "}",
        })
    }
}

/// The sequence-like compounds: each element written in turn.
macro_rules! elements {
    ($($trait:ident::$method:ident),*) => {$(
        impl ser::$trait for Compound<'_> {
            type Ok = ();
            type Error = Unsupported;
            fn $method<T: Serialize + ?Sized>(&mut self, value: &T) -> Result<(), Unsupported> {
                self.element(value)
            }
            fn end(self) -> Result<(), Unsupported> {
                self.finish()
            }
        }
    )*};
}

elements!(
    SerializeSeq::serialize_element,
    SerializeTuple::serialize_element,
    SerializeTupleStruct::serialize_field,
    SerializeTupleVariant::serialize_field
);

/// The struct-like compounds: each field written with its name.
macro_rules! fields {
    ($($trait:ident),*) => {$(
        impl ser::$trait for Compound<'_> {
            type Ok = ();
            type Error = Unsupported;
            fn serialize_field<T: Serialize + ?Sized>(
                &mut self,
                key: &'static str,
                value: &T,
            ) -> Result<(), Unsupported> {
                self.field(key, value)
            }
            fn end(self) -> Result<(), Unsupported> {
                self.finish()
            }
        }
    )*};
}

fields!(SerializeStruct, SerializeStructVariant);

#[cfg(test)]
mod tests {
    use super::*;
    use steadycal_core::detect::alarm::AlarmRules;
    use steadycal_core::monitor::MonitorConfig;

    #[test]
    fn floats_are_exact_bits_and_structs_name_their_fields() {
        assert_eq!(to_rust(&0.999f32).unwrap(), "f32::from_bits(0x3f7fbe77)");
        assert_eq!(
            to_rust(&f64::INFINITY).unwrap(),
            "f64::from_bits(0x7ff0000000000000)"
        );
        assert_eq!(to_rust(&Some([1u32, 2])).unwrap(), "Some([1, 2, ])");
        let rules = to_rust(&AlarmRules::DEFAULT).unwrap();
        assert!(
            rules.starts_with(
                "AlarmRules { bias_shift: AlarmRule { severity: Severity::Warn, raise_after: 8, clear_after: 50, }, "
            ),
            "{rules}"
        );
        let config: MonitorConfig<f32> = MonitorConfig::default_for_range(1.0, 1000.0);
        let text = to_rust(&config).unwrap();
        assert!(
            text.starts_with("MonitorConfig { basis: Basis { quadratic: false,"),
            "{text}"
        );
        assert!(text.contains("initial_rung: Rung::Identity"), "{text}");
        assert!(
            text.contains("forgetting: f32::from_bits(0x3f7fbe77)"),
            "{text}"
        );
    }
}
