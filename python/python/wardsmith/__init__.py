"""Check conformal Ward identity derivations and tabulate model correlators.

The same engine as the ``wardsmith`` command line, called from Python:

- :func:`check_file` / :func:`check_text` check a ``.ward`` file (claims,
  expectations, derivations, numeric statements) and return a
  :class:`FileOutcome`: one :class:`Statement` per statement with its
  ``status`` (``"proved"``, ``"proved_away"`` — away from coincident
  points —, ``"confirmed"`` — numerically —, ``"not_proved"``,
  ``"unknown"``) and its values, as in the JSON report (``docs/report.schema.json`` in the
  repository).
- :func:`evaluate` evaluates an expression (a model correlator, an explicit
  function of the points) in the setting of a file at many configurations
  and returns a NumPy array.
- :meth:`FileOutcome.scans` gives the table of every ``scan`` as arrays.

An input error (a misspelt keyword, an undeclared name, a position off the
wall, ...) raises :class:`WardError`, whose message names the file, line and
column.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from typing import Any, Dict, Iterable, List, Mapping, Optional, Sequence, Union

import numpy as np

from . import _core

__all__ = [
    "WardError",
    "FileOutcome",
    "Statement",
    "ScanTable",
    "Record",
    "check_file",
    "check_text",
    "evaluate",
]


class WardError(ValueError):
    """An input error in a ``.ward`` file or in an expression.

    ``str(error)`` is the diagnostic as the command line prints it (file,
    line, column, the source line and what was expected); :attr:`details`
    is the same as a dictionary (``kind``, ``message``, ``file``, ``line``,
    ``column``, ...).
    """

    def __init__(self, rendered: str, details: Mapping[str, Any]):
        super().__init__(rendered)
        self.details: Dict[str, Any] = dict(details)

    @property
    def line(self) -> Optional[int]:
        """The line of the error in its file, when it has one."""
        return self.details.get("line")

    @property
    def column(self) -> Optional[int]:
        """The column of the error in its line, when it has one."""
        return self.details.get("column")


def _raise(err: _core.WardError) -> None:
    rendered, document = err.args
    details = json.loads(document).get("error", {})
    raise WardError(rendered, details) from None


class Record:
    """A part of an outcome: the JSON object's fields as attributes.

    Nested objects are records too and arrays are lists; ``record["field"]``
    and ``record.to_dict()`` work as well.
    """

    def __init__(self, fields: Mapping[str, Any]):
        self._fields = dict(fields)

    def __getattr__(self, name: str) -> Any:
        try:
            return _wrap(self._fields[name])
        except KeyError:
            raise AttributeError(name) from None

    def __getitem__(self, name: str) -> Any:
        return _wrap(self._fields[name])

    def __contains__(self, name: str) -> bool:
        return name in self._fields

    def keys(self) -> Iterable[str]:
        return self._fields.keys()

    def to_dict(self) -> Dict[str, Any]:
        return dict(self._fields)

    def __dir__(self) -> List[str]:
        return sorted(set(super().__dir__()) | set(self._fields))

    def __repr__(self) -> str:
        inner = ", ".join(f"{k}={self._fields[k]!r}" for k in list(self._fields)[:4])
        more = ", ..." if len(self._fields) > 4 else ""
        return f"Record({inner}{more})"


def _wrap(value: Any) -> Any:
    if isinstance(value, dict):
        return Record(value)
    if isinstance(value, list):
        return [_wrap(v) for v in value]
    return value


class Statement(Record):
    """One statement's outcome.

    Always present: ``line`` (in the file), ``input`` (the statement as
    written), ``kind`` (``"claim"``, ``"simplify"``, ``"expect"``,
    ``"derivation"``, ``"compare"``, ``"flux"``, ``"scan"``, ``"solve"``,
    ``"evaluate"``, ``"decompose"``, ``"classify"``, ...) and ``status``;
    the other fields depend on the kind (a derivation has ``steps``, each
    with its own ``status`` and ``slip``; a scan has ``table``).
    """

    def __repr__(self) -> str:
        return f"Statement(line={self.line}, kind={self.kind!r}, status={self.status!r})"


@dataclass
class ScanTable:
    """The table of one ``scan`` statement.

    ``parameter`` holds the scanned values (shape ``(rows,)``); ``left`` and
    ``right`` the two sides (shape ``(rows, components)``), with
    ``labels`` naming the components (``"nu=0"``; empty for a scalar);
    ``left_error``, ``right_error`` their error estimates,
    ``relative_difference`` per row and component, and ``status`` the
    statement's verdict (``"confirmed"`` when the sides agree
    at every row).
    """

    line: int
    parameter_name: str
    labels: List[str]
    parameter: np.ndarray
    left: np.ndarray
    right: np.ndarray
    left_error: np.ndarray
    right_error: np.ndarray
    relative_difference: np.ndarray
    status: str


@dataclass
class FileOutcome:
    """The outcome of checking one file.

    ``status`` is the file's overall word, ``exit_code`` what the command
    line would exit with (0 all held, 1 something not proved, 2 an input
    error — raised as :class:`WardError` here instead), ``counts`` the
    tally by status. ``text`` and ``latex`` are the reports the command
    line prints (``--latex`` gives the second); ``document`` the JSON one.
    """

    file: str
    statements: List[Statement]
    counts: Dict[str, int]
    exit_code: int
    text: str = field(repr=False)
    latex: str = field(repr=False)
    document: Dict[str, Any] = field(repr=False)

    @property
    def passed(self) -> bool:
        """True when every statement held (exit code 0)."""
        return self.exit_code == 0

    def by_line(self, line: int) -> Statement:
        """The statement that starts on ``line`` of the file."""
        for s in self.statements:
            if s.line == line:
                return s
        raise KeyError(f"no statement starts on line {line}")

    def of_kind(self, kind: str) -> List[Statement]:
        """The statements of one kind, in file order."""
        return [s for s in self.statements if s.kind == kind]

    def scans(self) -> List[ScanTable]:
        """The tables of the file's ``scan`` statements, as arrays."""
        out = []
        for s in self.of_kind("scan"):
            t = s.to_dict()
            rows = t["rows"]
            out.append(
                ScanTable(
                    line=s.line,
                    parameter_name=t["param"],
                    labels=list(t["labels"]),
                    parameter=np.array([r["x"] for r in rows], dtype=float),
                    left=np.array([r["left"] for r in rows], dtype=float),
                    right=np.array([r["right"] for r in rows], dtype=float),
                    left_error=np.array([r["left_error"] for r in rows], dtype=float),
                    right_error=np.array([r["right_error"] for r in rows], dtype=float),
                    relative_difference=np.array(
                        [r["relative_difference"] for r in rows], dtype=float
                    ),
                    status=s.status,
                )
            )
        return out


_COUNTS = ("proved", "proved_away", "confirmed", "slips_caught", "not_proved", "unknown")


def _outcome(result: Sequence[Any]) -> FileOutcome:
    document_text, text, latex, code = result
    doc = json.loads(document_text)
    return FileOutcome(
        file=doc["file"],
        statements=[Statement(item) for item in doc["items"]],
        counts={k: int(doc.get(k, 0)) for k in _COUNTS},
        exit_code=int(code),
        text=text,
        latex=latex,
        document=doc,
    )


def check_text(
    text: str,
    *,
    name: str = "<text>",
    base: Union[str, os.PathLike] = ".",
    simplify: bool = False,
    rules: Sequence[Union[str, os.PathLike]] = (),
    jobs: int = 1,
    ascii: bool = False,
) -> FileOutcome:
    """Checks the text of a ``.ward`` file.

    ``name`` is the file name reports and errors use; ``base`` the folder
    the file's rule files are read from; ``simplify=True`` prints every
    ``simplify`` statement's normal form instead of checking claims (the
    command line's ``simplify``); ``rules`` are extra rule files; ``jobs``
    threads for scans and samples. No file is written (the tables of
    ``scan ... into`` are in :meth:`FileOutcome.scans`).
    """
    try:
        result = _core.check(
            text,
            name,
            os.fspath(base),
            "simplify" if simplify else "check",
            [os.fspath(r) for r in rules],
            int(jobs),
            bool(ascii),
        )
    except _core.WardError as err:
        _raise(err)
    return _outcome(result)


def check_file(
    path: Union[str, os.PathLike],
    *,
    simplify: bool = False,
    rules: Sequence[Union[str, os.PathLike]] = (),
    jobs: int = 1,
    ascii: bool = False,
) -> FileOutcome:
    """Checks a ``.ward`` file, as ``wardsmith check PATH`` does."""
    path = os.fspath(path)
    with open(path, encoding="utf-8") as f:
        text = f.read()
    return check_text(
        text,
        name=path,
        base=os.path.dirname(path) or ".",
        simplify=simplify,
        rules=rules,
        jobs=jobs,
        ascii=ascii,
    )


def evaluate(
    setting: str,
    expression: str,
    *,
    points: Optional[Mapping[str, Any]] = None,
    values: Optional[Mapping[str, Any]] = None,
    name: str = "<setting>",
    base: Union[str, os.PathLike] = ".",
    rules: Sequence[Union[str, os.PathLike]] = (),
    jobs: int = 1,
    with_errors: bool = False,
) -> Any:
    """Evaluates ``expression`` at many configurations.

    ``setting`` is the text of a ``.ward`` file (or a path to one ending in
    ``.ward``): its declarations, ``model``, ``values`` and ``place`` lines
    are used, its statements are not checked. ``points`` maps point names
    to arrays of positions of shape ``(rows, d)`` (or ``(d,)`` for one
    position in every row; the normal coordinate last); ``values`` maps
    scalar parameters to arrays of shape ``(rows,)`` or numbers. Points and
    parameters not given keep the file's positions and values.

    Returns an array of shape ``(rows,)`` for a scalar expression and
    ``(rows, components)`` for one with free indices (components in the
    order of the command line's ``evaluate``, the first index slowest);
    with ``with_errors=True``, a tuple (values, error estimates, labels).
    """
    if setting.endswith(".ward") and "\n" not in setting and os.path.exists(setting):
        with open(setting, encoding="utf-8") as f:
            text = f.read()
        name = setting
        base = os.path.dirname(setting) or "."
    else:
        text = setting
    points = dict(points or {})
    values = dict(values or {})
    arrays_p = {k: np.asarray(v, dtype=float) for k, v in points.items()}
    arrays_v = {k: np.asarray(v, dtype=float) for k, v in values.items()}
    rows = 1
    for k, a in arrays_p.items():
        if a.ndim == 2:
            rows = max(rows, a.shape[0])
        elif a.ndim != 1:
            raise ValueError(f"positions of {k!r} must have shape (rows, d) or (d,)")
    for k, a in arrays_v.items():
        if a.ndim == 1:
            rows = max(rows, a.shape[0])
        elif a.ndim != 0:
            raise ValueError(f"values of {k!r} must have shape (rows,) or be a number")
    point_rows = []
    for k, a in arrays_p.items():
        if a.ndim == 1:
            a = np.broadcast_to(a, (rows, a.shape[0]))
        if a.shape[0] != rows:
            raise ValueError(f"{k!r} has {a.shape[0]} positions for {rows} rows")
        point_rows.append((k, a.tolist()))
    scalar_rows = []
    for k, a in arrays_v.items():
        a = np.broadcast_to(a, (rows,)) if a.ndim == 0 else a
        if a.shape[0] != rows:
            raise ValueError(f"{k!r} has {a.shape[0]} values for {rows} rows")
        scalar_rows.append((k, a.tolist()))
    try:
        labels, vals, errs = _core.evaluate(
            text,
            name,
            os.fspath(base),
            expression,
            rows,
            scalar_rows,
            point_rows,
            [os.fspath(r) for r in rules],
            int(jobs),
        )
    except _core.WardError as err:
        _raise(err)
    out = np.array(vals, dtype=float).reshape(rows, len(labels))
    err = np.array(errs, dtype=float).reshape(rows, len(labels))
    if labels == [""]:
        out, err = out[:, 0], err[:, 0]
    if with_errors:
        return out, err, labels
    return out
