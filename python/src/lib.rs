//! The Python package's native module (`eventfence._native`): one entry,
//! [`run`], that parses a subcommand's flags with the command line's own
//! definitions, reads any in-memory tables through the Arrow C stream
//! interface, runs the subcommand with the GIL released, and hands its
//! outputs back. The Python layer (`eventfence/__init__.py`) turns keyword
//! arguments into flags and the outputs into dicts and Arrow tables.

use clap::{Args, FromArgMatches};
use eventfence::cmd::outcome::Outcome;
use eventfence::cmd::{analyze, rank, schedule, tune};
use eventfence::import::table::Source;
use polars::prelude::DataFrame;
use polars_arrow::array::{Array, StructArray};
use polars_arrow::ffi::{ArrowArrayStream, ArrowArrayStreamReader};
use pyo3::create_exception;
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;
use pyo3::types::{PyBytes, PyCapsule, PyDict};

create_exception!(
    _native,
    EventfenceError,
    PyValueError,
    "Bad input or settings: the message names the file, row and field, or the flag."
);

/// Parses `argv` (flags only, as on the command line after the subcommand)
/// into the subcommand's arguments.
fn parse<A: Args + FromArgMatches>(command: &'static str, argv: &[String]) -> PyResult<A> {
    let cmd = A::augment_args(clap::Command::new(command).no_binary_name(true));
    let matches = cmd
        .try_get_matches_from(argv)
        .map_err(|e| EventfenceError::new_err(e.render().to_string()))?;
    A::from_arg_matches(&matches).map_err(|e| EventfenceError::new_err(e.to_string()))
}

/// Reads an Arrow C stream (a PyCapsule named `arrow_array_stream`, as
/// `__arrow_c_stream__` returns) into one polars frame.
fn frame_of(capsule: &Bound<'_, PyCapsule>) -> PyResult<DataFrame> {
    let ptr = capsule
        .pointer_checked(Some(c"arrow_array_stream"))?
        .cast::<ArrowArrayStream>()
        .as_ptr();
    // SAFETY: the capsule holds a valid ArrowArrayStream (the protocol's
    // contract); it is moved out and an empty (released) stream left in its
    // place, so the capsule's destructor does not release it a second time.
    let stream = unsafe { std::ptr::replace(ptr, ArrowArrayStream::empty()) };
    let arrow_err = |e: polars::prelude::PolarsError| {
        EventfenceError::new_err(format!("the table could not be read as Arrow: {e}"))
    };
    let mut reader =
        unsafe { ArrowArrayStreamReader::try_new(Box::new(stream)) }.map_err(arrow_err)?;
    let dtype = reader.field().dtype().clone();
    let mut frame: Option<DataFrame> = None;
    // SAFETY: the reader's stream is the valid stream moved out above.
    while let Some(batch) = unsafe { reader.next() } {
        let batch = batch.map_err(arrow_err)?;
        let df = struct_frame(batch.as_ref())?;
        match &mut frame {
            None => frame = Some(df),
            Some(f) => {
                f.vstack_mut_owned(df).map_err(arrow_err)?;
            }
        }
    }
    match frame {
        Some(f) => Ok(f),
        None => struct_frame(&StructArray::new_empty(dtype)),
    }
}

/// One record batch (a struct array) as a frame.
fn struct_frame(batch: &dyn Array) -> PyResult<DataFrame> {
    let s = batch
        .as_any()
        .downcast_ref::<StructArray>()
        .ok_or_else(|| EventfenceError::new_err("the Arrow stream does not hold a table"))?;
    DataFrame::try_from(s.clone())
        .map_err(|e| EventfenceError::new_err(format!("the table could not be read: {e}")))
}

/// Named tables (`(name, capsule)` pairs) as sources.
fn sources(tables: &[(String, Bound<'_, PyCapsule>)]) -> PyResult<Vec<Source>> {
    tables
        .iter()
        .map(|(name, capsule)| {
            Ok(Source::Frame {
                name: name.clone(),
                frame: frame_of(capsule)?,
            })
        })
        .collect()
}

/// Runs subcommand `command` (`analyze`, `rank`, `tune` or `schedule`) on
/// the flags `argv`, with `trades` / `calendar` tables read in place of (or
/// after) the files the flags name. Returns a dict: `json` (str), `text`
/// (str, the terminal table), `files` (name → bytes, as `--out` would
/// write them), `charts` (id → SVG str), `warnings` (list of str).
#[pyfunction]
#[pyo3(signature = (command, argv, trades, calendar))]
fn run<'py>(
    py: Python<'py>,
    command: &str,
    argv: Vec<String>,
    trades: Vec<(String, Bound<'py, PyCapsule>)>,
    calendar: Vec<(String, Bound<'py, PyCapsule>)>,
) -> PyResult<Bound<'py, PyDict>> {
    let (trades, calendar) = (sources(&trades)?, sources(&calendar)?);
    let outcome: anyhow::Result<Outcome> = match command {
        "analyze" => {
            let mut a: analyze::AnalyzeArgs = parse("analyze", &argv)?;
            a.input.trades.tables = trades;
            a.input.calendar.tables = calendar;
            py.detach(move || {
                let o = analyze::execute(&a, true)?;
                if let Some(dir) = &a.out {
                    o.write(dir, &a.charts)?;
                }
                Ok(o)
            })
        }
        "rank" => {
            let mut a: rank::RankArgs = parse("rank", &argv)?;
            a.input.trades.tables = trades;
            a.input.calendar.tables = calendar;
            py.detach(move || {
                let o = rank::execute(&a, true)?;
                if let Some(dir) = &a.out {
                    o.write(dir, &a.charts)?;
                }
                Ok(o)
            })
        }
        "tune" => {
            let mut a: tune::TuneArgs = parse("tune", &argv)?;
            a.input.trades.tables = trades;
            a.input.calendar.tables = calendar;
            py.detach(move || {
                let o = tune::execute(&a, true)?;
                if let Some(dir) = &a.out {
                    o.write(dir, &a.charts)?;
                }
                Ok(o)
            })
        }
        "schedule" => {
            let mut a: schedule::ScheduleArgs = parse("schedule", &argv)?;
            a.trades.tables = trades;
            a.calendar.tables = calendar;
            py.detach(move || schedule::execute(a).map(|(o, _)| o))
        }
        other => {
            return Err(EventfenceError::new_err(format!(
                "no subcommand '{other}' (analyze, rank, tune, schedule)"
            )));
        }
    };
    let outcome = outcome.map_err(|e| EventfenceError::new_err(format!("{e:#}")))?;
    to_dict(py, outcome)
}

fn to_dict<'py>(py: Python<'py>, o: Outcome) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    d.set_item("json", o.json)?;
    d.set_item("text", o.text)?;
    let files = PyDict::new(py);
    for (name, bytes) in &o.files {
        files.set_item(name, PyBytes::new(py, bytes))?;
    }
    d.set_item("files", files)?;
    let charts = PyDict::new(py);
    for (id, svg) in o.charts {
        charts.set_item(id, svg)?;
    }
    d.set_item("charts", charts)?;
    d.set_item("warnings", o.warnings)?;
    Ok(d)
}

/// Ranks runs figured apart (for example one partition of a distributed
/// run each) together, by the rule `rank` uses: 1 = best by `by`, ties and
/// undefined figures (last) in the natural order of run names. Returns the
/// ranks with every trade and without the exposed trades.
#[pyfunction]
#[pyo3(signature = (runs, baseline, removed, by))]
fn rank_together(
    runs: Vec<String>,
    baseline: Vec<Option<f64>>,
    removed: Vec<Option<f64>>,
    by: &str,
) -> PyResult<(Vec<usize>, Vec<usize>)> {
    if baseline.len() != runs.len() || removed.len() != runs.len() {
        return Err(EventfenceError::new_err(
            "runs, baseline and removed differ in length",
        ));
    }
    let by = <eventfence::RankBy as clap::ValueEnum>::from_str(by, false)
        .map_err(|e| EventfenceError::new_err(format!("by: {e}")))?;
    let names: Vec<&str> = runs.iter().map(String::as_str).collect();
    let higher = by.higher_is_better();
    Ok((
        eventfence::analysis::rank::ranks(&baseline, &names, higher),
        eventfence::analysis::rank::ranks(&removed, &names, higher),
    ))
}

/// The native half of the `eventfence` package.
#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(run, m)?)?;
    m.add_function(wrap_pyfunction!(rank_together, m)?)?;
    m.add("EventfenceError", m.py().get_type::<EventfenceError>())?;
    m.add("VERSION", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
