"""The native module (Rust, pyo3): used through eventfence/__init__.py."""

from typing import Any, Dict, List, Optional, Sequence, Tuple

VERSION: str

class EventfenceError(ValueError): ...

def run(
    command: str,
    argv: Sequence[str],
    trades: Sequence[Tuple[str, Any]],
    calendar: Sequence[Tuple[str, Any]],
) -> Dict[str, Any]: ...
def rank_together(
    runs: Sequence[str],
    baseline: Sequence[Optional[float]],
    removed: Sequence[Optional[float]],
    by: str,
) -> Tuple[List[int], List[int]]: ...
