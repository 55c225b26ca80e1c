//! The one import log of the trade and calendar importers: every input row
//! that is not imported is counted under its reason and, up to
//! [`KEEP_REJECTIONS`], kept with its file, row, field and message.

use serde::Serialize;
use std::collections::BTreeMap;

/// How many rejections a log keeps verbatim (all are counted).
pub const KEEP_REJECTIONS: usize = 1000;

/// One rejected input row (a trade row, a calendar row or event).
#[derive(Debug, Clone, Serialize)]
pub struct Rejection {
    /// The file, as given.
    pub file: String,
    /// Data row counting from 1 without the header (CSV, Parquet), or the
    /// physical line of the problem (ICS).
    pub row: usize,
    /// The column or property at fault.
    pub field: String,
    /// Reason code (snake case), the key of `rejected_by_reason`.
    pub reason: &'static str,
    /// What a trader can act on.
    pub message: String,
}

/// Rows rejected, counted by reason, the first ones kept. Serialised flat
/// into the importers' summaries.
#[derive(Debug, Clone, Default, Serialize)]
pub struct ImportLog {
    /// Rows (or events) not imported.
    pub rows_rejected: usize,
    /// Reason code → rows.
    pub rejected_by_reason: BTreeMap<String, usize>,
    /// The first rejections (at most [`KEEP_REJECTIONS`]), in input order.
    pub rejections: Vec<Rejection>,
}

impl ImportLog {
    /// Counts one rejection and keeps it while there is room.
    pub fn reject(&mut self, r: Rejection) {
        self.count(r.reason, 1);
        if self.rejections.len() < KEEP_REJECTIONS {
            self.rejections.push(r);
        }
    }

    /// Counts `n` rejections for `reason` whose details are kept elsewhere
    /// (or not at all).
    pub fn count(&mut self, reason: &str, n: usize) {
        self.rows_rejected += n;
        *self
            .rejected_by_reason
            .entry(reason.to_string())
            .or_default() += n;
    }

    /// Whether there is still room for a kept rejection.
    pub fn has_room(&self) -> bool {
        self.rejections.len() < KEEP_REJECTIONS
    }
}

/// Why one row failed, before its file and row are attached: the shape
/// every importer's row check returns.
#[derive(Debug, Clone, PartialEq)]
pub struct RowError {
    /// The column or property at fault.
    pub field: std::borrow::Cow<'static, str>,
    /// Reason code (snake case).
    pub reason: &'static str,
    /// What a trader can act on.
    pub message: String,
}

impl RowError {
    /// A row error on a column named in the code.
    pub fn new(field: &'static str, reason: &'static str, message: String) -> RowError {
        RowError {
            field: field.into(),
            reason,
            message,
        }
    }

    /// The rejection of row `row` of `file`.
    pub fn at(self, file: &str, row: usize) -> Rejection {
        Rejection {
            file: file.to_string(),
            row,
            field: self.field.into_owned(),
            reason: self.reason,
            message: self.message,
        }
    }
}
