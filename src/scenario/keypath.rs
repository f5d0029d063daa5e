//! Map a byte offset in a TOML document to the dotted key path there, so that
//! errors reported by the deserializer (which know only a span) can name the key.

use toml_edit::{ImDocument, Item, Table, Value};

/// The deepest key path whose key or value span contains `offset`.
pub fn key_path_at(source: &str, offset: usize) -> Option<String> {
    let Ok(doc) = ImDocument::parse(source) else {
        return line_key_path(source, offset);
    };
    let mut best = None;
    walk_table(doc.as_table(), String::new(), offset, &mut best);
    best
}

/// For text that does not parse as a whole: the last table header before
/// `offset` and the key assigned on its line.
fn line_key_path(source: &str, offset: usize) -> Option<String> {
    let before = source.get(..offset.min(source.len()))?;
    let line_start = before.rfind('\n').map(|i| i + 1).unwrap_or(0);
    let line = source[line_start..].lines().next().unwrap_or("");
    let key = line.split_once('=').map(|(k, _)| k.trim().to_owned()).filter(|k| !k.is_empty() && !k.starts_with('['));
    let table = before[..line_start].lines().rev().find_map(|l| {
        let l = l.trim();
        l.strip_prefix("[[")
            .and_then(|r| r.strip_suffix("]]"))
            .or_else(|| l.strip_prefix('[').and_then(|r| r.strip_suffix(']')))
            .map(|t| t.trim().to_owned())
    });
    match (table, key) {
        (Some(t), Some(k)) => Some(format!("{t}.{k}")),
        (None, Some(k)) => Some(k),
        (Some(t), None) => Some(t),
        (None, None) => None,
    }
}

fn contains(span: Option<std::ops::Range<usize>>, offset: usize) -> bool {
    span.is_some_and(|r| r.start <= offset && offset < r.end.max(r.start + 1))
}

fn join(prefix: &str, key: &str) -> String {
    if prefix.is_empty() {
        key.to_owned()
    } else {
        format!("{prefix}.{key}")
    }
}

fn walk_table(table: &Table, prefix: String, offset: usize, best: &mut Option<String>) {
    if contains(table.span(), offset) && !prefix.is_empty() {
        *best = Some(prefix.clone());
    }
    for (k, item) in table.iter() {
        let path = join(&prefix, k);
        let key_hit = table.key(k).is_some_and(|key| contains(key.span(), offset));
        if key_hit || contains(item.span(), offset) {
            *best = Some(path.clone());
        }
        walk_item(item, path, offset, best);
    }
}

fn walk_item(item: &Item, path: String, offset: usize, best: &mut Option<String>) {
    match item {
        Item::Table(t) => walk_table(t, path, offset, best),
        Item::ArrayOfTables(a) => {
            for (i, t) in a.iter().enumerate() {
                walk_table(t, format!("{path}[{i}]"), offset, best);
            }
        }
        Item::Value(v) => walk_value(v, path, offset, best),
        Item::None => {}
    }
}

fn walk_value(v: &Value, path: String, offset: usize, best: &mut Option<String>) {
    match v {
        Value::InlineTable(t) => {
            for (k, val) in t.iter() {
                let p = join(&path, k);
                let key_hit = t.key(k).is_some_and(|key| contains(key.span(), offset));
                if key_hit || contains(val.span(), offset) {
                    *best = Some(p.clone());
                }
                walk_value(val, p, offset, best);
            }
        }
        Value::Array(a) => {
            for (i, val) in a.iter().enumerate() {
                let p = format!("{path}[{i}]");
                if contains(val.span(), offset) {
                    *best = Some(p.clone());
                }
                walk_value(val, p, offset, best);
            }
        }
        _ => {}
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_nested_keys() {
        let src = "name = \"x\"\n[line]\nlenght = \"2 m\"\n[[node]]\nname = \"a\"\n[[node]]\nname = \"b\"\ntraffic = { rate = \"1/s\" }\n";
        let at = |needle: &str| src.find(needle).unwrap();
        assert_eq!(key_path_at(src, at("lenght")).as_deref(), Some("line.lenght"));
        assert_eq!(key_path_at(src, at("\"b\"")).as_deref(), Some("node[1].name"));
        assert_eq!(key_path_at(src, at("\"1/s\"")).as_deref(), Some("node[1].traffic.rate"));
    }
}
