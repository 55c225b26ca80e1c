"""Type stubs of the eventfence package (see __init__.py for the docs)."""

from os import PathLike
from typing import Any, Dict, List, Mapping, Sequence, Union

import pyarrow

__version__: str

Path = Union[str, "PathLike[str]"]
#: A path, a glob, a list of them, a pandas / polars / pyarrow table (or
#: anything with ``__arrow_c_stream__``), a list mixing both, or a dict of
#: run name -> table.
Input = Union[Path, Sequence[Any], Mapping[str, Any], Any]

class EventfenceError(ValueError):
    """Bad input or settings: the message names the file, row and field, or the flag."""

class _Result:
    summary: Dict[str, Any]
    text: str
    warnings: List[str]
    charts: Dict[str, str]
    files: Dict[str, bytes]
    def table(self, name: str) -> pyarrow.Table: ...

class Analysis(_Result):
    @property
    def trades(self) -> pyarrow.Table: ...
    @property
    def releases(self) -> pyarrow.Table: ...
    @property
    def tail(self) -> pyarrow.Table: ...
    @property
    def report_html(self) -> str: ...
    @property
    def headline(self) -> Dict[str, Any]: ...

class Ranking(_Result):
    @property
    def runs(self) -> pyarrow.Table: ...

class Tuning(_Result):
    @property
    def cells(self) -> pyarrow.Table: ...

class Schedule(_Result):
    @property
    def windows(self) -> pyarrow.Table: ...
    @property
    def csv(self) -> str: ...
    @property
    def ics(self) -> str: ...

def analyze(trades: Input, calendar: Input, **settings: Any) -> Analysis:
    """``eventfence analyze``. Example::

        a = eventfence.analyze("demo/trades.csv", "calendars/demo-usd.ics",
                               trades_tz="America/New_York+07:00", instrument_map="US500=USD")
        a.headline
    """

def rank(trades: Input, calendar: Input, **settings: Any) -> Ranking:
    """``eventfence rank``. Example::

        eventfence.rank("demo/trades.csv", "calendars/demo-usd.ics", by="sharpe").runs
    """

def tune(trades: Input, calendar: Input, **settings: Any) -> Tuning:
    """``eventfence tune``. Example::

        eventfence.tune("demo/trades.csv", "calendars/demo-usd.ics", pre="0..60/15").cells
    """

def schedule(calendar: Input, trades: Input = ..., **settings: Any) -> Schedule:
    """``eventfence schedule``. Example::

        eventfence.schedule("calendars/demo-usd.ics", currencies="USD", next=7).windows
    """

def merge_ranks(parts: Sequence[Union[Ranking, Sequence[Dict[str, Any]]]], by: str = ..., top: int = ...) -> List[Dict[str, Any]]:
    """Ranks the runs of several rank results together. Example::

        eventfence.merge_ranks([eventfence.rank(t, cal) for t in tables], by="sharpe")
    """
