//! JSON export: `{"metadata": {key: value, …}, "tables": [{"name", "columns", "rows"}]}`,
//! metadata in document order, each row an array aligned with `columns`. Numbers are written
//! in shortest round-trip form; non-finite numbers and missing cells are `null`.

use super::{Cell, Document, Exporter, Table};
use crate::error::{Error, Result};
use serde::ser::{SerializeMap, SerializeSeq, SerializeStruct};
use serde::{Serialize, Serializer};

/// The JSON format (`.json`).
pub struct Json;

impl Exporter for Json {
    fn extension(&self) -> &'static str {
        "json"
    }

    fn render(&self, document: &Document) -> Result<Vec<u8>> {
        let mut bytes = serde_json::to_vec_pretty(&JsonDocument(document))
            .map_err(|e| Error::Computation(format!("cannot render JSON: {e}")))?;
        bytes.push(b'\n');
        Ok(bytes)
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
}
