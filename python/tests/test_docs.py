"""The worked examples people copy: the README's "From Python" block prints
the demo's headline equal to the CLI's summary, and every entry point's
docstring example runs as written."""

import contextlib
import io
import re
import textwrap

import eventfence
from conftest import CALENDARS, DEMO_FLAGS, REPO, cli_json


def test_readme_example_prints_the_cli_headline():
    readme = (REPO / "README.md").read_text()
    section = readme.split("## From Python", 1)[1]
    code = re.search(r"```python\n(.*?)```", section, re.S).group(1)
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        exec(compile(code, "README.md", "exec"), {})
    want = cli_json(
        "analyze", "--trades", "demo/trades.csv", "--calendar", *CALENDARS, *DEMO_FLAGS, "--json"
    )["headline"]
    assert out.getvalue().strip() == str(want)


def examples(obj):
    doc = obj.__doc__ or ""
    block = re.split(r"Example[^\n]*::\n", doc, maxsplit=1)[1]
    code = textwrap.dedent(block.strip("\n").split("\n\n", 1)[0])
    assert "eventfence." in code, doc
    return code


def test_docstring_examples_run():
    for f in (eventfence.analyze, eventfence.rank, eventfence.tune, eventfence.schedule,
              eventfence.merge_ranks):
        code = examples(f)
        scope = {"eventfence": eventfence}
        exec(compile(code, f"{f.__name__} docstring", "exec"), scope)
    exec(compile(examples(eventfence), "module docstring", "exec"), {"eventfence": eventfence})
