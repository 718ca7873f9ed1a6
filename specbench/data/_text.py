"""Delimited text files (CSV, TSV, space-separated): dialect detection and parsing.

Detection reads the first lines only: the comment prefix (``#`` or ``%`` at the start of
a line), the delimiter (``;`` or tab when they split every line alike, then ``,``, then
``|``, then runs of spaces), the decimal mark (a comma when the delimiter is not one and
the numbers are written ``1,25``), and the header (a first line with fewer numbers than
the next; an optional second line of units).  Any of them can be given instead.

The fast path parses with ``pandas.read_csv``; without pandas, or when pandas reports a
problem, a plain-Python scanner reads the file line by line, and that scanner is what
names the bad line, column and cell in the error message.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._errors import InputError

__all__ = ["Dialect", "TextTable", "sniff", "read_text", "column_is_text", "split_unit"]

_SNIFF_BYTES = 1 << 18
_SNIFF_LINES = 200
_COMMENTS = ("#", "%")
_DELIMITERS = (";", "\t", ",", "|")  # order of preference when several fit
_DELIMITER_NAMES = {";": "';'", "\t": "tab", ",": "','", "|": "'|'", None: "spaces"}
# Cells read as missing (NaN) by both parsers.
MISSING = ("", "nan", "NaN", "NAN", "-nan", "NA", "N/A", "n/a", "null", "NULL", "None", "#N/A")
_MISSING_SET = frozenset(MISSING)
_UNIT_RE = re.compile(r"^(?P<name>.*?)\s*[\[(](?P<unit>[^\[\]()]*)[\])]\s*$")
_DECIMAL_COMMA_RE = re.compile(r"^[+-]?\d*,\d+(?:[eE][+-]?\d+)?$")
_DECIMAL_POINT_RE = re.compile(r"^[+-]?\d*\.\d+(?:[eE][+-]?\d+)?$")
# digits with signs and separators only (a number with thousands separators, a Unicode minus):
# such a cell makes its row a data row, named in an error if it does not read, never a header
_NUMBERLIKE_RE = re.compile(r"^[+\-\u2212\u2013\u2012\ufe63\uff0d]?[\d.,'\u00a0\u202f ]*\d[\d.,'\u00a0\u202f ]*$")
# a whole line that is one number written with a decimal comma, or an integer
_ONE_COMMA_NUMBER_RE = re.compile(r"^(?P<int>[+-]?\d+)(?:,(?P<frac>\d+))?(?P<exp>[eE][+-]?\d+)?$")


@dataclass(frozen=True)
class Dialect:
    """How a text table is written (found by :func:`sniff` or given by the user)."""

    encoding: str
    delimiter: str | None  # None: runs of whitespace
    decimal: str
    comment: str | None
    skip: int  # physical lines before the first data line
    names: tuple[str, ...] | None  # None: no header
    units: tuple[str, ...] | None
    n_fields: int

    def describe(self) -> str:
        parts = ([f"delimiter {_DELIMITER_NAMES.get(self.delimiter, repr(self.delimiter))}"]
                 if self.n_fields > 1 else ["one column"])
        if self.decimal != ".":
            parts.append(f"decimal {self.decimal!r}")
        parts.append("header" if self.names else "no header")
        if self.comment:
            parts.append(f"comments {self.comment!r}")
        return ", ".join(parts)


@dataclass
class TextTable:
    """Parsed columns of a text file: ``columns[j]`` is a float64 array or, for a column
    that is not numeric (dates), an object array of strings."""

    dialect: Dialect
    columns: list[np.ndarray]
    path: Path
    _lines: np.ndarray | None = field(default=None, repr=False)

    @property
    def n_rows(self) -> int:
        return len(self.columns[0]) if self.columns else 0

    def line(self, row: int) -> int:
        """1-based line number in the file of data row ``row``."""
        if self._lines is None:
            self._lines = _data_line_numbers(self.path, self.dialect)
        return int(self._lines[row])

    def where(self, row: int) -> str:
        return f"line {self.line(row)} of {self.path.name}"


def split_unit(name: str) -> tuple[str, str]:
    """``"accel [m/s^2]"`` -> ``("accel", "m/s^2")``; a name without a bracket keeps it."""
    m = _UNIT_RE.match(name)
    if m and m.group("name"):
        return m.group("name").strip(), m.group("unit").strip()
    return name.strip(), ""


# -- detection ------------------------------------------------------------------------
def sniff(path: Path, *, delimiter: str | None = None, decimal: str | None = None,
          comment: str | None = None, skip_rows: int = 0) -> Dialect:
    """Find the dialect of the text file at ``path`` from its first lines.

    ``skip_rows`` physical lines at the top (metadata above the header) are not read.
    A line is taken for the header (or, below it, the units) only when no cell of it is a
    number and some cell is text other than a missing-value marker (``NA``, empty):
    a first data row with empty or ``NA`` cells is data, never a header.
    """
    head = _read_head(path)
    encoding, text = _decode(head, path)
    lines = text.replace("\r\n", "\n").replace("\r", "\n").split("\n")
    if len(head) == _SNIFF_BYTES and lines:
        lines = lines[:-1]  # the last line may be cut
    if comment is None:
        starts = {ln.lstrip()[:1] for ln in lines if ln.strip()}
        comment = next((c for c in _COMMENTS if c in starts), None)
    meaningful = [(i, ln) for i, ln in enumerate(lines[:skip_rows + _SNIFF_LINES * 4])
                  if i >= skip_rows and (ln.strip() or "\t" in ln)  # "\t\t": a row of empty cells
                  and not (comment and ln.lstrip().startswith(comment))]
    if not meaningful:
        what = "is empty" if not text.strip() else "holds only comment lines"
        raise InputError(
            f"{path.name} {what}: there is no row of data to load. Check that the file "
            "was exported completely."
        )
    sample = [ln for _, ln in meaningful[:_SNIFF_LINES]]
    if decimal == "," and delimiter == ",":
        raise InputError(f"{path.name}: delimiter=',' and decimal=',' cannot both be a comma. "
                         "Give the delimiter that separates the columns (';', tab, ' ').")
    one_column = False
    if delimiter is None and decimal in (None, ","):
        one_column = _one_column_decimal_comma(sample, path.name, decimal)
        if one_column:
            delimiter, decimal = _absent_delimiter(sample), ","
    if delimiter is None:
        delimiter = _find_delimiter(sample, exclude="," if decimal == "," else "")
    elif delimiter in (" ", r"\s+"):
        delimiter = None
    rows = [_split(ln, delimiter) for ln in sample]
    if decimal is None:
        decimal = _find_decimal(rows, delimiter)
    numeric = [sum(_is_number(c, decimal) for c in r) for r in rows]
    header_rows = 0
    if _is_text_row(rows[0], decimal):
        header_rows = 1
        if (len(rows) > 2 and _is_text_row(rows[1], decimal) and numeric[2] > 0
                and len(rows[1]) == len(rows[0])):
            header_rows = 2  # a line of units below the names
    data_rows = rows[header_rows:]
    if not data_rows:
        names = ", ".join(repr(c) for c in rows[0][:6])
        raise InputError(
            f"{path.name} has a header ({names}) but no data rows. Check that the export "
            "finished; a spectrum needs samples below the header."
        )
    if max(numeric[header_rows:]) == 0:
        first = meaningful[header_rows][0] + 1
        raise InputError(
            f"{path.name} does not look like a table of numbers: line {first} reads "
            f"{_clip(sample[header_rows])!r}, with no number in it "
            f"(delimiter {_DELIMITER_NAMES.get(delimiter, repr(delimiter))}, decimal "
            f"{decimal!r}). Load a delimited file of numbers (CSV, TSV), or give "
            "delimiter=/decimal= if the detection is wrong, skip_rows= for lines of metadata "
            "above the header, or format= for a binary file."
        )
    n_fields = len(data_rows[0])
    names = units = None
    if header_rows:
        fields = rows[0]
        if len(fields) != n_fields:
            raise InputError(
                f"{path.name}: the header on line {meaningful[0][0] + 1} has {len(fields)} "
                f"fields but the first data line {meaningful[header_rows][0] + 1} has "
                f"{n_fields} (delimiter {_DELIMITER_NAMES.get(delimiter, repr(delimiter))}). "
                "Make them agree, give delimiter= if the detection is wrong, or skip_rows= "
                "to pass over lines of metadata above the header."
            )
        pairs = [split_unit(f) for f in fields]
        names = tuple(n or f"col{j}" for j, (n, _) in enumerate(pairs))
        units = tuple(u for _, u in pairs)
        if header_rows == 2:
            units = tuple(u.strip("[]() ") for u in rows[1])
    skip = meaningful[header_rows][0]
    return Dialect(encoding, delimiter, decimal, comment, skip, names, units, n_fields)


def _is_text_row(cells: list[str], decimal: str) -> bool:
    """A header or units row: no cell is a number, and some cell is text that is not a
    missing-value marker (a row of empty or ``NA`` cells is a row of missing data)."""
    return (not any(_is_number(c, decimal) or _NUMBERLIKE_RE.match(c.strip()) for c in cells)
            and any(c.strip() not in _MISSING_SET for c in cells))


def _one_column_decimal_comma(sample: list[str], name: str, decimal: str | None) -> bool:
    """True for a file of one number per line written with a decimal comma (``0,125``).

    Lines such as ``12,5`` read as one decimal-comma number or as two integers; the file is
    taken as one column when some line shows it (a header of one name, a line with no comma, an exponent, a
    fraction with a leading zero such as ``3,05``, a part ``-0``, or every integer part 0).
    A file that could be either is refused with both readings, unless decimal=',' was given.
    """
    lines = [ln.strip() for ln in sample]
    k = 0
    while (k < min(2, len(lines)) and not _ONE_COMMA_NUMBER_RE.match(lines[k])
           and any(ch.isalpha() for ch in lines[k])):
        k += 1  # a header (and units) line
    if k and len(next(csv.reader([lines[0]]))) > 1:
        return False  # a header of several comma-separated names: a comma-delimited table
    header_says = k > 0  # a header of one name over lines with one comma: one column
    lines = [ln for ln in lines[k:] if ln not in _MISSING_SET]
    matches = [_ONE_COMMA_NUMBER_RE.match(ln) for ln in lines]
    if not lines or not all(matches) or not any(m.group("frac") is not None for m in matches):
        return False
    if decimal == "," or header_says:
        return True
    ints = [m.group("int") for m in matches]
    fracs = [m.group("frac") for m in matches if m.group("frac") is not None]
    if (len(fracs) < len(matches) or any(m.group("exp") for m in matches)
            or any(len(f) > 1 and f[0] == "0" for f in fracs)
            or any(i.lstrip("+-") == "0" and i[0] in "+-" for i in ints)
            or all(i.lstrip("+-") == "0" for i in ints)):
        return True
    raise InputError(
        f"{name}: lines such as {lines[0]!r} read either as one column of numbers with a "
        "decimal comma or as two columns of integers, and nothing in the file tells which. "
        "Give decimal=',' for one column of decimal-comma numbers, or delimiter=',' for two "
        "columns."
    )


def _absent_delimiter(sample: list[str]) -> str:
    """A delimiter that occurs on no line (one-column files)."""
    return next((c for c in ("\t", ";", "|") if not any(c in ln for ln in sample)), "\t")


def _read_head(path: Path) -> bytes:
    with open(path, "rb") as f:
        head = f.read(_SNIFF_BYTES)
    if b"\x00" in head[:4096]:
        raise InputError(
            f"{path.name} is not a text file (it holds NUL bytes). For binary data pass "
            "format='raw' with dtype= and fs=, or use .npy/.wav/.h5 files."
        )
    return head


def _decode(head: bytes, path: Path) -> tuple[str, str]:
    for encoding in ("utf-8-sig", "cp1252"):
        try:
            return encoding, head.decode(encoding)
        except UnicodeDecodeError as exc:
            if encoding == "utf-8-sig" and exc.start >= len(head) - 3:
                return encoding, head[:exc.start].decode(encoding)  # a cut multibyte char
    return "latin-1", head.decode("latin-1")


def _find_delimiter(sample: list[str], exclude: str = "") -> str | None:
    for cand in _DELIMITERS:
        if cand in exclude:
            continue
        counts = [_count_fields(ln, cand) for ln in sample]
        if counts[0] > 1 and _consistent(counts):
            return cand
    counts = [len(ln.split()) for ln in sample]
    if counts[0] > 1 and _consistent(counts):
        return None
    if "," in exclude:
        return _absent_delimiter(sample)
    return ","  # one column (or ragged rows, which the parser then reports)


def _count_fields(line: str, delimiter: str) -> int:
    return len(next(csv.reader([line], delimiter=delimiter))) if delimiter in line else 1


def _consistent(counts: list[int]) -> bool:
    return sum(c == counts[0] for c in counts) >= 0.9 * len(counts)


def _split(line: str, delimiter: str | None) -> list[str]:
    if delimiter is None:
        return line.split()
    return [c.strip() for c in next(csv.reader([line], delimiter=delimiter))]


def _find_decimal(rows: list[list[str]], delimiter: str | None) -> str:
    if delimiter == ",":
        return "."
    cells = [c for r in rows[1:] for c in r]
    comma = sum(bool(_DECIMAL_COMMA_RE.match(c)) for c in cells)
    point = sum(bool(_DECIMAL_POINT_RE.match(c)) for c in cells)
    return "," if comma > point else "."


def _is_number(cell: str, decimal: str) -> bool:
    return _to_float(cell, decimal) is not None


def _to_float(cell: str, decimal: str) -> float | None:
    text = cell.strip()
    if decimal != ".":
        if "." in text:
            return None
        text = text.replace(decimal, ".")
    try:
        return float(text)
    except ValueError:
        return None


def _clip(text: str, n: int = 60) -> str:
    return text if len(text) <= n else text[:n - 3] + "..."


# -- parsing ----------------------------------------------------------------------------
def column_is_text(path: Path, dialect: Dialect, j: int) -> bool:
    """True when column ``j`` holds text (such as dates) on the first data line."""
    with open(path, encoding=dialect.encoding, newline="") as f:
        for number, line in enumerate(f):
            if number < dialect.skip or not line.strip():
                continue
            if dialect.comment and line.lstrip().startswith(dialect.comment):
                continue
            cells = _split(line.rstrip("\r\n"), dialect.delimiter)
            return j < len(cells) and not _is_number(cells[j], dialect.decimal)
    return False


def read_text(path: Path, dialect: Dialect, *, text_columns: tuple[int, ...] = ()) -> TextTable:
    """Parse the whole file into float columns (``text_columns`` may hold dates)."""
    try:
        import pandas  # noqa: F401
    except ImportError:
        reader = _scan
    else:
        reader = _read_pandas
    try:
        columns = reader(path, dialect, text_columns)
    except UnicodeDecodeError as exc:
        raise InputError(
            f"{path.name} is not valid {dialect.encoding} text at byte {exc.start} (the start "
            "of the file was). Re-save it as UTF-8, or check whether it is text at all."
        ) from None
    table = TextTable(dialect, columns, path)
    if table.n_rows == 0:
        raise InputError(f"{path.name} has a header but no data rows. Check that the export "
                         "finished; a spectrum needs samples below the header.")
    return table


def _read_pandas(path: Path, dialect: Dialect, text_columns: tuple[int, ...]) -> list[np.ndarray]:
    import pandas as pd

    kwargs = dict(
        sep=r"\s+" if dialect.delimiter is None else dialect.delimiter,
        decimal=dialect.decimal, comment=dialect.comment, header=None,
        skiprows=dialect.skip, names=list(range(dialect.n_fields)),
        na_values=list(MISSING), keep_default_na=False,
        # one column: an empty line is an empty cell (a missing sample), never dropped
        # a tab-delimited row of empty cells is a whitespace line: read every line, sort them out below
        skip_blank_lines=dialect.n_fields > 1 and dialect.delimiter != "\t",
        encoding=dialect.encoding, engine="c",
        dtype={j: str for j in text_columns} or None,
    )
    if int(pd.__version__.split(".")[0]) < 3:
        kwargs["float_precision"] = "round_trip"  # the default of pandas >= 3
    try:
        frame = pd.read_csv(path, **kwargs)
    except UnicodeDecodeError:
        raise
    except (pd.errors.ParserError, ValueError) as exc:
        _scan(path, dialect, text_columns)  # names the line and raises, as a rule
        raise InputError(f"{path.name} could not be read as a table ({dialect.describe()}): "
                         f"{exc}. Give delimiter=, decimal= or comment= if the detection "
                         "is wrong.") from exc
    if ((dialect.n_fields == 1 or dialect.delimiter == "\t") and frame.shape[0]
            and bool(frame.isna().to_numpy().any())):
        return _scan(path, dialect, text_columns)  # tells empty lines from comment lines
    columns = []
    for j in range(dialect.n_fields):
        col = frame[j]
        if j in text_columns:
            columns.append(col.to_numpy(dtype=object))
        elif col.dtype.kind in "iufb":
            columns.append(col.to_numpy(dtype=np.float64))
        else:  # a cell pandas could not read as a number: find it the slow, precise way
            return _scan(path, dialect, text_columns)
    if frame.shape[0] and _has_ragged_short_rows(frame, dialect):
        return _scan(path, dialect, text_columns)
    return columns


def _has_ragged_short_rows(frame, dialect: Dialect) -> bool:
    """pandas fills a row with too few fields with NaN; the last column then holds NaN."""
    last = frame[dialect.n_fields - 1]
    return bool(last.isna().any())


def _scan(path: Path, dialect: Dialect, text_columns: tuple[int, ...]) -> list[np.ndarray]:
    """Read the file line by line; raise :class:`InputError` at the first bad line."""
    n = dialect.n_fields
    values: list[list] = [[] for _ in range(n)]
    blank_run = 0  # empty lines of a one-column file not yet known to be inside the data
    with open(path, encoding=dialect.encoding, newline="") as f:
        for number, line in enumerate(f, start=1):
            if number <= dialect.skip:
                continue
            text = line.rstrip("\r\n")
            if not text.strip() and n == 1:
                blank_run += 1
                continue
            cells_only = _delimited_empty_row(text, dialect)
            if dialect.comment and dialect.comment in text:
                text = text[:text.index(dialect.comment)]
            if not text.strip() and not cells_only:
                continue
            if blank_run:  # empty lines between samples: missing samples, kept in place
                values[0].extend([np.nan] * blank_run)
                blank_run = 0
            cells = _split(text, dialect.delimiter)
            if len(cells) != n:
                raise InputError(
                    f"{path.name}: line {number} has {len(cells)} field"
                    f"{'s' if len(cells) != 1 else ''} but the table has {n} "
                    f"({_header_text(dialect)}): {_clip(text)!r}. Repair or remove the "
                    "ragged line (a cut-off last line is a common cause)."
                )
            for j, cell in enumerate(cells):
                if j in text_columns:
                    values[j].append(cell)
                    continue
                x = _to_float(cell, dialect.decimal)
                if x is None:
                    if cell.strip() not in _MISSING_SET:
                        raise InputError(
                            f"{path.name}: line {number}, column {_column_name(dialect, j)}, "
                            f"holds {cell!r}, which is not a number (decimal mark "
                            f"{dialect.decimal!r}). Repair the cell, or choose the numeric "
                            "columns with channels=[...]." + _cell_hint(cell, dialect)
                            + _top_hint(number, dialect, cell)
                        )
                    x = np.nan
                values[j].append(x)
    return [np.asarray(v, dtype=object if j in text_columns else np.float64)
            for j, v in enumerate(values)]


_MINUS_SIGNS = {"\u2212": "U+2212 MINUS SIGN", "\u2013": "U+2013 EN DASH", "\u2012": "U+2012 FIGURE DASH",
                "\ufe63": "U+FE63 SMALL HYPHEN-MINUS", "\uff0d": "U+FF0D FULLWIDTH HYPHEN-MINUS"}
_THOUSANDS_RE = re.compile(r"^[+-]?\d{1,3}(?P<sep>[,.'\u00a0\u202f ])\d{3}(?:(?P=sep)\d{3})*(?:[.,]\d+)?$")


def _cell_hint(cell: str, dialect: Dialect) -> str:
    """What is wrong with a cell that almost reads as a number."""
    text = cell.strip()
    for sign, name in _MINUS_SIGNS.items():
        if sign in text:
            fixed = text.replace(sign, "-")
            if _to_float(fixed, dialect.decimal) is not None:
                return (f" It is written with the character {name} where a number has the ASCII minus '-' "
                        f"({fixed!r} would read); replace it in the file (spreadsheet exports often do this).")
    m = _THOUSANDS_RE.match(text)
    if m:
        sep = {"\u00a0": "no-break space", "\u202f": "narrow no-break space", " ": "space"}.get(
            m.group("sep"), repr(m.group("sep")))
        return (f" It looks like a number with the thousands separator {sep}; specbench reads no thousands "
                "separators: export the numbers without them (and give decimal= for the decimal mark).")
    return ""


def _top_hint(number: int, dialect: Dialect, cell: str) -> str:
    """Near the top of the file, text in a data cell is often metadata above the header."""
    if number - dialect.skip > 5 or not any(ch.isalpha() for ch in cell):
        return ""
    return (f" If line {number} and the lines above it are metadata or a header, pass "
            "skip_rows= (the number of lines above the header); a header row is one with no "
            "number in it.")


def _delimited_empty_row(text: str, dialect: Dialect) -> bool:
    """A tab-delimited line of only empty cells (``"\\t\\t"``): a row of missing values, not a blank line."""
    return dialect.delimiter == "\t" and dialect.n_fields > 1 and "\t" in text and not text.strip(" \t")


def _column_name(dialect: Dialect, j: int) -> str:
    if dialect.names:
        return repr(dialect.names[j])
    return f"{j + 1}"


def _header_text(dialect: Dialect) -> str:
    if dialect.names:
        return "header " + ", ".join(repr(c) for c in dialect.names[:6]) + (
            ", ..." if len(dialect.names) > 6 else "")
    return "first data line"


def _data_line_numbers(path: Path, dialect: Dialect) -> np.ndarray:
    numbers, blanks = [], []
    with open(path, encoding=dialect.encoding, newline="") as f:
        for number, line in enumerate(f, start=1):
            if number <= dialect.skip:
                continue
            text = line
            if dialect.n_fields == 1 and not text.strip():
                blanks.append(number)  # one column: an empty line inside the data is a sample
                continue
            row_of_empties = _delimited_empty_row(text.rstrip("\r\n"), dialect)
            if dialect.comment and dialect.comment in text:
                text = text[:text.index(dialect.comment)]
            if text.strip() or row_of_empties:
                numbers.extend(blanks)
                blanks = []
                numbers.append(number)
    return np.asarray(numbers, dtype=np.int64)
