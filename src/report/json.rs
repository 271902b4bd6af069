//! Every computed table of a document as JSON (schema in the README).

use serde_json::{json, Map, Number, Value};

use super::{Cell, InputRecord, Item, Output};

fn cell(c: &Cell) -> Value {
    match c {
        Cell::Text(s) => Value::String(s.clone()),
        // serde_json writes doubles in shortest round-trip form.
        Cell::Number(x) => Number::from_f64(*x).map_or(Value::Null, Value::Number),
        Cell::Missing => Value::Null,
    }
}

/// The JSON export: `{"inputs": [...], "outputs": [...]}` with one output per
/// table, in document order.
pub fn document(inputs: &[InputRecord], outputs: &[Output]) -> Value {
    let inputs: Vec<Value> = inputs
        .iter()
        .map(|i| {
            let mut v =
                json!({"path": i.path, "sha256": i.sha256, "rows": i.rows, "columns": i.columns});
            if let Value::Object(m) = &mut v {
                if let Some(p) = &i.part {
                    m.insert("part".into(), Value::String(p.clone()));
                }
                if let Some(r) = &i.rows_sha256 {
                    m.insert("rows_sha256".into(), Value::String(r.clone()));
                }
                if i.database {
                    m.insert("database".into(), Value::Bool(true));
                }
            }
            v
        })
        .collect();
    let mut out = Vec::new();
    for o in outputs {
        for item in &o.items {
            if let Item::Table(t) = item {
                let rows: Vec<Value> = t
                    .rows
                    .iter()
                    .map(|r| {
                        let mut m = Map::new();
                        for (c, v) in t.columns.iter().zip(r) {
                            m.insert(c.key.clone(), cell(v));
                        }
                        Value::Object(m)
                    })
                    .collect();
                out.push(json!({
                    "block": o.block,
                    "line": o.line,
                    "statement": o.statement,
                    "kind": t.kind,
                    "caption": t.caption,
                    "columns": t.columns.iter().map(|c| c.key.as_str()).collect::<Vec<_>>(),
                    "rows": rows,
                    "notes": t.notes,
                }));
            }
        }
    }
    json!({"inputs": inputs, "outputs": out})
}

/// Pretty-printed JSON text with a final newline.
pub fn to_text(v: &Value) -> String {
    let mut s = serde_json::to_string_pretty(v).unwrap_or_else(|_| "{}".into());
    s.push('\n');
    s
}
