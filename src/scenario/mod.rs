//! Scenario files: TOML text → raw structs (serde, spans kept) → validated [`Spec`].

mod access;
pub(crate) mod check;
pub mod edit;
pub mod error;
pub mod keypath;
pub mod raw;
pub mod transceiver;
pub mod validate;

pub use error::ScenarioError;

use std::io::Read;

use crate::spec::Spec;

/// Parse and validate scenario text. `file` names the source in errors.
pub fn parse_str(text: &str, file: &str) -> Result<Spec, ScenarioError> {
    let raw: raw::RawScenario = toml::from_str(text).map_err(|e| from_toml(e, text, file))?;
    validate::validate(&raw, file, text)
}

/// The largest scenario file halfwire reads (4 MiB): a few thousand nodes
/// with their own tables fit many times over, and a runaway file is
/// refused before it is parsed.
pub const MAX_SCENARIO_BYTES: u64 = 4 << 20;

/// Read, parse and validate a scenario file.
pub fn load(path: &std::path::Path) -> Result<Spec, ScenarioError> {
    let file = path.display().to_string();
    parse_str(&read_text(path)?, &file)
}

/// Read a scenario file's text: a regular file (a FIFO or a device would
/// block or never end), at most [`MAX_SCENARIO_BYTES`], in UTF-8.
pub fn read_text(path: &std::path::Path) -> Result<String, ScenarioError> {
    if is_stdin(path) {
        return read_bounded(std::io::stdin().lock(), STDIN_NAME);
    }
    let file = path.display().to_string();
    let fail = |m: String| ScenarioError::whole_file(&file, m);
    let meta = std::fs::metadata(path).map_err(|e| fail(format!("cannot read the scenario: {e}")))?;
    if !meta.is_file() {
        return Err(fail("not a regular file: a scenario is read from a file (or `-` for standard input)".into()));
    }
    let f = std::fs::File::open(path).map_err(|e| fail(format!("cannot read the scenario: {e}")))?;
    read_bounded(f, &file)
}

/// How standard input (the path `-`) is named in messages.
pub const STDIN_NAME: &str = "<stdin>";

/// The path `-`: standard input.
pub fn is_stdin(path: &std::path::Path) -> bool {
    path.as_os_str() == "-"
}

/// A path as messages name it (`<stdin>` for `-`).
pub fn source_name(path: &std::path::Path) -> String {
    if is_stdin(path) {
        STDIN_NAME.to_owned()
    } else {
        path.display().to_string()
    }
}

/// Read at most [`MAX_SCENARIO_BYTES`] of scenario text from `r` (`file` names it in errors).
pub fn read_bounded(r: impl std::io::Read, file: &str) -> Result<String, ScenarioError> {
    let mut bytes = Vec::new();
    r.take(MAX_SCENARIO_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| ScenarioError::whole_file(file, format!("cannot read the scenario: {e}")))?;
    if bytes.len() as u64 > MAX_SCENARIO_BYTES {
        return Err(ScenarioError::whole_file(
            file,
            format!("the file is larger than {} MiB, the most a scenario may be", MAX_SCENARIO_BYTES >> 20),
        ));
    }
    String::from_utf8(bytes).map_err(|e| {
        ScenarioError::whole_file(
            file,
            format!("the scenario is not UTF-8 text (byte {})", e.utf8_error().valid_up_to()),
        )
    })
}

/// Values given on the command line in place of the scenario's own. They
/// are written into the scenario text before validation, so an override is
/// checked exactly as the same value in the file would be.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Overrides {
    pub seed: Option<u64>,
    /// A time with its unit, as given (`"50 ms"`).
    pub duration: Option<String>,
    /// Any key of the scenario, set to a value (`--set key=value`), in order.
    pub set: Vec<(String, edit::Literal)>,
    /// Run every period on the event path (`--no-shortcuts`; see `Spec::shortcuts`).
    pub no_shortcuts: bool,
}

impl Overrides {
    pub fn is_empty(&self) -> bool {
        self.seed.is_none() && self.duration.is_none() && self.set.is_empty()
    }
}

/// `key=value` from the command line: the value as TOML (`true`, `3`,
/// `"3.5 char"`), or else as text (`3.5 char`).
pub fn parse_assignment(arg: &str) -> Result<(String, edit::Literal), String> {
    let (key, value) = arg
        .split_once('=')
        .ok_or_else(|| format!("--set {arg:?}: write key=value, e.g. --set 'access.turnaround=\"4 char\"'"))?;
    let (key, value) = (key.trim(), value.trim());
    if key.is_empty() {
        return Err(format!("--set {arg:?}: no key before '='"));
    }
    let literal = match value.parse::<toml_edit::Value>() {
        Ok(toml_edit::Value::Boolean(b)) => edit::Literal::Bool(*b.value()),
        Ok(toml_edit::Value::Integer(i)) => edit::Literal::Int(*i.value()),
        Ok(toml_edit::Value::Float(x)) => edit::Literal::Float(*x.value()),
        Ok(toml_edit::Value::String(s)) => edit::Literal::Text(s.value().clone()),
        Ok(toml_edit::Value::Array(_) | toml_edit::Value::InlineTable(_)) => {
            edit::Literal::Toml { toml: value.to_owned() }
        }
        _ => edit::Literal::Text(value.to_owned()),
    };
    Ok((key.to_owned(), literal))
}

/// Parse and validate scenario text with command-line overrides applied.
pub fn parse_with(text: &str, file: &str, o: &Overrides) -> Result<Spec, ScenarioError> {
    let mut spec = parse_edited(text, file, o)?;
    spec.shortcuts &= !o.no_shortcuts;
    Ok(spec)
}

fn parse_edited(text: &str, file: &str, o: &Overrides) -> Result<Spec, ScenarioError> {
    if o.is_empty() {
        return parse_str(text, file);
    }
    // Text that is not TOML gets its positioned error from the plain parse.
    let Ok(mut doc) = text.parse::<toml_edit::DocumentMut>() else {
        return parse_str(text, file);
    };
    let set = |doc: &mut toml_edit::DocumentMut, key: &str, v: edit::Literal, flag: &str| {
        edit::set(doc, key, &v).map_err(|e| ScenarioError::whole_file(file, format!("{flag}: {e}")))
    };
    if let Some(seed) = o.seed {
        let s = i64::try_from(seed).map_err(|_| {
            ScenarioError::whole_file(
                file,
                format!("--seed {seed}: a seed runs from 0 to 2^63 − 1 (TOML's integer range)"),
            )
        })?;
        set(&mut doc, "seed", edit::Literal::Int(s), "--seed")?;
    }
    if let Some(d) = &o.duration {
        set(&mut doc, "duration", edit::Literal::Text(d.clone()), "--duration")?;
    }
    for (key, value) in &o.set {
        set(&mut doc, key, value.clone(), &format!("--set {key}"))?;
    }
    parse_str(&doc.to_string(), file).map_err(|mut e| {
        let from = match e.key.as_str() {
            "duration" | "warmup" if o.duration.is_some() => Some("the duration given by --duration"),
            "seed" if o.seed.is_some() => Some("the seed given by --seed"),
            _ => None,
        };
        if let Some(what) = from {
            e.message = format!("{} (with {what})", e.message);
        } else if let Some((k, _)) = o.set.iter().find(|(k, _)| e.key == *k || e.key.starts_with(&format!("{k}."))) {
            e.message = format!("{} (with the value given by --set {k})", e.message);
        }
        e
    })
}

/// Turn a TOML/serde error into a positioned error with the key path and,
/// for unknown keys or values, a "did you mean" hint.
fn from_toml(e: toml::de::Error, text: &str, file: &str) -> ScenarioError {
    let span = e.span().unwrap_or(0..0);
    let offset = span.start;
    // Errors about the top-level table are reported at offset 0.
    let whole_document = span.start == 0 && !text.trim_start().starts_with('[');
    let mut key = if whole_document { String::new() } else { keypath::key_path_at(text, offset).unwrap_or_default() };
    let msg = e.message().trim().to_owned();
    if let Some(missing) = msg.strip_prefix("missing field `").and_then(|m| m.split('`').next()) {
        key = if key.is_empty() { missing.to_owned() } else { format!("{key}.{missing}") };
        return ScenarioError::at(file, text, offset, &key, format!("missing key `{missing}`"));
    }
    if let Some((unknown, expected)) = parse_unknown_field(&msg) {
        let mut err = ScenarioError::at(file, text, offset, &key, format!("unknown key `{unknown}`"));
        let cands: Vec<&str> = expected.iter().map(String::as_str).collect();
        if let Some(m) = error::did_you_mean(&unknown, cands.iter().copied()) {
            err = err.with_hint(format!("did you mean `{m}`?"));
        } else if !cands.is_empty() {
            err = err.with_hint(format!("keys allowed here: {}", cands.join(", ")));
        }
        return err;
    }
    let msg = if msg.contains("number too large to fit in target type") {
        "this integer is too large (TOML integers are at most 9223372036854775807)".to_owned()
    } else {
        msg
    };
    let err = ScenarioError::at(file, text, offset, &key, msg.clone());
    if (msg.contains("invalid type: integer") || msg.contains("invalid type: floating point"))
        && msg.contains("expected a string")
    {
        return err.with_hint("quantities are strings with a unit, e.g. length = \"2.4 m\" or enable_time = \"7 ns\"");
    }
    err
}

/// Split serde's "unknown field `x`, expected one of `a`, `b`" (or "expected `a`").
fn parse_unknown_field(msg: &str) -> Option<(String, Vec<String>)> {
    let rest = msg.strip_prefix("unknown field `")?;
    let (name, tail) = rest.split_once('`')?;
    let expected = tail.split('`').enumerate().filter(|(i, _)| i % 2 == 1).map(|(_, s)| s.to_owned()).collect();
    Some((name.to_owned(), expected))
}
