//! Errors that reach the user: every one names the field (link key) at fault and what it accepts.

use std::fmt;

/// A problem with one piece of user input.
///
/// `key` is the link key (or a part reference such as `R3`) the problem belongs to, so the page can
/// put the message beside the right field and the command line can name it on stderr.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct InputError {
    /// The link key, or `set:R3` style part reference, that the message belongs to.
    pub key: String,
    /// A sentence that says what is wrong and what is accepted.
    pub message: String,
}

impl InputError {
    /// Builds an error for `key` with a message.
    pub fn new(key: impl Into<String>, message: impl Into<String>) -> Self {
        Self {
            key: key.into(),
            message: message.into(),
        }
    }
}

impl fmt::Display for InputError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.key, self.message)
    }
}

impl std::error::Error for InputError {}
