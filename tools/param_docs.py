"""Write (or check) the numpydoc Parameters section of every estimator from its constraint table.

    python tools/param_docs.py          # rewrite the docstrings in place
    python tools/param_docs.py --check  # exit 1 and name the classes whose section is out of date

Each field of ``cls.params()`` gets the entry ``name : <type>, default <repr>``; its
description is kept when the docstring already has one (else the field's ``help`` text),
and its last paragraph is ``Allowed: <constraint>`` (rewritten every time).  The section goes
where it is, or after the extended summary (before Notes / References / Examples).
``tests/estimators/test_param_docs.py`` checks the result against the tables.
"""

from __future__ import annotations

import argparse
import ast
import inspect
import re
import sys
import textwrap
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

WIDTH = 112  # text width inside a class docstring (8 spaces of indent, lines under 120)
HEADER = re.compile(r"^    ([A-Z][A-Za-z ]+)\n    -{3,}\n", re.M)
ENTRY = re.compile(r"^    (\w+)( : .*)?$")


def _estimators() -> list[type]:
    import specbench  # noqa: F401  (registers every estimator)
    from specbench.estimators._base import estimator_classes

    return list(estimator_classes().values())


def _sections(body: str) -> list[tuple[str, int, int]]:
    """(name, start, end) of the docstring's numpydoc sections (offsets into ``body``)."""
    heads = list(HEADER.finditer(body))
    return [(m.group(1).strip(), m.start(), heads[i + 1].start() if i + 1 < len(heads) else len(body))
            for i, m in enumerate(heads)]


def _old_descriptions(section: str) -> dict[str, list[str]]:
    out: dict[str, list[str]] = {}
    name = None
    for line in section.splitlines()[2:]:
        m = ENTRY.match(line)
        if m:
            name = m.group(1)
            out[name] = []
        elif name is not None:
            out[name].append(line)
    for lines in out.values():  # drop the generated "Allowed:" paragraph and trailing blanks
        cut = next((i for i, ln in enumerate(lines) if ln.strip().startswith("Allowed:")), len(lines))
        lines[:] = lines[:cut]
        while lines and not lines[-1].strip():
            lines.pop()
    return out


def section_for(cls: type, old: dict[str, list[str]]) -> str:
    from specbench.estimators._params import parameter_entries

    lines = ["    Parameters", "    ----------"]
    specs = cls.params()
    for name, type_line, allowed in parameter_entries(cls):
        lines.append(f"    {name} : {type_line}")
        desc = old.get(name) or textwrap.wrap(_rst(specs[name].help), WIDTH, initial_indent=" " * 8,
                                              subsequent_indent=" " * 8)
        lines += desc
        lines += textwrap.wrap(allowed, WIDTH, initial_indent=" " * 8, subsequent_indent=" " * 8)
    return "\n".join(lines) + "\n"


def _rst(text: str) -> str:
    """A help text as reStructuredText source inside a Python docstring: ``*``, backquotes, ``|``
    and a word-final ``_`` (which start inline markup) get a backslash, written doubled."""
    return re.sub(r"([*`|]|(?<=\w)_(?!\w))", r"\\\\\1", text)


def new_docstring(cls: type, body: str) -> str:
    """``body`` (the docstring's source text, indented) with its Parameters section rewritten."""
    secs = _sections(body)
    current = next((s for s in secs if s[0] == "Parameters"), None)
    old = _old_descriptions(body[current[1]:current[2]]) if current else {}
    new = section_for(cls, old)
    if current is not None:
        tail = body[current[2]:]
        if not tail.strip():
            return body[: current[1]] + new + "    "
        return body[: current[1]] + new + "\n" + tail.lstrip("\n")
    after = next((s for s in secs if s[0] not in ("Parameters",)), None)
    if after is not None:
        return body[: after[1]] + new + "\n" + body[after[1]:]
    head = body.rstrip()
    return head + "\n\n" + new + "    "


def _docstring_span(path: Path, cls: type) -> tuple[int, int]:
    """Offsets of the class docstring's text (between the triple quotes) in the file."""
    text = path.read_text(encoding="utf-8")
    tree = ast.parse(text)
    node = next(n for n in ast.walk(tree) if isinstance(n, ast.ClassDef) and n.name == cls.__name__)
    doc = node.body[0]
    if not (isinstance(doc, ast.Expr) and isinstance(doc.value, ast.Constant) and isinstance(doc.value.value, str)):
        raise SystemExit(f"{cls.__name__} has no docstring: write its summary first.")
    starts = [0]
    for line in text.splitlines(keepends=True):
        starts.append(starts[-1] + len(line))
    a = starts[doc.lineno - 1] + doc.col_offset
    b = starts[doc.end_lineno - 1] + doc.end_col_offset
    quote = text[a:a + 3]
    if quote not in ('"""', "'''"):
        raise SystemExit(f"{cls.__name__}: the docstring must be a plain triple-quoted string.")
    return a + 3, b - 3


def run(check: bool) -> int:
    stale = []
    for cls in _estimators():
        path = Path(inspect.getsourcefile(cls))
        a, b = _docstring_span(path, cls)
        text = path.read_text(encoding="utf-8")
        body = text[a:b]
        new = new_docstring(cls, body)
        if new != body:
            stale.append(f"{cls.__name__} ({path.relative_to(ROOT)})")
            if not check:
                path.write_text(text[:a] + new + text[b:], encoding="utf-8")
    if stale and check:
        print("Parameters sections out of date (run python tools/param_docs.py): " + ", ".join(stale))
        return 1
    if stale:
        print("rewrote: " + ", ".join(stale))
    return 0


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="only report out-of-date sections")
    raise SystemExit(run(parser.parse_args().check))
