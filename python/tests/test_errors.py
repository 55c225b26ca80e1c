"""Bad input raises EventfenceError with the command line's message: file
(or table), row and field; bad settings name the flag."""

import pandas as pd
import pytest

import eventfence
from conftest import CALENDARS, DEMO


def test_a_bad_row_names_table_row_and_field():
    df = pd.DataFrame(
        {
            "opened_at": ["2024-01-02 10:00", "2024-01-02 10:00"],
            "closed_at": ["2024-01-02 11:00", "2024-01-02 11:00"],
            "instrument": ["EURUSD", "EURUSD"],
            "pnl": ["5", "abc"],
        }
    )
    with pytest.raises(eventfence.EventfenceError) as e:
        eventfence.analyze(df, CALENDARS, placebo=0, bootstrap=0)
    assert "trades table row 2: pnl: 'abc' is not a number" in str(e.value)


def test_a_bad_file_row_reads_as_on_the_command_line(tmp_path):
    p = tmp_path / "bad.csv"
    p.write_text("opened_at,closed_at,instrument,pnl\n2024-01-02 10:00,2024-01-02 11:00,EURUSD,x\n")
    with pytest.raises(eventfence.EventfenceError) as e:
        eventfence.analyze(str(p), CALENDARS)
    assert f"{p} row 1: pnl: 'x' is not a number" in str(e.value)


def test_missing_file_and_unknown_setting():
    with pytest.raises(eventfence.EventfenceError, match="demo/nothing.csv"):
        eventfence.analyze("demo/nothing.csv", CALENDARS)
    with pytest.raises(eventfence.EventfenceError, match="--no-such-flag"):
        eventfence.analyze("demo/trades.csv", CALENDARS, no_such_flag=1)
    with pytest.raises(eventfence.EventfenceError, match="--rule"):
        eventfence.analyze("demo/trades.csv", CALENDARS, rule="sometimes", **DEMO)


def test_flags_whose_output_python_replaces_are_refused():
    with pytest.raises(eventfence.EventfenceError, match="json="):
        eventfence.analyze("demo/trades.csv", CALENDARS, json=True)
    with pytest.raises(eventfence.EventfenceError, match="format="):
        eventfence.schedule("calendars/demo-usd.ics", currencies="USD", next=7, format="ics")
    with pytest.raises(eventfence.EventfenceError, match="format="):
        eventfence.rank("demo/trades.csv", CALENDARS, format="jsonl")


def test_something_that_is_no_table():
    with pytest.raises(TypeError, match="neither a path nor a table"):
        eventfence.analyze(42, CALENDARS)


def test_rank_without_runs():
    df = pd.read_csv("demo/trades.csv").drop(columns="run")
    with pytest.raises(eventfence.EventfenceError, match="no runs"):
        eventfence.rank(df, CALENDARS, **DEMO)
