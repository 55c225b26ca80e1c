"""The GIL is released while the engine runs: a Python thread keeps
running during a long call."""

import threading
import time

import eventfence
from conftest import CALENDARS, DEMO


def test_other_threads_run_during_a_call():
    ticks = []
    stop = threading.Event()

    def tick():
        while not stop.is_set():
            ticks.append(time.perf_counter())
            time.sleep(0.001)

    t = threading.Thread(target=tick)
    t.start()
    start = time.perf_counter()
    # A long call (ten times the default draws: seconds even in a release
    # build), so that the ticker's 1 ms steps fall well inside it.
    eventfence.analyze("demo/trades.csv", CALENDARS, placebo=9999, bootstrap=20000, **DEMO)
    end = time.perf_counter()
    stop.set()
    t.join()
    span = end - start
    assert span > 0.2, f"the call took {span:.3f} s: too short to tell"
    # With the GIL held for the whole call, the ticker would stall from
    # start to end; it must have ticked throughout the middle of the call.
    inside = [x for x in ticks if start + 0.1 * span < x < end - 0.1 * span]
    assert len(inside) > 20, f"{len(inside)} ticks in a {span:.2f} s call"
