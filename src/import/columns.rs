//! Trades from columns already in memory: the entry point of a library
//! caller (and of the Python package) that holds its trade list as arrays
//! rather than as a file. The same checks as a file import's rows, but a
//! bad value is an error naming the column and position, not a rejection:
//! a caller's arrays are not a user's file to skip rows of.

use crate::import::trades::Trades;

/// Why columns could not become [`Trades`].
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ColumnsError {
    /// The columns do not all have the trades' length.
    #[error("column {column} has {got} values, expected {expected} (one per trade)")]
    Length {
        /// The column's name.
        column: &'static str,
        /// Its length.
        got: usize,
        /// The length of `pnl`.
        expected: usize,
    },
    /// A value that no trade can have.
    #[error("column {column}, position {index}: {message}")]
    Value {
        /// The column's name.
        column: &'static str,
        /// Position from 0.
        index: usize,
        /// What is wrong.
        message: String,
    },
}

/// One trade list as parallel columns (times in milliseconds since the
/// epoch, UTC; P/L in account currency after costs).
#[derive(Debug, Clone, Default)]
pub struct TradeColumns {
    /// Open instants.
    pub opened: Vec<i64>,
    /// Close instants (not before the open).
    pub closed: Vec<i64>,
    /// Instrument names (as the calendar's relevance map knows them).
    pub instrument: Vec<String>,
    /// P/L per trade.
    pub pnl: Vec<f64>,
    /// Run (parameter set) of each trade; `None` for a single account.
    pub run: Option<Vec<String>>,
}

impl TradeColumns {
    /// Checks the columns and builds [`Trades`]; instruments and runs are
    /// numbered in order of first appearance, as a file import does.
    pub fn into_trades(self) -> Result<Trades, ColumnsError> {
        let n = self.pnl.len();
        let check = |column: &'static str, got: usize| {
            (got == n).then_some(()).ok_or(ColumnsError::Length {
                column,
                got,
                expected: n,
            })
        };
        check("opened", self.opened.len())?;
        check("closed", self.closed.len())?;
        check("instrument", self.instrument.len())?;
        if let Some(r) = &self.run {
            check("run", r.len())?;
        }
        let bad = |column: &'static str, index: usize, message: String| ColumnsError::Value {
            column,
            index,
            message,
        };
        for i in 0..n {
            if !self.pnl[i].is_finite() {
                return Err(bad(
                    "pnl",
                    i,
                    format!("{} is not a finite amount", self.pnl[i]),
                ));
            }
            if self.closed[i] < self.opened[i] {
                return Err(bad("closed", i, "the close is before the open".into()));
            }
            if !crate::import::zones::in_accepted_years(self.opened[i])
                || !crate::import::zones::in_accepted_years(self.closed[i])
            {
                return Err(bad(
                    "opened",
                    i,
                    "a time outside the accepted years (milliseconds since 1970 expected)".into(),
                ));
            }
            if self.instrument[i].trim().is_empty() {
                return Err(bad("instrument", i, "empty".into()));
            }
        }
        let (instrument, instruments) = numbered(&self.instrument);
        let (run, runs) = match &self.run {
            Some(r) => numbered(r),
            None => (vec![0; n], Vec::new()),
        };
        Ok(Trades {
            opened: self.opened,
            closed: self.closed,
            instrument,
            instruments,
            pnl: self.pnl,
            run,
            runs,
            file: vec![0; n],
            row: (1..=n as u32).collect(),
            ..Default::default()
        })
    }
}

/// Each name's number in order of first appearance, and the names: the
/// file importer's interner.
fn numbered(names: &[String]) -> (Vec<u32>, Vec<String>) {
    use crate::import::trades::{Interner, intern, names_in_order};
    let mut map = Interner::default();
    let ids = names.iter().map(|s| intern(&mut map, s)).collect();
    (ids, names_in_order(map))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cols() -> TradeColumns {
        TradeColumns {
            opened: vec![1_700_000_000_000, 1_700_000_100_000, 1_700_000_200_000],
            closed: vec![1_700_000_050_000, 1_700_000_150_000, 1_700_000_250_000],
            instrument: vec!["EURUSD".into(), "US500".into(), "EURUSD".into()],
            pnl: vec![10.0, -4.5, 2.25],
            run: Some(vec!["b".into(), "a".into(), "b".into()]),
        }
    }

    #[test]
    fn names_are_numbered_in_order_of_first_appearance() {
        let t = cols().into_trades().unwrap();
        assert_eq!(t.instrument, vec![0, 1, 0]);
        assert_eq!(t.instruments, vec!["EURUSD", "US500"]);
        assert_eq!(t.run, vec![0, 1, 0]);
        assert_eq!(t.runs, vec!["b", "a"]);
        assert_eq!(t.row, vec![1, 2, 3]);
    }

    #[test]
    fn bad_columns_are_named() {
        let mut c = cols();
        c.closed.pop();
        assert_eq!(
            c.into_trades().unwrap_err(),
            ColumnsError::Length {
                column: "closed",
                got: 2,
                expected: 3
            }
        );
        let mut c = cols();
        c.closed[1] = c.opened[1] - 1;
        assert!(matches!(
            c.into_trades().unwrap_err(),
            ColumnsError::Value {
                column: "closed",
                index: 1,
                ..
            }
        ));
        let mut c = cols();
        c.pnl[2] = f64::NAN;
        assert!(matches!(
            c.into_trades().unwrap_err(),
            ColumnsError::Value {
                column: "pnl",
                index: 2,
                ..
            }
        ));
    }
}
