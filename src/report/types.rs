//! The vocabulary the reports are written in: the analysis, engine and
//! import types a report carries, re-exported here so that `render/`
//! depends on `report/` alone. Nothing is defined here; a type joins this
//! list when a report field or a renderer's argument needs it.

pub use crate::analysis::attribution::ReleaseLine;
pub use crate::analysis::evidence::{BootstrapResult, PlaceboResult};
pub use crate::analysis::metrics::Metrics;
pub use crate::analysis::rank::RunRow;
pub use crate::analysis::run::{AccountFigures, RunDistribution, RunResult};
pub use crate::analysis::scenarios::TailBasis;
pub use crate::analysis::schedule::Blackout;
pub use crate::analysis::tune::Cell;
pub use crate::engine::exposure::Exposure;
pub use crate::engine::windows::{Window, WindowSettings};
pub use crate::import::calendar::{Release, Tier};
pub use crate::import::trades::Trades;
pub use crate::import::zones::{DAY_MS, Zone, format_offset, format_utc, ms_to_naive};
