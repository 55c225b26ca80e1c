//! Shared report furniture: the tool's identity and the caution every
//! output carries (SPEC §8).

use serde::Serialize;

/// The caution printed in every terminal report, summary.json and HTML page.
pub const CAUTION: &str = "Back-test figures are not forecasts. Release times here come from the calendar you supplied: check them against the publisher. Nothing here is investment advice.";

#[derive(Debug, Clone, Serialize)]
pub struct ToolInfo {
    pub name: &'static str,
    pub version: &'static str,
}

impl ToolInfo {
    pub fn current() -> Self {
        ToolInfo { name: env!("CARGO_PKG_NAME"), version: env!("CARGO_PKG_VERSION") }
    }
}
