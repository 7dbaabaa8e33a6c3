//! How the output contract writes a record: the `#[serde(serialize_with = "…")]` helpers of the
//! record types, and the serializer that turns one record into the cells of a CSV row.
//!
//! A record type is written both as a CSV row and as a JSON object (`manifest.csv` and the
//! `rows` of `manifest.json` are one [`ManifestRecord`](super::ManifestRecord) each), so its
//! fields are the one list of what both files hold. The two notations differ only for a number
//! with fixed decimals: the CSV cell holds text with exactly that many decimals (`26.100000`),
//! the JSON value is the number rounded to them (`26.1`). The helpers below wrap such a number
//! in a newtype whose serde name carries its count of decimals; [`record`] reads the name,
//! serde_json ignores it. A float without a count of decimals is refused, so that no CSV cell
//! depends on how a float happens to print.

use std::fmt;

use chrono::{NaiveDate, NaiveDateTime};
use serde::ser::{self, Impossible, Serialize, SerializeStruct, Serializer};

/// Serde names of a number with 0‥6 fixed decimals (index = decimals).
const FIXED: [&str; 7] = [
    "broodcast::fixed0",
    "broodcast::fixed1",
    "broodcast::fixed2",
    "broodcast::fixed3",
    "broodcast::fixed4",
    "broodcast::fixed5",
    "broodcast::fixed6",
];

/// A number written with `D` fixed decimals (rounded; non-finite written as 0).
struct Fixed<const D: usize>(f64);

impl<const D: usize> Serialize for Fixed<D> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_newtype_struct(FIXED[D], &super::round_to(self.0, D as i32))
    }
}

/// A date as `YYYY-MM-DD`.
pub(super) fn date<S: Serializer>(d: &NaiveDate, s: S) -> Result<S::Ok, S::Error> {
    s.collect_str(d)
}

/// A local date-time to the minute.
pub(super) fn minutes<S: Serializer>(t: &NaiveDateTime, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(&super::iso_minutes(*t))
}

/// A number with 1 decimal (wasps).
pub(super) fn fixed1<S: Serializer>(x: &f64, s: S) -> Result<S::Ok, S::Error> {
    Fixed::<1>(*x).serialize(s)
}

/// A value written as its `Display` text (e.g. a supply multiplier, `0.5`).
pub(super) fn text<T: fmt::Display, S: Serializer>(x: &T, s: S) -> Result<S::Ok, S::Error> {
    s.collect_str(x)
}

/// A number with 3 decimals (objective values).
pub(super) fn fixed3<S: Serializer>(x: &f64, s: S) -> Result<S::Ok, S::Error> {
    Fixed::<3>(*x).serialize(s)
}

/// A number with 4 decimals (priority).
pub(super) fn fixed4<S: Serializer>(x: &f64, s: S) -> Result<S::Ok, S::Error> {
    Fixed::<4>(*x).serialize(s)
}

/// A number with 6 decimals (shares, values per vial).
pub(super) fn fixed6<S: Serializer>(x: &f64, s: S) -> Result<S::Ok, S::Error> {
    Fixed::<6>(*x).serialize(s)
}

/// A coordinate with 6 decimals (about 0.1 m); an empty cell (JSON `null`) when absent.
pub(super) fn degrees<S: Serializer>(x: &Option<f64>, s: S) -> Result<S::Ok, S::Error> {
    match x {
        Some(x) => s.serialize_some(&Fixed::<6>(*x)),
        None => s.serialize_none(),
    }
}

/// Why a value could not be written as a CSV row (a record type that does not fit the
/// contract: a bug, not an input problem).
#[derive(Debug)]
pub(super) struct CellError(String);

impl fmt::Display for CellError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for CellError {}

impl ser::Error for CellError {
    fn custom<T: fmt::Display>(msg: T) -> Self {
        CellError(msg.to_string())
    }
}

impl From<CellError> for super::OutputError {
    fn from(e: CellError) -> Self {
        super::OutputError::Record(e.0)
    }
}

/// A record's fields as (field name, cell text), in field order: strings as they are,
/// whole numbers in decimal, `true`/`false`, a unit enum variant by its serde name, `None`
/// as an empty cell, a number of the helpers above with its fixed decimals.
///
/// # Errors
/// When `r` is not a struct of such fields (a nested struct, a list, a float without fixed
/// decimals…).
pub(super) fn record<R: Serialize + ?Sized>(
    r: &R,
) -> Result<Vec<(&'static str, String)>, CellError> {
    r.serialize(Record)
}

/// Serializes the top-level struct of a record.
struct Record;

/// The fields of the record being written.
struct Fields(Vec<(&'static str, String)>);

/// Serializes one field into its cell text; `decimals` once inside a fixed-decimal number.
struct Cell {
    decimals: Option<usize>,
}

fn refuse<T>(what: &str) -> Result<T, CellError> {
    Err(CellError(format!(
        "a CSV record is a struct of plain cells, not {what}"
    )))
}

/// The `Serializer` methods that refuse their kind of value.
macro_rules! refuse {
    ($ok:ty; $($method:ident($($arg:ty),*) => $what:literal),* $(,)?) => {
        $(fn $method(self, $(_: $arg),*) -> Result<$ok, CellError> {
            refuse($what)
        })*
    };
}

impl Serializer for Record {
    type Ok = Vec<(&'static str, String)>;
    type Error = CellError;
    type SerializeSeq = Impossible<Self::Ok, CellError>;
    type SerializeTuple = Impossible<Self::Ok, CellError>;
    type SerializeTupleStruct = Impossible<Self::Ok, CellError>;
    type SerializeTupleVariant = Impossible<Self::Ok, CellError>;
    type SerializeMap = Impossible<Self::Ok, CellError>;
    type SerializeStruct = Fields;
    type SerializeStructVariant = Impossible<Self::Ok, CellError>;

    fn serialize_struct(self, _: &'static str, len: usize) -> Result<Fields, CellError> {
        Ok(Fields(Vec::with_capacity(len)))
    }

    fn serialize_newtype_struct<T: Serialize + ?Sized>(
        self,
        _: &'static str,
        value: &T,
    ) -> Result<Self::Ok, CellError> {
        value.serialize(self)
    }

    fn serialize_some<T: Serialize + ?Sized>(self, _: &T) -> Result<Self::Ok, CellError> {
        refuse("an option")
    }

    fn serialize_newtype_variant<T: Serialize + ?Sized>(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: &T,
    ) -> Result<Self::Ok, CellError> {
        refuse("an enum")
    }

    fn serialize_seq(self, _: Option<usize>) -> Result<Self::SerializeSeq, CellError> {
        refuse("a list")
    }

    fn serialize_tuple(self, _: usize) -> Result<Self::SerializeTuple, CellError> {
        refuse("a tuple")
    }

    fn serialize_tuple_struct(
        self,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeTupleStruct, CellError> {
        refuse("a tuple struct")
    }

    fn serialize_tuple_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeTupleVariant, CellError> {
        refuse("an enum")
    }

    fn serialize_map(self, _: Option<usize>) -> Result<Self::SerializeMap, CellError> {
        refuse("a map")
    }

    fn serialize_struct_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeStructVariant, CellError> {
        refuse("an enum")
    }

    refuse! { Self::Ok;
        serialize_bool(bool) => "a lone value",
        serialize_i8(i8) => "a lone value",
        serialize_i16(i16) => "a lone value",
        serialize_i32(i32) => "a lone value",
        serialize_i64(i64) => "a lone value",
        serialize_u8(u8) => "a lone value",
        serialize_u16(u16) => "a lone value",
        serialize_u32(u32) => "a lone value",
        serialize_u64(u64) => "a lone value",
        serialize_f32(f32) => "a lone value",
        serialize_f64(f64) => "a lone value",
        serialize_char(char) => "a lone value",
        serialize_str(&str) => "a lone value",
        serialize_bytes(&[u8]) => "a lone value",
        serialize_none() => "an option",
        serialize_unit() => "a lone value",
        serialize_unit_struct(&'static str) => "a lone value",
        serialize_unit_variant(&'static str, u32, &'static str) => "a lone value",
    }
}

impl SerializeStruct for Fields {
    type Ok = Vec<(&'static str, String)>;
    type Error = CellError;

    fn serialize_field<T: Serialize + ?Sized>(
        &mut self,
        key: &'static str,
        value: &T,
    ) -> Result<(), CellError> {
        let text = value
            .serialize(Cell { decimals: None })
            .map_err(|e| CellError(format!("field `{key}`: {e}")))?;
        self.0.push((key, text));
        Ok(())
    }

    fn skip_field(&mut self, key: &'static str) -> Result<(), CellError> {
        Err(CellError(format!(
            "field `{key}` is skipped; a CSV row has a cell for every column"
        )))
    }

    fn end(self) -> Result<Self::Ok, CellError> {
        Ok(self.0)
    }
}

impl Cell {
    fn float(self, x: f64) -> Result<String, CellError> {
        match self.decimals {
            // Already rounded by `Fixed`, so this is `output::fixed(x, d)`.
            Some(d) => Ok(format!("{x:.d$}")),
            None => Err(CellError(
                "a float needs a fixed count of decimals (`cell::fixed1`…)".into(),
            )),
        }
    }
}

impl Serializer for Cell {
    type Ok = String;
    type Error = CellError;
    type SerializeSeq = Impossible<String, CellError>;
    type SerializeTuple = Impossible<String, CellError>;
    type SerializeTupleStruct = Impossible<String, CellError>;
    type SerializeTupleVariant = Impossible<String, CellError>;
    type SerializeMap = Impossible<String, CellError>;
    type SerializeStruct = Impossible<String, CellError>;
    type SerializeStructVariant = Impossible<String, CellError>;

    fn serialize_bool(self, v: bool) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_i8(self, v: i8) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_i16(self, v: i16) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_i32(self, v: i32) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_i64(self, v: i64) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_u8(self, v: u8) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_u16(self, v: u16) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_u32(self, v: u32) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_u64(self, v: u64) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_f32(self, v: f32) -> Result<String, CellError> {
        self.float(f64::from(v))
    }
    fn serialize_f64(self, v: f64) -> Result<String, CellError> {
        self.float(v)
    }
    fn serialize_char(self, v: char) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_str(self, v: &str) -> Result<String, CellError> {
        Ok(v.to_string())
    }
    fn serialize_none(self) -> Result<String, CellError> {
        Ok(String::new())
    }
    fn serialize_some<T: Serialize + ?Sized>(self, value: &T) -> Result<String, CellError> {
        value.serialize(self)
    }
    fn serialize_unit_variant(
        self,
        _: &'static str,
        _: u32,
        variant: &'static str,
    ) -> Result<String, CellError> {
        Ok(variant.to_string())
    }
    fn serialize_newtype_struct<T: Serialize + ?Sized>(
        self,
        name: &'static str,
        value: &T,
    ) -> Result<String, CellError> {
        let decimals = FIXED.iter().position(|n| *n == name).or(self.decimals);
        value.serialize(Cell { decimals })
    }
    fn serialize_newtype_variant<T: Serialize + ?Sized>(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: &T,
    ) -> Result<String, CellError> {
        refuse("an enum with data")
    }
    fn serialize_seq(self, _: Option<usize>) -> Result<Self::SerializeSeq, CellError> {
        refuse("a list")
    }
    fn serialize_tuple(self, _: usize) -> Result<Self::SerializeTuple, CellError> {
        refuse("a tuple")
    }
    fn serialize_tuple_struct(
        self,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeTupleStruct, CellError> {
        refuse("a tuple struct")
    }
    fn serialize_tuple_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeTupleVariant, CellError> {
        refuse("an enum with data")
    }
    fn serialize_map(self, _: Option<usize>) -> Result<Self::SerializeMap, CellError> {
        refuse("a map")
    }
    fn serialize_struct(
        self,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeStruct, CellError> {
        refuse("a nested struct")
    }
    fn serialize_struct_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> Result<Self::SerializeStructVariant, CellError> {
        refuse("an enum with data")
    }

    refuse! { String;
        serialize_bytes(&[u8]) => "bytes",
        serialize_unit() => "a unit value",
        serialize_unit_struct(&'static str) => "a unit struct",
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde::Serialize;

    #[derive(Serialize)]
    struct Row {
        id: &'static str,
        n: u32,
        ok: bool,
        #[serde(serialize_with = "fixed1")]
        x: f64,
        #[serde(serialize_with = "degrees")]
        lat: Option<f64>,
        #[serde(serialize_with = "degrees")]
        lon: Option<f64>,
        note: Option<String>,
    }

    fn row() -> Row {
        Row {
            id: "a,b",
            n: 3,
            ok: true,
            x: 2.25,
            lat: Some(26.1),
            lon: None,
            note: None,
        }
    }

    #[test]
    fn fixed_numbers_are_text_in_csv_and_rounded_numbers_in_json() {
        let cells = record(&row()).unwrap();
        let want = [
            ("id", "a,b"),
            ("n", "3"),
            ("ok", "true"),
            ("x", "2.3"),
            ("lat", "26.100000"),
            ("lon", ""),
            ("note", ""),
        ];
        let got: Vec<(&str, &str)> = cells.iter().map(|(k, v)| (*k, v.as_str())).collect();
        assert_eq!(got, want);
        assert_eq!(
            serde_json::to_string(&row()).unwrap(),
            r#"{"id":"a,b","n":3,"ok":true,"x":2.3,"lat":26.1,"lon":null,"note":null}"#
        );
    }

    #[test]
    fn cells_are_what_the_csv_crate_writes_for_plain_fields() {
        #[derive(Serialize)]
        struct Plain {
            id: &'static str,
            n: u64,
            kind: crate::scenario::SiteKind,
            note: Option<u32>,
        }
        let p = Plain {
            id: "x\"y",
            n: 7,
            kind: crate::scenario::SiteKind::Dooryard,
            note: None,
        };
        let mut w = csv::WriterBuilder::new()
            .has_headers(false)
            .from_writer(Vec::new());
        w.serialize(&p).unwrap();
        let theirs = w.into_inner().unwrap();
        let mut w = csv::Writer::from_writer(Vec::new());
        w.write_record(record(&p).unwrap().iter().map(|(_, v)| v))
            .unwrap();
        assert_eq!(w.into_inner().unwrap(), theirs);
    }

    #[test]
    fn a_float_without_decimals_or_a_nested_value_is_refused() {
        #[derive(Serialize)]
        struct Loose {
            x: f64,
        }
        let e = record(&Loose { x: 1.0 }).unwrap_err().to_string();
        assert!(e.contains("field `x`") && e.contains("fixed count"), "{e}");
        #[derive(Serialize)]
        struct Nested {
            v: Vec<u32>,
        }
        assert!(record(&Nested { v: vec![] }).is_err());
        assert!(record(&3u32).is_err(), "a record is a struct");
    }
}
