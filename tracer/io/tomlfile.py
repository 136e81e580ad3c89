"""Reading TOML files users write, with one-line errors that name the file and the key."""

from __future__ import annotations

import math
import tomllib
from pathlib import Path
from typing import Any

from ..errors import UserError

_MISSING = object()


def read_toml(path: str | Path) -> dict:
    """Parse a TOML file; a missing or malformed file is a :class:`UserError`."""
    path = Path(path)
    try:
        with open(path, "rb") as handle:
            return tomllib.load(handle)
    except FileNotFoundError:
        raise UserError(f"{path}: file not found")
    except IsADirectoryError:
        raise UserError(f"{path}: is a folder, expected a TOML file")
    except tomllib.TOMLDecodeError as error:
        raise UserError(f"{path}: not valid TOML: {error}")
    except UnicodeDecodeError:
        raise UserError(f"{path}: not valid TOML: not UTF-8 text")
    except OSError as error:
        raise UserError(f"{path}: cannot read: {error.strerror}")


class Table:
    """One TOML table being validated: typed reads, then :meth:`finish` rejects unknown keys.

    Parameters
    ----------
    data : dict
        The parsed table.
    file : Path
        The file it came from, for messages.
    section : str
        Dotted name of the table (``""`` for the top level), for messages.
    """

    def __init__(self, data: Any, file: Path | str, section: str = ""):
        self.file = Path(file)
        self.section = section
        if not isinstance(data, dict):
            raise UserError(f"{self.file}: [{section}] must be a table, got {_kind(data)}")
        self.data = data
        self.used: set[str] = set()

    def where(self, key: str) -> str:
        name = f"{self.section}.{key}" if self.section else key
        return f"{self.file}: {name}"

    def error(self, key: str, problem: str) -> UserError:
        return UserError(f"{self.where(key)}: {problem}")

    def has(self, key: str) -> bool:
        return key in self.data

    def raw(self, key: str, default: Any = _MISSING) -> Any:
        self.used.add(key)
        if key not in self.data:
            if default is _MISSING:
                raise self.error(key, "missing")
            return default
        return self.data[key]

    def number(self, key, default=_MISSING, *, low=None, high=None, low_open=False, integer=False):
        value = self.raw(key, default)
        if value is default and key not in self.data:
            return value
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.error(key, f"expected a number, got {_kind(value)}")
        if integer and not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            else:
                raise self.error(key, f"expected a whole number, got {value!r}")
        if not math.isfinite(value):
            raise self.error(key, f"must be finite, got {value!r}")
        if low is not None and (value < low or (low_open and value == low)):
            bound = ">" if low_open else ">="
            raise self.error(key, f"must be {bound} {low}, got {value!r}")
        if high is not None and value > high:
            raise self.error(key, f"must be <= {high}, got {value!r}")
        return int(value) if integer else float(value)

    def integer(self, key, default=_MISSING, *, low=None, high=None):
        return self.number(key, default, low=low, high=high, integer=True)

    def string(self, key, default=_MISSING, *, choices=None):
        value = self.raw(key, default)
        if value is default and key not in self.data:
            return value
        if not isinstance(value, str):
            raise self.error(key, f"expected a string, got {_kind(value)}")
        if choices is not None and value not in choices:
            raise self.error(key, f"must be one of {', '.join(map(repr, choices))}, got {value!r}")
        return value

    def boolean(self, key, default=_MISSING):
        value = self.raw(key, default)
        if value is default and key not in self.data:
            return value
        if not isinstance(value, bool):
            raise self.error(key, f"expected true or false, got {_kind(value)}")
        return value

    def vector(self, key, default=_MISSING, *, length=3, low=None, high=None):
        value = self.raw(key, default)
        if value is default and key not in self.data:
            return value
        return check_vector(value, self.where(key), length=length, low=low, high=high)

    def table(self, key, default=_MISSING) -> "Table | Any":
        value = self.raw(key, default)
        if value is default and key not in self.data:
            return value
        name = f"{self.section}.{key}" if self.section else key
        return Table(value, self.file, name)

    def finish(self) -> None:
        unknown = [key for key in self.data if key not in self.used]
        if unknown:
            where = f"[{self.section}]" if self.section else "top level"
            raise UserError(f"{self.file}: unknown key {unknown[0]!r} in {where}")


def check_vector(value, where: str, *, length=3, low=None, high=None) -> tuple[float, ...]:
    """Check a list of ``length`` finite numbers within [low, high]."""
    if not isinstance(value, (list, tuple)) or len(value) != length:
        raise UserError(f"{where}: expected a list of {length} numbers, got {value!r}")
    out = []
    for item in value:
        if isinstance(item, bool) or not isinstance(item, (int, float)) or not math.isfinite(item):
            raise UserError(f"{where}: expected a list of {length} finite numbers, got {value!r}")
        if (low is not None and item < low) or (high is not None and item > high):
            bounds = f"must be >= {low}" if high is None else (f"must be <= {high}" if low is None
                                                                   else f"must lie in [{low}, {high}]")
            raise UserError(f"{where}: entries {bounds}, got {value!r}")
        out.append(float(item))
    return tuple(out)


def _kind(value: Any) -> str:
    if isinstance(value, bool):
        return f"a boolean ({str(value).lower()})"
    if isinstance(value, (int, float)):
        return f"a number ({value!r})"
    if isinstance(value, str):
        return f"a string ({value!r})"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "a table"
    return type(value).__name__
