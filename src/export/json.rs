//! JSON export: `{"metadata": {key: value, …}, "tables": [{"name", "columns", "rows"}]}`,
//! metadata in document order, each row an array aligned with `columns`. Numbers are written
//! in shortest round-trip form; non-finite numbers and missing cells are `null`.

use super::{Cell, Document, Exporter, Table};
use crate::error::{Error, Result};
use serde::ser::{SerializeMap, SerializeSeq, SerializeStruct};
use serde::{Serialize, Serializer};
use std::io::{self, Write};

/// The JSON format (`.json`).
pub struct Json;

impl Exporter for Json {
    fn extension(&self) -> &'static str {
        "json"
    }

    fn render(&self, document: &Document) -> Result<Vec<u8>> {
        to_json_bytes(&JsonDocument(document))
    }
}

/// Pretty JSON text of `value` with a final newline, as every JSON file of the tool is written:
/// serde_json's layout, numbers in shortest round-trip form, and no negative zero (`-0.0` is
/// written `0.0`: the sign of a zero means nothing in a table or a fit file).
pub fn to_json_bytes<T: Serialize + ?Sized>(value: &T) -> Result<Vec<u8>> {
    let mut bytes = Vec::new();
    let mut serializer = serde_json::Serializer::with_formatter(
        &mut bytes,
        UnsignedZero(serde_json::ser::PrettyFormatter::new()),
    );
    value
        .serialize(&mut serializer)
        .map_err(|e| Error::Computation(format!("cannot render JSON: {e}")))?;
    bytes.push(b'\n');
    Ok(bytes)
}

/// serde_json's pretty formatter, writing either zero as `0.0`.
struct UnsignedZero(serde_json::ser::PrettyFormatter<'static>);

impl serde_json::ser::Formatter for UnsignedZero {
    fn write_f64<W: ?Sized + Write>(&mut self, writer: &mut W, value: f64) -> io::Result<()> {
        let value = if value == 0.0 { 0.0 } else { value };
        self.0.write_f64(writer, value)
    }
    fn write_f32<W: ?Sized + Write>(&mut self, writer: &mut W, value: f32) -> io::Result<()> {
        let value = if value == 0.0 { 0.0 } else { value };
        self.0.write_f32(writer, value)
    }
    fn begin_array<W: ?Sized + Write>(&mut self, writer: &mut W) -> io::Result<()> {
        self.0.begin_array(writer)
    }
    fn end_array<W: ?Sized + Write>(&mut self, writer: &mut W) -> io::Result<()> {
        self.0.end_array(writer)
    }
    fn begin_array_value<W: ?Sized + Write>(
        &mut self,
        writer: &mut W,
        first: bool,
    ) -> io::Result<()> {
        self.0.begin_array_value(writer, first)
    }
    fn end_array_value<W: ?Sized + Write>(&mut self, writer: &mut W) -> io::Result<()> {
        self.0.end_array_value(writer)
    }
    fn begin_object<W: ?Sized + Write>(&mut self, writer: &mut W) -> io::Result<()> {
        self.0.begin_object(writer)
    }
    fn end_object<W: ?Sized + Write>(&mut self, writer: &mut W) -> io::Result<()> {
        self.0.end_object(writer)
    }
    fn begin_object_key<W: ?Sized + Write>(
        &mut self,
        writer: &mut W,
        first: bool,
    ) -> io::Result<()> {
        self.0.begin_object_key(writer, first)
    }
    fn begin_object_value<W: ?Sized + Write>(&mut self, writer: &mut W) -> io::Result<()> {
        self.0.begin_object_value(writer)
    }
    fn end_object_value<W: ?Sized + Write>(&mut self, writer: &mut W) -> io::Result<()> {
        self.0.end_object_value(writer)
    }
}

/// Ordered key–value metadata serialised as a JSON object in its own order, repeated keys
/// told apart ([`super::unique_keys`]); shared by the commands that write JSON reports of their
/// own (e.g. `horizon --json`).
pub struct MetadataMap<'a>(pub &'a [(String, String)]);

impl Serialize for MetadataMap<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let pairs = super::unique_keys(self.0);
        let mut map = s.serialize_map(Some(pairs.len()))?;
        for (k, v) in &pairs {
            map.serialize_entry(k, v)?;
        }
        map.end()
    }
}

struct JsonDocument<'a>(&'a Document);

impl Serialize for JsonDocument<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let mut st = s.serialize_struct("Document", 2)?;
        st.serialize_field("metadata", &MetadataMap(&self.0.metadata))?;
        let tables: Vec<JsonTable> = self.0.tables.iter().map(JsonTable).collect();
        st.serialize_field("tables", &tables)?;
        st.end()
    }
}

struct JsonTable<'a>(&'a Table);

impl Serialize for JsonTable<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let mut st = s.serialize_struct("Table", 3)?;
        st.serialize_field("name", &self.0.name)?;
        st.serialize_field("columns", &self.0.columns)?;
        let rows: Vec<JsonRow> = self.0.rows.iter().map(|r| JsonRow(r)).collect();
        st.serialize_field("rows", &rows)?;
        st.end()
    }
}

struct JsonRow<'a>(&'a [Cell]);

impl Serialize for JsonRow<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let mut seq = s.serialize_seq(Some(self.0.len()))?;
        for cell in self.0 {
            match cell {
                Cell::Int(i) => seq.serialize_element(i)?,
                Cell::Number(x) if x.is_finite() => seq.serialize_element(x)?,
                Cell::Number(_) | Cell::Missing => seq.serialize_element(&None::<f64>)?,
                Cell::Text(t) => seq.serialize_element(t)?,
            }
        }
        seq.end()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    #[derive(serde::Deserialize)]
    #[serde(deny_unknown_fields)]
    struct Back {
        metadata: BTreeMap<String, String>,
        tables: Vec<BackTable>,
    }

    #[derive(serde::Deserialize)]
    #[serde(deny_unknown_fields)]
    struct BackTable {
        name: String,
        columns: Vec<String>,
        rows: Vec<Vec<serde_json::Value>>,
    }

    #[test]
    fn same_content_as_fields_at_full_precision() {
        let document = Document {
            metadata: vec![("family".into(), "weibull".into())],
            tables: vec![Table {
                name: "tunnels".into(),
                columns: vec!["tunnel".into(), "p_exit".into(), "x".into()],
                rows: vec![vec![
                    Cell::Int(3),
                    Cell::Number(1.0 / 3.0),
                    Cell::Number(f64::NAN),
                ]],
            }],
        };
        let bytes = Json.render(&document).unwrap();
        let back: Back = serde_json::from_slice(&bytes).unwrap();
        assert_eq!(back.metadata["family"], "weibull");
        assert_eq!(back.tables[0].name, "tunnels");
        assert_eq!(back.tables[0].columns.len(), 3);
        assert_eq!(back.tables[0].rows[0][0].as_i64(), Some(3));
        assert_eq!(back.tables[0].rows[0][1].as_f64(), Some(1.0 / 3.0));
        assert!(back.tables[0].rows[0][2].is_null());
    }

    #[test]
    fn negative_zero_is_written_as_zero_and_the_layout_is_serde_jsons() {
        // Reference layout: serde_json's own pretty printer, on a value without negative zeros.
        let value = serde_json::json!({"a": [1.5, 0.0, {"b": null}], "c": "-0.0 stays in text"});
        let mut expected = serde_json::to_vec_pretty(&value).unwrap();
        expected.push(b'\n');
        assert_eq!(to_json_bytes(&value).unwrap(), expected);
        let document = Document {
            metadata: vec![],
            tables: vec![Table {
                name: "t".into(),
                columns: vec!["p_exit".into()],
                rows: vec![vec![Cell::Number(-0.0)]],
            }],
        };
        let text = String::from_utf8(Json.render(&document).unwrap()).unwrap();
        assert!(!text.contains("-0"), "{text}");
        let back: Back = serde_json::from_str(&text).unwrap();
        assert_eq!(back.tables[0].rows[0][0].as_f64(), Some(0.0));
        let text =
            String::from_utf8(to_json_bytes(&[-0.0f64, -0.0f64.abs() * -1.0]).unwrap()).unwrap();
        assert!(!text.contains('-'), "{text}");
    }
}
