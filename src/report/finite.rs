//! A serializer that writes nothing and only looks for non-finite numbers.
//!
//! `serde_json` writes NaN and ±∞ as `null`, indistinguishable from an absent optional field,
//! so the check runs on the typed value before it becomes JSON: [`first_non_finite`] returns
//! the dotted path of the first NaN or infinite `f32`/`f64` it meets.

use serde::Serialize;
use serde::ser::{self, Impossible};
use std::fmt;

/// The path of the first non-finite number inside `value` (e.g. `network.modes[1].pole[0]`),
/// or `None` when every number is finite.
pub fn first_non_finite<T: Serialize + ?Sized>(value: &T) -> Option<String> {
    let mut w = Walker {
        path: Vec::new(),
        found: None,
    };
    // The walker's only error is "found"; the path is kept in `found`.
    let _ = value.serialize(&mut w);
    w.found
}

struct Walker {
    path: Vec<String>,
    found: Option<String>,
}

impl Walker {
    fn float(&mut self, v: f64) -> Result<(), Found> {
        if v.is_finite() {
            return Ok(());
        }
        let mut p = String::new();
        for seg in &self.path {
            if !seg.starts_with('[') && !p.is_empty() {
                p.push('.');
            }
            p.push_str(seg);
        }
        self.found = Some(if p.is_empty() { "(top)".into() } else { p });
        Err(Found)
    }
}

/// Stops the walk at the first non-finite number.
#[derive(Debug)]
struct Found;

impl fmt::Display for Found {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("non-finite number")
    }
}

impl std::error::Error for Found {}

impl ser::Error for Found {
    fn custom<T: fmt::Display>(_msg: T) -> Self {
        Found
    }
}

type R = Result<(), Found>;

macro_rules! ignore {
    ($($name:ident($t:ty)),* $(,)?) => {
        $(fn $name(self, _v: $t) -> R { Ok(()) })*
    };
}

impl<'a> ser::Serializer for &'a mut Walker {
    type Ok = ();
    type Error = Found;
    type SerializeSeq = Seq<'a>;
    type SerializeTuple = Seq<'a>;
    type SerializeTupleStruct = Seq<'a>;
    type SerializeTupleVariant = Seq<'a>;
    type SerializeMap = Map<'a>;
    type SerializeStruct = Seq<'a>;
    type SerializeStructVariant = Seq<'a>;

    ignore!(
        serialize_bool(bool),
        serialize_i8(i8),
        serialize_i16(i16),
        serialize_i32(i32),
        serialize_i64(i64),
        serialize_i128(i128),
        serialize_u8(u8),
        serialize_u16(u16),
        serialize_u32(u32),
        serialize_u64(u64),
        serialize_u128(u128),
        serialize_char(char),
        serialize_str(&str),
        serialize_bytes(&[u8]),
    );

    fn serialize_f32(self, v: f32) -> R {
        self.float(f64::from(v))
    }
    fn serialize_f64(self, v: f64) -> R {
        self.float(v)
    }
    fn serialize_none(self) -> R {
        Ok(())
    }
    fn serialize_some<T: Serialize + ?Sized>(self, v: &T) -> R {
        v.serialize(self)
    }
    fn serialize_unit(self) -> R {
        Ok(())
    }
    fn serialize_unit_struct(self, _: &'static str) -> R {
        Ok(())
    }
    fn serialize_unit_variant(self, _: &'static str, _: u32, _: &'static str) -> R {
        Ok(())
    }
    fn serialize_newtype_struct<T: Serialize + ?Sized>(self, _: &'static str, v: &T) -> R {
        v.serialize(self)
    }
    fn serialize_newtype_variant<T: Serialize + ?Sized>(
        self,
        _: &'static str,
        _: u32,
        variant: &'static str,
        v: &T,
    ) -> R {
        self.path.push(variant.to_string());
        v.serialize(&mut *self)?;
        self.path.pop();
        Ok(())
    }
    fn serialize_seq(self, _: Option<usize>) -> Result<Seq<'a>, Found> {
        Ok(Seq { w: self, i: 0 })
    }
    fn serialize_tuple(self, _: usize) -> Result<Seq<'a>, Found> {
        Ok(Seq { w: self, i: 0 })
    }
    fn serialize_tuple_struct(self, _: &'static str, _: usize) -> Result<Seq<'a>, Found> {
        Ok(Seq { w: self, i: 0 })
    }
    fn serialize_tuple_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Seq<'a>, Found> {
        Ok(Seq { w: self, i: 0 })
    }
    fn serialize_map(self, _: Option<usize>) -> Result<Map<'a>, Found> {
        Ok(Map {
            w: self,
            key: String::new(),
        })
    }
    fn serialize_struct(self, _: &'static str, _: usize) -> Result<Seq<'a>, Found> {
        Ok(Seq { w: self, i: 0 })
    }
    fn serialize_struct_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Seq<'a>, Found> {
        Ok(Seq { w: self, i: 0 })
    }
}

/// Sequences, tuples and structs: each element under its index or field name.
struct Seq<'a> {
    w: &'a mut Walker,
    i: usize,
}

impl Seq<'_> {
    fn element<T: Serialize + ?Sized>(&mut self, name: String, v: &T) -> R {
        self.w.path.push(name);
        v.serialize(&mut *self.w)?;
        self.w.path.pop();
        Ok(())
    }
    fn indexed<T: Serialize + ?Sized>(&mut self, v: &T) -> R {
        let name = format!("[{}]", self.i);
        self.i += 1;
        self.element(name, v)
    }
}

macro_rules! seq_like {
    ($($tr:ident :: $m:ident),*) => {
        $(impl ser::$tr for Seq<'_> {
            type Ok = ();
            type Error = Found;
            fn $m<T: Serialize + ?Sized>(&mut self, v: &T) -> R {
                self.indexed(v)
            }
            fn end(self) -> R {
                Ok(())
            }
        })*
    };
}

seq_like!(
    SerializeSeq::serialize_element,
    SerializeTuple::serialize_element,
    SerializeTupleStruct::serialize_field,
    SerializeTupleVariant::serialize_field
);

impl ser::SerializeStruct for Seq<'_> {
    type Ok = ();
    type Error = Found;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, key: &'static str, v: &T) -> R {
        self.element(key.to_string(), v)
    }
    fn end(self) -> R {
        Ok(())
    }
}

impl ser::SerializeStructVariant for Seq<'_> {
    type Ok = ();
    type Error = Found;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, key: &'static str, v: &T) -> R {
        self.element(key.to_string(), v)
    }
    fn end(self) -> R {
        Ok(())
    }
}

/// Maps (and flattened structs, which serde writes as maps): keys rendered as text.
struct Map<'a> {
    w: &'a mut Walker,
    key: String,
}

impl ser::SerializeMap for Map<'_> {
    type Ok = ();
    type Error = Found;
    fn serialize_key<T: Serialize + ?Sized>(&mut self, k: &T) -> R {
        self.key = k.serialize(KeyName).unwrap_or_else(|_| "(key)".to_string());
        Ok(())
    }
    fn serialize_value<T: Serialize + ?Sized>(&mut self, v: &T) -> R {
        self.w.path.push(std::mem::take(&mut self.key));
        v.serialize(&mut *self.w)?;
        self.w.path.pop();
        Ok(())
    }
    fn end(self) -> R {
        Ok(())
    }
}

/// Renders a map key (a string or a number) as text for the path.
struct KeyName;

impl ser::Serializer for KeyName {
    type Ok = String;
    type Error = Found;
    type SerializeSeq = Impossible<String, Found>;
    type SerializeTuple = Impossible<String, Found>;
    type SerializeTupleStruct = Impossible<String, Found>;
    type SerializeTupleVariant = Impossible<String, Found>;
    type SerializeMap = Impossible<String, Found>;
    type SerializeStruct = Impossible<String, Found>;
    type SerializeStructVariant = Impossible<String, Found>;

    fn serialize_str(self, v: &str) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_bool(self, v: bool) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_i8(self, v: i8) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_i16(self, v: i16) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_i32(self, v: i32) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_i64(self, v: i64) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_u8(self, v: u8) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_u16(self, v: u16) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_u32(self, v: u32) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_u64(self, v: u64) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_f32(self, v: f32) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_f64(self, v: f64) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_char(self, v: char) -> Result<String, Found> {
        Ok(v.to_string())
    }
    fn serialize_bytes(self, _: &[u8]) -> Result<String, Found> {
        Err(Found)
    }
    fn serialize_none(self) -> Result<String, Found> {
        Err(Found)
    }
    fn serialize_some<T: Serialize + ?Sized>(self, v: &T) -> Result<String, Found> {
        v.serialize(self)
    }
    fn serialize_unit(self) -> Result<String, Found> {
        Err(Found)
    }
    fn serialize_unit_struct(self, name: &'static str) -> Result<String, Found> {
        Ok(name.to_string())
    }
    fn serialize_unit_variant(
        self,
        _: &'static str,
        _: u32,
        variant: &'static str,
    ) -> Result<String, Found> {
        Ok(variant.to_string())
    }
    fn serialize_newtype_struct<T: Serialize + ?Sized>(
        self,
        _: &'static str,
        v: &T,
    ) -> Result<String, Found> {
        v.serialize(self)
    }
    fn serialize_newtype_variant<T: Serialize + ?Sized>(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: &T,
    ) -> Result<String, Found> {
        Err(Found)
    }
    fn serialize_seq(self, _: Option<usize>) -> Result<Self::SerializeSeq, Found> {
        Err(Found)
    }
    fn serialize_tuple(self, _: usize) -> Result<Self::SerializeTuple, Found> {
        Err(Found)
    }
    fn serialize_tuple_struct(
        self,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeTupleStruct, Found> {
        Err(Found)
    }
    fn serialize_tuple_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeTupleVariant, Found> {
        Err(Found)
    }
    fn serialize_map(self, _: Option<usize>) -> Result<Self::SerializeMap, Found> {
        Err(Found)
    }
    fn serialize_struct(self, _: &'static str, _: usize) -> Result<Self::SerializeStruct, Found> {
        Err(Found)
    }
    fn serialize_struct_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeStructVariant, Found> {
        Err(Found)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Serialize)]
    struct Inner {
        a: f64,
        b: Option<f64>,
    }

    #[derive(Serialize)]
    struct Outer {
        name: &'static str,
        list: Vec<Inner>,
        #[serde(flatten)]
        flat: Inner,
    }

    #[test]
    fn finds_the_path_of_a_nan_and_passes_none() {
        let mut o = Outer {
            name: "x",
            list: vec![
                Inner { a: 1.0, b: None },
                Inner {
                    a: 2.0,
                    b: Some(f64::NAN),
                },
            ],
            flat: Inner { a: 0.0, b: None },
        };
        assert_eq!(first_non_finite(&o).as_deref(), Some("list[1].b"));
        o.list[1].b = Some(3.0);
        assert_eq!(first_non_finite(&o), None);
        o.flat.a = f64::NEG_INFINITY;
        assert_eq!(first_non_finite(&o).as_deref(), Some("a"));
    }
}
