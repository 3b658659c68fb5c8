//! Opening a saved design: the link a design JSON file carries.

use crate::error::InputError;
use crate::link::{self, FORMAT_VERSION};

/// The link a design JSON file describes: its `link` field (a query string or a whole URL), as
/// written by `rolloff design --format json` and the page's export.
///
/// A file whose `format` is newer than this build, or that has no `link`, is refused with a
/// message; nothing of it is opened.
///
/// # Errors
/// `json` when the text is not JSON, is from a newer format, or carries no link.
pub fn link_of_json(text: &str) -> Result<String, InputError> {
    use serde_json::Value;
    let value: Value = serde_json::from_str(text)
        .map_err(|e| InputError::new("json", format!("the file is not JSON: {e}")))?;
    if let Some(format) = value.get("format") {
        match format.as_u64() {
            Some(f) if f <= u64::from(FORMAT_VERSION) => {}
            Some(f) => {
                return Err(InputError::new(
                    "json",
                    format!(
                        "the file has format {f}, written by a newer Rolloff; this version reads \
                         format {FORMAT_VERSION} and older"
                    ),
                ))
            }
            None => {
                return Err(InputError::new(
                    "json",
                    format!("the file's “format” is {format}; a whole number is expected"),
                ))
            }
        }
    }
    match value.get("link").and_then(Value::as_str) {
        Some(link) => Ok(link::query_of(link).to_string()),
        None => Err(InputError::new(
            "json",
            "the file has no “link”; open a design saved by Rolloff (its JSON carries the link)",
        )),
    }
}
