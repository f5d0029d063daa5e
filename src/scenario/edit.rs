//! Write a value into the scenario text at a dotted key path, keeping the
//! rest of the file (and so its line numbers and comments) as it was. Sweeps
//! and command-line overrides go through this, so every value they set is
//! validated exactly as if it had been written in the file.

use serde::{Deserialize, Serialize};
use toml_edit::{DocumentMut, Item, Table, Value};

/// A value as written into the scenario's TOML.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum Literal {
    Bool(bool),
    Int(i64),
    Float(f64),
    Text(String),
    /// An array or inline table, as TOML source (`[{ at = "1 ms", … }]`).
    Toml {
        toml: String,
    },
}

/// One part of a key path: a name, optionally indexed (`node[2]`).
struct Part<'a> {
    name: &'a str,
    index: Option<usize>,
}

fn parts(path: &str) -> Result<Vec<Part<'_>>, String> {
    path.split('.')
        .map(|p| {
            let p = p.trim();
            match p.split_once('[') {
                Some((name, idx)) => {
                    let idx = idx
                        .strip_suffix(']')
                        .and_then(|i| i.parse().ok())
                        .ok_or_else(|| format!("`{p}`: write an index as name[0]"))?;
                    Ok(Part { name, index: Some(idx) })
                }
                None => Ok(Part { name: p, index: None }),
            }
        })
        .collect()
}

fn to_value(v: &Literal) -> Value {
    match v {
        Literal::Bool(b) => Value::from(*b),
        Literal::Int(i) => Value::from(*i),
        Literal::Float(x) => Value::from(*x),
        Literal::Text(s) => Value::from(s.as_str()),
        Literal::Toml { toml } => toml.parse::<Value>().expect("checked when the literal was made"),
    }
}

/// Set `path` to `value` in `doc`, creating missing tables on the way.
/// Whether the key is one the scenario format knows is left to validation.
pub fn set(doc: &mut DocumentMut, path: &str, value: &Literal) -> Result<(), String> {
    let parts = parts(path)?;
    set_in_table(doc.as_table_mut(), &parts, value, path)
}

fn set_in_table(table: &mut Table, parts: &[Part], value: &Literal, path: &str) -> Result<(), String> {
    let (first, rest) = parts.split_first().expect("a key path has a part");
    if rest.is_empty() && first.index.is_none() {
        let mut new = to_value(value);
        if let Some(Item::Value(old)) = table.get(first.name) {
            *new.decor_mut() = old.decor().clone();
        }
        table.insert(first.name, Item::Value(new));
        return Ok(());
    }
    if !table.contains_key(first.name) {
        if first.index.is_some() {
            return Err(format!(
                "`{}` is not in the scenario, so it has no entry [{}]",
                first.name,
                first.index.unwrap_or(0)
            ));
        }
        let mut t = Table::new();
        t.set_implicit(true);
        table.insert(first.name, Item::Table(t));
    }
    let item = table.get_mut(first.name).expect("inserted above");
    set_in_item(item, first, rest, value, path)
}

fn set_in_item(item: &mut Item, part: &Part, rest: &[Part], value: &Literal, path: &str) -> Result<(), String> {
    let name = part.name;
    match (item, part.index) {
        (Item::Table(t), None) => set_in_table(t, rest, value, path),
        (Item::ArrayOfTables(a), Some(i)) => {
            let len = a.len();
            let t = a.get_mut(i).ok_or_else(|| {
                format!("`{name}` has {}, so [{i}] is out of range", crate::units::count(len as u64, "entry"))
            })?;
            if rest.is_empty() {
                return Err(format!("`{name}[{i}]` is a table: name a key inside it"));
            }
            set_in_table(t, rest, value, path)
        }
        (Item::ArrayOfTables(a), None) => Err(format!(
            "`{name}` is a list of tables ([[{name}]], {} entries): give an index, e.g. {name}[0].{}",
            a.len(),
            rest.first().map_or("key", |p| p.name)
        )),
        (Item::Value(v), idx) => set_in_value(v, name, idx, rest, value, path),
        (Item::Table(_), Some(i)) => Err(format!("`{name}` is a table, not a list, so it has no entry [{i}]")),
        (Item::None, _) => Err(format!("`{name}` is empty")),
    }
}

fn set_in_value(
    v: &mut Value,
    name: &str,
    index: Option<usize>,
    rest: &[Part],
    value: &Literal,
    path: &str,
) -> Result<(), String> {
    let target = match (v, index) {
        (Value::Array(a), Some(i)) => {
            let len = a.len();
            a.get_mut(i).ok_or_else(|| {
                format!("`{name}` has {}, so [{i}] is out of range", crate::units::count(len as u64, "entry"))
            })?
        }
        (Value::Array(_), None) if !rest.is_empty() => {
            return Err(format!("`{name}` is a list: give an index, e.g. {name}[0].{}", rest[0].name))
        }
        (v, None) => v,
        (_, Some(i)) => return Err(format!("`{name}` is not a list, so it has no entry [{i}]")),
    };
    if rest.is_empty() {
        let mut new = to_value(value);
        *new.decor_mut() = target.decor().clone();
        *target = new;
        return Ok(());
    }
    let Value::InlineTable(t) = target else {
        return Err(format!("`{name}` is a single value, so it has no key `{}` (in {path})", rest[0].name));
    };
    let (first, more) = rest.split_first().expect("not empty");
    if more.is_empty() && first.index.is_none() {
        let mut new = to_value(value);
        if let Some(old) = t.get(first.name) {
            *new.decor_mut() = old.decor().clone();
        } else {
            new.decor_mut().set_prefix(" ");
        }
        t.insert(first.name, new);
        return Ok(());
    }
    if !t.contains_key(first.name) {
        return Err(format!("`{}` is not in the scenario's `{name}`", first.name));
    }
    let inner = t.get_mut(first.name).expect("checked above");
    set_in_value(inner, first.name, first.index, more, value, path)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn apply(text: &str, path: &str, v: Literal) -> Result<String, String> {
        let mut doc: DocumentMut = text.parse().unwrap();
        set(&mut doc, path, &v)?;
        Ok(doc.to_string())
    }

    #[test]
    fn sets_tables_inline_tables_and_indexed_entries() {
        let text = "[access]\nturnaround = \"2 us\" # gap\n\n[nodes]\ntraffic = { rate = \"400/s\", payload = \"16 B\" }\n\n[[node]]\nname = \"a\"\n";
        let out = apply(text, "access.turnaround", Literal::Text("5 us".into())).unwrap();
        assert!(out.contains("turnaround = \"5 us\" # gap\n"), "{out}");
        let out = apply(text, "nodes.traffic.rate", Literal::Text("1k/s".into())).unwrap();
        assert!(out.contains("rate = \"1k/s\""), "{out}");
        let out = apply(text, "node[0].position", Literal::Text("1 m".into())).unwrap();
        assert!(out.contains("position = \"1 m\""), "{out}");
        let out = apply(text, "seed", Literal::Int(9)).unwrap();
        assert!(out.starts_with("seed = 9\n"), "{out}");
        assert_eq!(out.lines().filter(|l| l.contains("turnaround")).count(), 1);
    }

    #[test]
    fn explains_paths_that_do_not_fit() {
        let text = "[[node]]\nname = \"a\"\n[frame]\nbit_rate = \"1 Mbit/s\"\n";
        assert!(apply(text, "node.position", Literal::Int(1)).unwrap_err().contains("give an index"));
        assert!(apply(text, "node[3].position", Literal::Int(1)).unwrap_err().contains("out of range"));
        assert!(apply(text, "frame.bit_rate.x", Literal::Int(1)).unwrap_err().contains("single value"));
        assert!(apply(text, "frame[0].x", Literal::Int(1)).unwrap_err().contains("not a list"));
    }
}
