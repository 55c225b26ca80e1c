//! The command-line spelling of the library's choice enums: each gets a
//! `clap::ValueEnum` here, so the layers below never depend on clap.
//! Written as a macro rather than `#[derive]` on the types themselves
//! because the derive would put clap into `import/`, `engine/` and
//! `analysis/`.

use crate::analysis::rank::{Compared, RankBy};
use crate::analysis::scenarios::Sizing;
use crate::engine::exposure::ExposureRule;
use crate::engine::relevance::Unmapped;
use crate::import::table::TableFormat;
use crate::import::zones::LocalPolicy;
use crate::render::term::Colour;
use clap::builder::PossibleValue;

/// `impl clap::ValueEnum` from a list of `Variant => "name"` with an
/// optional `: "help"` each.
macro_rules! value_enum {
    ($ty:ident { $($variant:ident => $name:literal $(: $help:literal)?),+ $(,)? }) => {
        impl clap::ValueEnum for $ty {
            fn value_variants<'a>() -> &'a [Self] {
                &[$($ty::$variant),+]
            }
            fn to_possible_value(&self) -> Option<PossibleValue> {
                Some(match self {
                    $($ty::$variant => PossibleValue::new($name)$(.help($help))?),+
                })
            }
        }
    };
}

value_enum!(Colour {
    Auto => "auto": "On a terminal, unless NO_COLOR is set",
    Always => "always": "Always, even into a pipe or with NO_COLOR set",
    Never => "never": "Never",
});

value_enum!(TableFormat {
    Csv => "csv",
    Parquet => "parquet",
});

value_enum!(Unmapped {
    Error => "error": "Stop and list them",
    All => "all": "Treat them as exposed to every currency in the calendar",
    None => "none": "Treat them as exposed to no release",
});

value_enum!(LocalPolicy {
    Error => "error": "Refuse: the row is rejected naming the time",
    Earlier => "earlier": "Take the earlier of the two candidate instants",
    Later => "later": "Take the later of the two candidate instants",
    Rfc5545 => "rfc5545": "RFC 5545 §3.3.5: overlap → first occurrence; gap → the offset in force before the gap (used for iCalendar input)",
});

value_enum!(ExposureRule {
    Overlap => "overlap": "The holding period overlaps the window: open ≤ t + post and close ≥ t − pre",
    Held => "held": "Open at the release instant: open ≤ t ≤ close",
    Entered => "entered": "Opened inside the window: t − pre ≤ open ≤ t + post",
});

value_enum!(Sizing {
    Fixed => "fixed": "Sum P/L as given",
    Compounding => "compounding": "Rebuild equity as a product of per-trade returns",
});

value_enum!(RankBy {
    Net => "net",
    ProfitFactor => "profit-factor",
    Sharpe => "sharpe",
    Sortino => "sortino",
    ReturnToDrawdown => "return-to-drawdown",
    Expectancy => "expectancy",
    TStat => "t-stat",
    MaxDrawdown => "max-drawdown",
});

value_enum!(Compared {
    Removed => "removed": "Without the exposed trades",
    Stressed => "stressed": "Exposed trades charged the stress cost (needs --stress)",
});
