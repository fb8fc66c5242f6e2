"""Reading campaign.toml's tables into values: `Reader` collects every problem with its line and
dotted key; the checks and key lists the table readers share.
"""

from __future__ import annotations

import re
from pathlib import Path

from tunnelred.common.errors import InputError, Problem, brief
from tunnelred.inputs.config.objects import LOAD_NAMES
from tunnelred.inputs.files import (
    MAX_NAMED_FILE_BYTES,
    Refusal,
    inside_campaign,
    read_regular,
)
from tunnelred.inputs.schema import names_by_table
from tunnelred.inputs.units import parse_quantity

_REQUIRED = object()
#: What a tap or balance-channel name may be: it is a CSV column's base name.
COLUMN_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_.-]*$")

POSITIVE = (lambda v: v > 0, "a positive value")
NON_NEGATIVE = (lambda v: v >= 0, "a value of zero or more")
FRACTION = (lambda v: 0 <= v <= 1, "a fraction from 0 to 1")

# kind → how to say it; kinds other than these are units.DIMENSIONS keys.
_PLAIN_KINDS = {"str": "a string", "bool": "true or false", "int": "an integer"}

#: The keys each table accepts, from the one list of campaign.toml's keys (inputs.schema);
#: [reduction.tolerances] takes the fields of Tolerances.
TABLE_KEYS = {table: names for table, names in names_by_table().items() if table != "tolerances"}


def key_lines(text: str) -> dict[str, int]:
    """Line numbers of the tables and keys of a TOML text, by dotted path (``taps[2].name``).

    tomllib keeps no positions; this light scan recovers them for error messages only.
    """
    lines: dict[str, int] = {}
    prefix = ""
    counts: dict[str, int] = {}
    header = re.compile(r"^\s*(\[\[?)\s*([^\[\]]+?)\s*\]\]?\s*(#.*)?$")
    key = re.compile(r"""^\s*("[^"]*"|'[^']*'|[A-Za-z0-9_.-]+)\s*=""")
    for number, line in enumerate(text.splitlines(), start=1):
        if m := header.match(line):
            name = ".".join(part.strip().strip("\"'") for part in m.group(2).split("."))
            if m.group(1) == "[[":
                index = counts.get(name, 0)
                counts[name] = index + 1
                name = f"{name}[{index}]"
            prefix = name
            lines.setdefault(prefix, number)
        elif m := key.match(line):
            dotted = f"{prefix}.{m.group(1).strip(chr(34) + chr(39))}".lstrip(".")
            lines.setdefault(dotted, number)
    return lines


class Reader:
    """Collects problems while campaign.toml's tables are read into dataclass fields."""

    def __init__(self, file: str, text: str):
        self.file = file
        self.problems: list[Problem] = []
        self.notices: list[Problem] = []
        self.fatal = False
        self._lines = key_lines(text)

    def line(self, path: str) -> int | None:
        while path:
            if path in self._lines:
                return self._lines[path]
            path = path.rpartition(".")[0]
        return None

    def problem(self, path: str, expected: str, found: str, hint: str = "", *, fatal=False):
        self.problems.append(Problem(self.file, self.line(path), path, expected, found, hint))
        self.fatal = self.fatal or fatal

    def notice(self, path: str, expected: str, found: str, hint: str = "") -> None:
        self.notices.append(Problem(self.file, self.line(path), path, expected, found, hint))

    def table(self, data: dict, key: str, path: str, allowed, *, required=False) -> dict:
        if key not in data:
            if required:
                self.problem(path, f"a [{path}] table", "none", f"Add [{path}].", fatal=True)
            return {}
        value = data[key]
        if not isinstance(value, dict):
            self.problem(path, f"a [{path}] table", brief(value), fatal=required)
            return {}
        self.check_keys(value, path, allowed)
        return value

    def check_keys(self, value: dict, path: str, allowed) -> None:
        for name in value:
            if name not in allowed:
                self.problem(
                    f"{path}.{name}",
                    f"a key of [{path}] ({', '.join(allowed)})",
                    brief(name),
                    "Check the spelling; docs/input-format.md lists every key.",
                )

    def get(self, table: dict, path: str, key: str, kind: str, default=_REQUIRED, check=None):
        """The value of ``key`` converted to ``kind``; the default (or None, fatally) if bad."""
        full = f"{path}.{key}"
        required = default is _REQUIRED
        if key not in table:
            if required:
                self.problem(
                    full,
                    f"{key} ({_describe(kind)})",
                    "nothing",
                    f"Add {key} to [{path}].",
                    fatal=True,
                )
                return None
            return default
        value = self.convert(table[key], kind, full, fatal=required)
        if value is None:
            return None if required else default
        if check is not None and not check[0](value):
            self.problem(full, check[1], brief(table[key]), fatal=required)
            return None if required else default
        return value

    def convert(self, raw, kind: str, path: str, *, fatal: bool):
        if kind == "str":
            ok = isinstance(raw, str)
        elif kind == "bool":
            ok = isinstance(raw, bool)
        elif kind == "int":
            ok = isinstance(raw, int) and not isinstance(raw, bool)
        else:
            try:
                return parse_quantity(raw, kind, file=self.file, key=path)
            except InputError as exc:
                for p in exc.problems:
                    self.problem(path, p.expected, p.found, p.hint, fatal=fatal)
                return None
        if not ok:
            self.problem(path, _describe(kind), brief(raw), fatal=fatal)
            return None
        return raw

    def choice(self, table: dict, path: str, key: str, choices, default):
        value = self.get(table, path, key, "str", default)
        if value not in choices:
            self.problem(
                f"{path}.{key}",
                f"one of {', '.join(map(repr, choices))}",
                brief(value),
                "docs/input-format.md lists the names.",
            )
            return default
        return value

    def numbers(self, raw, path: str, kinds, *, fatal: bool) -> tuple[float, ...] | None:
        """A list of quantities, one kind per entry."""
        if not isinstance(raw, list) or len(raw) != len(kinds):
            self.problem(path, f"a list of {len(kinds)} values", brief(raw), fatal=fatal)
            return None
        values = [
            self.convert(v, k, f"{path}[{i}]", fatal=fatal)
            for i, (v, k) in enumerate(zip(raw, kinds, strict=True))
        ]
        return None if any(v is None for v in values) else tuple(values)

    def matrix(self, raw, path: str, shape: tuple[int, int], *, fatal: bool):
        rows, cols = shape
        found_shape = _shape(raw)
        if found_shape != shape:
            self.problem(
                path,
                f"a {rows} × {cols} array of numbers",
                _shape_text(raw, found_shape),
                f"One row per load ({', '.join(LOAD_NAMES)}), one column per channel.",
                fatal=fatal,
            )
            return None
        out = []
        for i, row in enumerate(raw):
            values = self.numbers(row, f"{path}[{i}]", ["fraction"] * cols, fatal=fatal)
            if values is None:
                return None
            out.append(values)
        return tuple(out)


def _describe(kind: str) -> str:
    from tunnelred.inputs.units import DIMENSIONS

    return _PLAIN_KINDS.get(kind) or DIMENSIONS[kind][2]


def _shape(raw) -> tuple[int, int] | None:
    if not isinstance(raw, list) or not raw or not all(isinstance(r, list) for r in raw):
        return None
    widths = {len(r) for r in raw}
    return (len(raw), widths.pop()) if len(widths) == 1 else None


def _shape_text(raw, shape) -> str:
    if shape is not None:
        return f"{shape[0]} × {shape[1]}"
    if isinstance(raw, list) and all(isinstance(r, list) for r in raw):
        return f"rows of lengths {[len(r) for r in raw]}"
    return brief(raw)


def campaign_file(
    r: Reader, t: dict, path: str, key: str, root: Path, *, fatal: bool = False
) -> tuple[str, bytes] | None:
    """The relative path and bytes of the file ``key`` names, if it is a regular file inside the
    campaign folder (links followed); None, with the problem, otherwise or when not given."""
    text = r.get(t, path, key, "str", "")
    if not text:
        return None
    found = inside_campaign(root, text)  # the rules of every input file (inputs.files)
    if not isinstance(found, Refusal):
        rel, resolved = found
        found = read_regular(resolved, MAX_NAMED_FILE_BYTES, name=text)
        if not isinstance(found, Refusal):
            return rel, found
    r.problem(f"{path}.{key}", found.expected, found.found, found.hint, fatal=fatal)
    return None
