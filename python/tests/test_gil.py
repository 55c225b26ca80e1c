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
    eventfence.analyze("demo/trades.csv", CALENDARS, placebo=999, bootstrap=2000, **DEMO)
    end = time.perf_counter()
    stop.set()
    t.join()
    assert end - start > 0.3, "the call was too short to tell"
    # With the GIL held for the whole call, the ticker would stall from
    # start to end; it must have ticked well inside the call.
    inside = [x for x in ticks if start + 0.1 < x < end - 0.1]
    assert len(inside) > 10
