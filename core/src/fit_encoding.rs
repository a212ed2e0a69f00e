//! The encoding of a [`RecursiveFit`]: only what the fit uses. Two implementations of
//! the same bytes: serde (`Serialize`/`Deserialize`, for the host) and [`Walk`] (the
//! snapshot codec, without serde; see [`crate::wire`]).
//!
//! A fit of `dim` parameters in a const-generic capacity `P` stores `θ[..dim]`, `D[..dim]`,
//! the strict upper triangle of the unit triangular factor `U` of that dimension (row by
//! row), the weighted residual sum and the effective sample size: `2·dim + dim(dim−1)/2 + 2`
//! numbers, then the update count. The padding past `dim` is zero in every fit and is not
//! written; the fit's [`FitConfig`] is not written either: it is part of the owner's
//! configuration, and the owner puts it back after decoding
//! ([`RecursiveFit::set_config`]). For the default two-parameter f32 fit that is 33 bytes
//! instead of 80.
//!
//! Layout (a tuple): `dim: u8`, then a length-prefixed sequence of the numbers above, then
//! `updates: u32`.
//!
//! # Invariants
//! - Decoding refuses `dim = 0`, `dim > P` and a sequence of any other length than the one
//!   `dim` implies, so a decoded fit has the shape its loops expect (both codecs).

use core::fmt;
use core::marker::PhantomData;

use serde::de::{self, DeserializeSeed, SeqAccess, Visitor};
use serde::ser::{SerializeSeq, SerializeTuple};
use serde::{Deserialize, Deserializer, Serialize, Serializer};

use crate::fit::{FitConfig, RecursiveFit};
use crate::real::Real;
use crate::wire::{Transfer, Walk};

/// Numbers written for a fit of `dim` parameters.
const fn used_len(dim: usize) -> usize {
    2 * dim + dim * dim.saturating_sub(1) / 2 + 2
}

/// The numbers a fit uses, in encoding order.
struct Used<'a, R, const P: usize>(&'a RecursiveFit<R, P>);

impl<R: Real, const P: usize> Serialize for Used<'_, R, P> {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let fit = self.0;
        let dim = fit.dim();
        let mut seq = serializer.serialize_seq(Some(used_len(dim)))?;
        for i in 0..dim {
            seq.serialize_element(&fit.theta[i])?;
        }
        for i in 0..dim {
            seq.serialize_element(&fit.d[i])?;
        }
        for i in 0..dim {
            for j in i + 1..dim {
                seq.serialize_element(&fit.u[i][j])?;
            }
        }
        seq.serialize_element(&fit.weighted_sse)?;
        seq.serialize_element(&fit.effective)?;
        seq.end()
    }
}

impl<R: Real, const P: usize> Serialize for RecursiveFit<R, P> {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let mut tuple = serializer.serialize_tuple(3)?;
        tuple.serialize_element(&self.dim)?;
        tuple.serialize_element(&Used(self))?;
        tuple.serialize_element(&self.updates)?;
        tuple.end()
    }
}

/// A configuration that only fills the slot until the owner restores the real one.
fn placeholder_config<R: Real>() -> FitConfig<R> {
    FitConfig {
        forgetting: R::ONE,
        initial_variance: R::ONE,
    }
}

/// Reads the numbers of a fit whose `dim` is already known into a fresh fit.
struct UsedSeed<R, const P: usize> {
    dim: usize,
    marker: PhantomData<R>,
}

impl<'de, R: Real, const P: usize> DeserializeSeed<'de> for UsedSeed<R, P> {
    type Value = RecursiveFit<R, P>;

    fn deserialize<D: Deserializer<'de>>(self, deserializer: D) -> Result<Self::Value, D::Error> {
        deserializer.deserialize_seq(self)
    }
}

impl<'de, R: Real, const P: usize> Visitor<'de> for UsedSeed<R, P> {
    type Value = RecursiveFit<R, P>;

    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        write!(
            f,
            "the {} numbers of a {}-parameter fit",
            used_len(self.dim),
            self.dim
        )
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Self::Value, A::Error> {
        let dim = self.dim;
        let expected = used_len(dim);
        if let Some(len) = seq.size_hint() {
            if len != expected {
                return Err(de::Error::invalid_length(len, &self));
            }
        }
        let mut fit = RecursiveFit::<R, P>::new(dim, placeholder_config());
        let mut read = 0usize;
        let mut next = |seq: &mut A| -> Result<R, A::Error> {
            let value = seq
                .next_element::<R>()?
                .ok_or_else(|| de::Error::invalid_length(read, &self))?;
            read += 1;
            Ok(value)
        };
        for i in 0..dim {
            fit.theta[i] = next(&mut seq)?;
        }
        for i in 0..dim {
            fit.d[i] = next(&mut seq)?;
        }
        for i in 0..dim {
            for j in i + 1..dim {
                fit.u[i][j] = next(&mut seq)?;
            }
        }
        fit.weighted_sse = next(&mut seq)?;
        fit.effective = next(&mut seq)?;
        if seq.next_element::<R>()?.is_some() {
            return Err(de::Error::invalid_length(expected + 1, &self));
        }
        Ok(fit)
    }
}

struct FitVisitor<R, const P: usize>(PhantomData<R>);

impl<'de, R: Real, const P: usize> Visitor<'de> for FitVisitor<R, P> {
    type Value = RecursiveFit<R, P>;

    fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
        write!(f, "a recursive fit of at most {P} parameters")
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Self::Value, A::Error> {
        let dim: u8 = seq
            .next_element()?
            .ok_or_else(|| de::Error::invalid_length(0, &self))?;
        let dim = dim as usize;
        if dim == 0 || dim > P {
            return Err(de::Error::invalid_value(
                de::Unexpected::Unsigned(dim as u64),
                &self,
            ));
        }
        let mut fit = seq
            .next_element_seed(UsedSeed::<R, P> {
                dim,
                marker: PhantomData,
            })?
            .ok_or_else(|| de::Error::invalid_length(1, &self))?;
        fit.updates = seq
            .next_element()?
            .ok_or_else(|| de::Error::invalid_length(2, &self))?;
        Ok(fit)
    }
}

impl<'de, R: Real, const P: usize> Deserialize<'de> for RecursiveFit<R, P> {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_tuple(3, FitVisitor::<R, P>(PhantomData))
    }
}

impl<R: Real, const P: usize> Walk for RecursiveFit<R, P> {
    fn walk<'t, 'a>(&mut self, mut t: &'t mut Transfer<'a>) -> &'t mut Transfer<'a> {
        // The shape first: written from the fit, or read, checked and given to the fit
        // (reset to zeros of that shape, as a new fit), so the numbers after it are one
        // walk for both directions.
        let dim = if t.encoding() {
            let w = t.writer();
            w.byte(self.dim);
            w.varint32(used_len(self.dim()) as u32);
            self.dim()
        } else {
            let r = t.reader();
            let mut dim = usize::from(r.byte());
            if dim == 0 || dim > P || r.len() != used_len(dim) {
                r.fail();
                dim = 1;
            }
            *self = RecursiveFit::new(dim, placeholder_config());
            dim
        };
        // At most P: the loops below run to a capacity, whatever an encoding claims.
        let dim = dim.min(P);
        for x in &mut self.theta[..dim] {
            t = x.walk(t);
        }
        for x in &mut self.d[..dim] {
            t = x.walk(t);
        }
        for i in 0..dim {
            for x in &mut self.u[i][i + 1..dim] {
                t = x.walk(t);
            }
        }
        let t = self.weighted_sse.walk(t);
        let t = self.effective.walk(t);
        self.updates.walk(t)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn config() -> FitConfig<f64> {
        FitConfig {
            forgetting: 0.999,
            initial_variance: 1e6,
        }
    }

    fn trained<const P: usize>(dim: usize) -> RecursiveFit<f64, P> {
        let mut fit = RecursiveFit::<f64, P>::new(dim, config());
        for i in 0..50 {
            let x = i as f64 * 0.37;
            let mut row = [0.0; P];
            row[0] = 1.0;
            if P > 1 && dim > 1 {
                row[1] = x;
            }
            if P > 2 && dim > 2 {
                row[2] = x * x / 10.0;
            }
            fit.update(&row, 0.3 + 1.7 * x + 0.01 * (i % 7) as f64, 1.0)
                .unwrap();
        }
        fit
    }

    #[test]
    fn round_trip_keeps_every_bit_once_the_config_is_back() {
        for dim in 1..=3 {
            let fit = trained::<3>(dim);
            let mut buf = [0u8; 256];
            let bytes = postcard::to_slice(&fit, &mut buf).unwrap();
            assert_eq!(bytes.len(), 1 + 1 + 8 * used_len(dim) + 1);
            let mut back: RecursiveFit<f64, 3> = postcard::from_bytes(bytes).unwrap();
            back.set_config(config());
            let mut again = [0u8; 256];
            assert_eq!(postcard::to_slice(&back, &mut again).unwrap(), bytes);
            assert_eq!(back.parameters(), fit.parameters());
            assert_eq!(back.covariance(), fit.covariance());
            assert_eq!(back.updates(), fit.updates());
        }
    }

    #[test]
    fn refuses_shapes_the_fit_cannot_have() {
        let fit = trained::<3>(2);
        let mut buf = [0u8; 256];
        let bytes = std::vec::Vec::from(&*postcard::to_slice(&fit, &mut buf).unwrap());
        // dim = 0 and dim > P.
        let mut zero = bytes.clone();
        zero[0] = 0;
        assert!(postcard::from_bytes::<RecursiveFit<f64, 3>>(&zero).is_err());
        let mut big = bytes.clone();
        big[0] = 4;
        assert!(postcard::from_bytes::<RecursiveFit<f64, 3>>(&big).is_err());
        // A sequence length that does not match dim.
        let mut wrong = bytes;
        wrong[1] += 1;
        assert!(postcard::from_bytes::<RecursiveFit<f64, 3>>(&wrong).is_err());
    }
}
