#!/usr/bin/env python3
"""Which currency each country used on given dates, from the Unicode CLDR
territory-currency data as shipped by babel, to check eventfence's
country table (src/import/calendar/countries.rs).

    pip install babel==2.19.0
    python3 tests/reference/make_country_fixture.py

Writes tests/fixtures/country_currency.json: [country, date, [ISO 4217
codes in use that day]] (during a changeover CLDR lists the old currency and
the euro together; the table must name one of them) for every country of the table on 2010-06-01 and 2024-06-01, and for each
euro-area member on the day before its adoption and on the day itself.
"""
import json
import os
from datetime import date, timedelta

from babel.numbers import get_territory_currencies

# Countries of the table, and euro adoption days (from memory; CLDR decides).
PLAIN = "AE AR AU BR CA CH CL CN CO CZ DK GB HK HU ID IL IN IS JP KR MX MY NO NZ PH PL RO SA SE SG TH TR TW US ZA".split()
EURO = {
    "AT": date(1999, 1, 1), "BE": date(1999, 1, 1), "DE": date(1999, 1, 1), "ES": date(1999, 1, 1),
    "FI": date(1999, 1, 1), "FR": date(1999, 1, 1), "IE": date(1999, 1, 1), "IT": date(1999, 1, 1),
    "LU": date(1999, 1, 1), "NL": date(1999, 1, 1), "PT": date(1999, 1, 1), "GR": date(2001, 1, 1),
    "SI": date(2007, 1, 1), "CY": date(2008, 1, 1), "MT": date(2008, 1, 1), "SK": date(2009, 1, 1),
    "EE": date(2011, 1, 1), "LV": date(2014, 1, 1), "LT": date(2015, 1, 1), "HR": date(2023, 1, 1),
    "BG": date(2026, 1, 1),
}


def on(country, day):
    found = get_territory_currencies(country, day, tender=True)
    assert found, (country, day)
    return found


cases = []
for c in sorted(PLAIN + list(EURO) + ["EU"]):
    days = [date(2010, 6, 1), date(2024, 6, 1)]
    if c in EURO:
        days += [EURO[c] - timedelta(days=1), EURO[c]]
    for d in sorted(set(days)):
        if c == "BG" and d < date(2000, 1, 1):
            continue
        cases.append([c, d.isoformat(), on(c, d)])
out = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "fixtures", "country_currency.json")
with open(out, "w") as f:
    json.dump(cases, f, indent=0)
    f.write("\n")
print(len(cases), "cases")

# ISO 3166-1 English short names (and the common and official names
# pycountry carries from the iso-codes project) of the table's countries.
import pycountry  # pip install pycountry==26.2.16

names = []
for c in sorted(PLAIN + list(EURO)):
    entry = pycountry.countries.get(alpha_2=c)
    for attr in ("name", "common_name", "official_name"):
        value = getattr(entry, attr, None)
        if value and [value, c] not in names:
            names.append([value, c])
with open(os.path.join(os.path.dirname(out), "country_names.json"), "w") as f:
    json.dump(names, f, indent=0, ensure_ascii=False)
    f.write("\n")
print(len(names), "names")
