"""Reading land-cover emissivity tables (CSV).

Format::

    # comment lines start with '#', anywhere in the file
    class,emissivity,label
    10,0.95,Tree cover
    80,0.98,Permanent water bodies

The header is ``class,emissivity`` with an optional third column ``label``.
Classes are whole numbers 0..65535; emissivities lie in (0, 1].  Every problem
raises :class:`radledger.errors.InputError` with a one-line message naming the
file, the line and what to change.
"""

from __future__ import annotations

import csv
import math
import os
from pathlib import Path

from ..errors import InputError
from .paths import fetch_text

__all__ = ["EmissivityTable", "read_emissivity_table"]

#: Largest land-cover code accepted (uint16 rasters).
MAX_CLASS = 65535

_HEADERS = (("class", "emissivity"), ("class", "emissivity", "label"))


class EmissivityTable(dict):
    """A ``{class: emissivity}`` dict that also remembers labels and its file.

    Attributes
    ----------
    labels : dict of int to str
        The optional ``label`` column (empty strings where a row has none).
    source : str
        Path of the CSV file it was read from.
    """

    def __init__(self, values=(), *, labels=None, source=""):
        super().__init__(values)
        self.labels = dict(labels or {})
        self.source = str(source)


def _fail(path, line, what):
    where = f"{path}: line {line}: " if line else f"{path}: "
    return InputError(f"emissivity table {where}{what}")


def read_emissivity_table(path: str | os.PathLike) -> EmissivityTable:
    """Read a land-cover emissivity table.

    Parameters
    ----------
    path : str or path-like
        CSV file with header ``class,emissivity`` or ``class,emissivity,label``.

    Returns
    -------
    EmissivityTable
        A dict of class code (int) -> emissivity (float, [1]) with
        ``.labels`` (class -> label) and ``.source``.

    Raises
    ------
    InputError
        If the file cannot be read, has no or a wrong header, a row with the
        wrong number of fields, a class that is not a whole number in
        0..65535, an emissivity that is not a number in (0, 1], a class
        listed twice, or no rows at all.
    """
    if str(path).startswith(("http://", "https://")):
        # a table beside a config given by URL
        lines = fetch_text(str(path), what="emissivity table").lstrip("\ufeff").splitlines()
        return _parse_table(path, lines)
    path = Path(path)
    try:
        with open(path, encoding="utf-8-sig", newline="") as handle:
            lines = handle.read().splitlines()
    except FileNotFoundError:
        raise InputError(
            f"emissivity table {path}: file not found; check emissivity.table in the config"
        ) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"emissivity table {path}: cannot be read ({exc})") from None
    return _parse_table(path, lines)


def _parse_table(path, lines: list[str]) -> EmissivityTable:
    values: dict[int, float] = {}
    labels: dict[int, str] = {}
    first_seen: dict[int, int] = {}
    n_columns = None
    for number, fields in _rows(lines):
        if n_columns is None:
            header = tuple(field.strip().lower() for field in fields)
            if header not in _HEADERS:
                raise _fail(
                    path,
                    number,
                    f"header must be 'class,emissivity' or 'class,emissivity,label', "
                    f"found {','.join(fields)!r}",
                )
            n_columns = len(header)
            continue
        if len(fields) not in (2, n_columns):
            raise _fail(
                path,
                number,
                f"expected {' or '.join(sorted({'2', str(n_columns)}))} comma-separated "
                f"fields, found {len(fields)}; quote a label that contains a comma",
            )
        code_text, value_text = fields[0].strip(), fields[1].strip()
        try:
            code = int(code_text)
        except ValueError:
            raise _fail(
                path,
                number,
                f"class {code_text!r} is not a whole number; write the land-cover code, e.g. 10",
            ) from None
        if not 0 <= code <= MAX_CLASS:
            raise _fail(path, number, f"class {code} is outside 0..{MAX_CLASS}")
        try:
            value = float(value_text)
        except ValueError:
            raise _fail(
                path,
                number,
                f"emissivity {value_text!r} of class {code} is not a number; "
                f"write a fraction such as 0.97",
            ) from None
        if not (math.isfinite(value) and 0.0 < value <= 1.0):
            raise _fail(
                path,
                number,
                f"emissivity {value_text} of class {code} is outside (0, 1]; "
                f"write a fraction such as 0.97, not a percentage",
            )
        if code in values:
            raise _fail(
                path,
                number,
                f"class {code} is listed twice (first on line {first_seen[code]}); keep one row",
            )
        values[code] = value
        labels[code] = fields[2].strip() if len(fields) > 2 else ""
        first_seen[code] = number

    if n_columns is None:
        raise _fail(path, None, "no header found; the first line that is not a comment "
                    "must be 'class,emissivity' or 'class,emissivity,label'")
    if not values:
        raise _fail(path, None, "lists no classes; add rows such as '10,0.95'")
    return EmissivityTable(values, labels=labels, source=path)


def _rows(lines):
    """(line number, fields) of each non-blank, non-comment line."""
    for number, line in enumerate(lines, start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        yield number, next(csv.reader([line]))
