//! The error of a setting the user wrote (a flag value such as `--cap`,
//! `--window`, `--pre`, `--time-format`, `--tier-map`): the message names
//! the flag, what was given and what is accepted. Shared by the parsers of
//! every layer, which add no source of their own.

/// A flag value that cannot be read.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{0}")]
pub struct BadSetting(pub String);

impl From<String> for BadSetting {
    fn from(message: String) -> Self {
        BadSetting(message)
    }
}
