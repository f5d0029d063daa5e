//! Scenario files: TOML text → raw structs (serde, spans kept) → validated [`Spec`].

mod access;
pub(crate) mod check;
pub mod error;
pub mod keypath;
pub mod raw;
mod transceiver;
pub mod validate;

pub use error::ScenarioError;

use crate::spec::Spec;

/// Parse and validate scenario text. `file` names the source in errors.
pub fn parse_str(text: &str, file: &str) -> Result<Spec, ScenarioError> {
    let raw: raw::RawScenario = toml::from_str(text).map_err(|e| from_toml(e, text, file))?;
    validate::validate(&raw, file, text)
}

/// Read, parse and validate a scenario file.
pub fn load(path: &std::path::Path) -> Result<Spec, ScenarioError> {
    let file = path.display().to_string();
    let text = std::fs::read_to_string(path)
        .map_err(|e| ScenarioError::whole_file(&file, format!("cannot read the scenario: {e}")))?;
    parse_str(&text, &file)
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
