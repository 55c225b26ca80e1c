#!/usr/bin/env python3
"""Expected release instants of the ICS corpus (tests/fixtures/ics-corpus),
computed by an independent RFC 5545 expander.

    pip install icalendar==7.3.2 recurring-ical-events==3.8.2 x-wr-timezone==2.0.1
    python3 tests/reference/make_ics_fixture.py

Writes tests/fixtures/ics_expected.json: {file: [[UTC instant, SUMMARY], ...]}
for every occurrence starting in 2024 (UTC). Floating times are read in UTC,
except where the file names X-WR-TIMEZONE, which x_wr_timezone.to_standard
applies (the library the calendar ecosystem uses for that property).
"""
import datetime as dt
import glob
import json
import os

import icalendar
import recurring_ical_events
import x_wr_timezone
from zoneinfo import ZoneInfo

HERE = os.path.dirname(os.path.abspath(__file__))
CORPUS = os.path.join(HERE, "..", "fixtures", "ics-corpus")
UTC = dt.timezone.utc


def instant(value):
    if isinstance(value, dt.datetime):
        if value.tzinfo is None:
            value = value.replace(tzinfo=UTC)
        return value.astimezone(UTC)
    return dt.datetime(value.year, value.month, value.day, tzinfo=UTC)


def without_unused(text):
    """The calendar without its top-level VTODO, VJOURNAL and X- components.
    The reference parser refuses a file with a broken line anywhere, even
    inside a component no expander uses; eventfence passes over them, and
    the events to expect are those of the file without them."""
    keep, skipping = [], None
    for line in text.splitlines(keepends=True):
        if skipping is None and line.startswith("BEGIN:") and line.strip()[6:] in ("VTODO", "VJOURNAL") or (skipping is None and line.startswith("BEGIN:X-")):
            skipping = line.strip()[6:]
            continue
        if skipping is not None:
            if line.strip() == "END:" + skipping:
                skipping = None
            continue
        keep.append(line)
    return "".join(keep)


out = {}
for path in sorted(glob.glob(os.path.join(CORPUS, "*.ics"))):
    text = open(path, encoding="utf-8", newline="").read()
    if os.path.basename(path).startswith("unused-"):
        text = without_unused(text)
    if os.path.basename(path) == "until-types.ics":
        # eventfence reads an UNTIL DATE under a DATE-TIME DTSTART as the end
        # of that day in DTSTART's zone (inclusive, as RFC 5545 §3.3.10 calls
        # UNTIL; documented in calendars/README.md); this expander takes
        # midnight instead. The expander checks the expansion on the RFC
        # form of that reading: 2024-03-25 23:59:59 New York in UTC.
        end = dt.datetime(2024, 3, 25, 23, 59, 59, tzinfo=ZoneInfo("America/New_York")).astimezone(UTC)
        text = text.replace("UNTIL=20240325\r\n", "UNTIL=" + end.strftime("%Y%m%dT%H%M%SZ") + "\r\n")
    cal = icalendar.Calendar.from_ical(text)
    cal = x_wr_timezone.to_standard(cal)
    events = recurring_ical_events.of(cal).between(dt.datetime(2024, 1, 1, tzinfo=UTC), dt.datetime(2025, 1, 1, tzinfo=UTC))
    rows = []
    for e in events:
        if str(e.get("STATUS", "")).upper() == "CANCELLED":
            continue
        at = instant(e["DTSTART"].dt)
        rows.append([at.strftime("%Y-%m-%dT%H:%M:%SZ"), str(e.get("SUMMARY"))])
    out[os.path.basename(path)] = sorted(rows)
with open(os.path.join(HERE, "..", "fixtures", "ics_expected.json"), "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
for k, v in out.items():
    print(k, v)
