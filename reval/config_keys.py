"""Config keys declared once: type, default, bounds and a one-line doc per key, checked in one place.

A section of reval.toml is a frozen dataclass deriving from `Declared` whose fields are declared with
`setting(...)`. Building the dataclass (from reval.toml or in code) checks every field against its
annotation and bounds and raises `Invalid` naming the key; `read_table` builds a section from its TOML
table and refuses unknown or missing keys. The starter reval.toml (reval.data.starter) and the README's
table of keys (reval.data.config_doc) are rendered from the same declarations.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import functools
import math
import re
import textwrap
import types
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any, Literal, TypeVar, Union, get_args, get_origin, get_type_hints

from reval.errors import UserError


class _Required:
    def __repr__(self) -> str:
        return "REQUIRED"


REQUIRED: Any = _Required()
"""The default of a key that has none: reval.toml must give it."""


class Invalid(UserError, ValueError):
    """A value a declared key does not allow. `key` is the dotted key within the section being read
    ("alpha", "cod_max.income", "caps[0].max_increase"); readers prefix the section's own name."""

    def __init__(self, key: str, problem: str) -> None:
        self.key, self.problem = key, problem
        super().__init__(f"key '{key}': {problem}")

    def within(self, prefix: str) -> Invalid:
        """The same problem with the key named from an enclosing table."""
        return Invalid(f"{prefix}.{self.key}" if prefix else self.key, self.problem)


@dataclass(frozen=True)
class Setting:
    """What is declared about one key besides its type (the annotation) and default (the field's)."""

    doc: str
    lo: Any = None                 # lowest allowed value (numbers and dates; each element of a pair or table)
    hi: Any = None                 # highest allowed value
    lo_open: bool = False          # the bound itself is not allowed
    hi_open: bool = False
    pattern: tuple[str, str] | None = None    # text: (regular expression it must match, what that allows)
    example: Any = None            # the value the starter shows (None: the default)
    active: bool = False           # the starter writes the key as a line in force, not as a comment
    toml: str | None = None        # the key's name in reval.toml when it differs from the field's
    extends_default: bool = False  # a table given in reval.toml adds to (or replaces entries of) the default
    check: Callable[[Any, str], Any] | None = None      # reads a value the generic check cannot: (value, key)
    starter: Callable[[], list[str]] | None = None       # writes the key's starter lines (subtables)
    default_text: str | None = None                      # the default as the README shows it
    type_text: str | None = None                         # the type as the README shows it (keys with check=)
    items: type | None = None      # the declared class of each table of an array of tables (README rows)


def setting(default: Any, doc: str, **declared: Any) -> Any:
    """A declared dataclass field: `level: float = setting(1.0, "assessment level", lo=0, lo_open=True)`."""
    meta = {"setting": Setting(doc, **declared)}
    if default is REQUIRED:
        return field(metadata=meta)
    if isinstance(default, (dict, list)):
        return field(default_factory=functools.partial(type(default), default), metadata=meta)
    return field(default=default, metadata=meta)


@dataclass(frozen=True)
class Key:
    """One declared key: its name in reval.toml, the dataclass field, its type and its declaration."""

    name: str
    attribute: str
    hint: Any
    spec: Setting
    default: Any

    @property
    def required(self) -> bool:
        return self.default is REQUIRED


_KEYS: dict[type, tuple[Key, ...]] = {}


def declared_keys(cls: type) -> tuple[Key, ...]:
    """The declared keys of a settings dataclass, in declaration order."""
    if cls not in _KEYS:
        _KEYS[cls] = _declared(cls)
    return _KEYS[cls]


def _declared(cls: type) -> tuple[Key, ...]:
    hints = get_type_hints(cls)
    keys = []
    for f in dataclasses.fields(cls):
        spec = f.metadata.get("setting")
        if spec is None:
            continue
        if f.default is not dataclasses.MISSING:
            default = f.default
        elif f.default_factory is not dataclasses.MISSING:
            default = f.default_factory()
        else:
            default = REQUIRED
        keys.append(Key(spec.toml or f.name, f.name, hints[f.name], spec, default))
    return tuple(keys)


class Declared:
    """Base of every settings dataclass: checks each declared field when the dataclass is built."""

    def __post_init__(self) -> None:
        for key in declared_keys(type(self)):
            value = checked(key, getattr(self, key.attribute), key.name)
            object.__setattr__(self, key.attribute, value)
        self.check()

    def check(self) -> None:
        """Checks that involve several keys; raise Invalid naming the key to fix."""


D = TypeVar("D", bound=Declared)


def read_table(cls: type[D], raw: Any, prefix: str) -> D:
    """Build a declared section from its TOML table; every problem is an Invalid naming `prefix.key`."""
    if not isinstance(raw, dict):
        raise Invalid(prefix, f"must be a table, got {describe(raw)}")
    keys = {k.name: k for k in declared_keys(cls)}
    unknown = sorted(set(raw) - set(keys))
    if unknown:
        raise Invalid(f"{prefix}.{unknown[0]}", f"unknown key (allowed: {', '.join(keys)})")
    values: dict[str, Any] = {}
    for name, key in keys.items():
        if name in raw:
            value = raw[name]
            if key.spec.extends_default and isinstance(value, dict):
                value = {**key.default, **value}
            values[key.attribute] = value
        elif key.required:
            raise Invalid(f"{prefix}.{name}", "missing")
    try:
        return cls(**values)
    except Invalid as exc:
        raise exc.within(prefix) from None


# ---- the generic check -----------------------------------------------------------------------------------------

def checked(key: Key, value: Any, name: str) -> Any:
    """The value converted to the key's type (ints to floats, lists to tuples), or Invalid naming `name`."""
    if key.spec.check is not None:
        return key.spec.check(value, name)
    hint, optional = _unwrap_optional(key.hint)
    if value is None:
        if optional:
            return None
        raise Invalid(name, "missing")
    value = _typed(hint, value, name)
    _in_bounds(key.spec, value, name)
    return value


def _unwrap_optional(hint: Any) -> tuple[Any, bool]:
    if get_origin(hint) in (Union, types.UnionType):
        args = [a for a in get_args(hint) if a is not type(None)]
        if len(args) == 1 and len(get_args(hint)) == 2:
            return args[0], True
    return hint, False


def _typed(hint: Any, value: Any, name: str) -> Any:
    origin, args = get_origin(hint), get_args(hint)
    if origin is Literal:
        if value not in args:
            raise Invalid(name, f"must be one of {', '.join(map(toml_value, args))}, got {toml_value(value)}")
        return value
    if hint is bool:
        return _expect(isinstance(value, bool), value, hint, name)
    if hint is int:
        return _expect(isinstance(value, int) and not isinstance(value, bool), value, hint, name)
    if hint is float:
        return _number(value, name, hint)
    if hint is str:
        return _expect(isinstance(value, str), value, hint, name)
    if hint is dt.date:
        if isinstance(value, dt.datetime):
            raise Invalid(name, "expected a date without a time (YYYY-MM-DD)")
        return _expect(isinstance(value, dt.date), value, hint, name)
    if origin is tuple and args == (str, ...):
        ok = isinstance(value, (list, tuple)) and all(isinstance(v, str) for v in value)
        return tuple(_expect(ok, value, hint, name))
    if origin is tuple and args == (float, float):
        if not isinstance(value, (list, tuple)) or len(value) != 2:
            raise Invalid(name, f"expected [low, high], got {toml_value(value)}")
        low, high = _number(value[0], name, hint), _number(value[1], name, hint)
        if low > high:
            raise Invalid(name, f"expected [low, high] with low <= high, got {toml_value(value)}")
        return low, high
    if origin is Mapping and args == (str, float):
        if not isinstance(value, Mapping):
            raise Invalid(name, f"expected {type_text(hint)}, got {describe(value)}")
        entries = {}
        for entry, number in value.items():
            if not isinstance(entry, str) or not entry.strip():
                raise Invalid(name, f"entry names must be non-empty text, got {toml_value(entry)}")
            entries[entry] = _number(number, f"{name}.{entry}", hint)
        return types.MappingProxyType(entries)
    raise TypeError(f"{name}: no generic check for {hint!r}; declare it with check=")


def _expect(ok: bool, value: Any, hint: Any, name: str) -> Any:
    if not ok:
        raise Invalid(name, f"expected {type_text(hint)}, got {describe(value)}")
    return value


def _number(value: Any, name: str, hint: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise Invalid(name, f"expected {type_text(hint)}, got {describe(value)}")
    if not math.isfinite(value):
        raise Invalid(name, f"must be a finite number, got {toml_value(value)}")
    return float(value)


def _in_bounds(spec: Setting, value: Any, name: str) -> None:
    if spec.pattern is not None and not re.search(spec.pattern[0], value):
        raise Invalid(name, f"expected {spec.pattern[1]}, got {toml_value(value)}")
    if spec.lo is None and spec.hi is None:
        return
    if isinstance(value, Mapping):
        items = [(f"{name}.{k}", v) for k, v in value.items()]
    elif isinstance(value, tuple):
        items = [(name, v) for v in value]
    else:
        items = [(name, value)]
    for where, x in items:
        too_low = spec.lo is not None and (x <= spec.lo if spec.lo_open else x < spec.lo)
        too_high = spec.hi is not None and (x >= spec.hi if spec.hi_open else x > spec.hi)
        if too_low or too_high:
            each = "each end " if isinstance(value, tuple) else ""
            raise Invalid(where, f"{each}must be {bounds_text(spec)}, got {toml_value(x)}")


# ---- words and TOML text for messages, the starter and the README ------------------------------------------

def bounds_text(spec: Setting) -> str:
    """The allowed range in words: "at least 1", "between 1 and 600", "greater than 0 and less than 1"."""
    lo, hi = spec.lo, spec.hi
    if lo is not None and hi is not None and not spec.lo_open and not spec.hi_open:
        return f"between {toml_value(lo)} and {toml_value(hi)}"
    parts = []
    if lo is not None:
        parts.append(f"{'greater than' if spec.lo_open else 'at least'} {toml_value(lo)}")
    if hi is not None:
        parts.append(f"{'less than' if spec.hi_open else 'at most'} {toml_value(hi)}")
    return " and ".join(parts)


def type_text(hint: Any) -> str:
    """The type in words, as messages and the README say it."""
    hint, optional = _unwrap_optional(hint)
    origin, args = get_origin(hint), get_args(hint)
    if origin is Literal:
        return "one of " + ", ".join(map(toml_value, args))
    words = {bool: "true or false", int: "a whole number", float: "a number", str: "text",
             dt.date: "a date (YYYY-MM-DD)"}
    if hint in words:
        return words[hint]
    if origin is tuple and args == (str, ...):
        return "a list of text"
    if origin is tuple and args == (float, float):
        return "[low, high]"
    if origin is Mapping:
        return "a table of name = number"
    return "see the description"


def describe(value: Any) -> str:
    """What a TOML value is, for "expected ..., got ..." messages."""
    if isinstance(value, bool):
        kind = "true or false"
    elif isinstance(value, dt.datetime):
        kind = "a date with a time"
    else:
        kinds = {int: "a whole number", float: "a number", str: "text", dt.date: "a date", dt.time: "a time",
                 list: "a list", tuple: "a list", dict: "a table"}
        kind = next((w for t, w in kinds.items() if isinstance(value, t)), type(value).__name__)
    return f"{kind} ({toml_value(value)})" if not isinstance(value, (dict, list)) else kind


_ESCAPES = {'"': '\\"', "\\": "\\\\", "\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f", "\r": "\\r"}


def toml_string(text: str) -> str:
    """A TOML basic string for any text; control characters are escaped (TOML 1.0, "String")."""
    out = []
    for ch in text:
        code = ord(ch)
        if ch in _ESCAPES:
            out.append(_ESCAPES[ch])
        elif code < 0x20 or code == 0x7F:
            out.append(f"\\u{code:04X}")
        elif 0xD800 <= code <= 0xDFFF:
            raise ValueError(f"not valid text: it holds the lone surrogate U+{code:04X}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def toml_value(value: Any) -> str:
    """A value as TOML writes it (also used to quote values in messages)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return toml_string(value)
    if isinstance(value, float):
        return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf") if math.isinf(value) else repr(value)
    if isinstance(value, (int, dt.date)):
        return str(value) if isinstance(value, int) else value.isoformat()
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    if isinstance(value, Mapping):
        return "{ " + ", ".join(f"{k} = {toml_value(v)}" for k, v in value.items()) + " }"
    return repr(value)


COMMENT_COLUMN = 35
STARTER_WIDTH = 110


def comment_line(text: str, doc: str) -> str:
    """A starter line: `text`, then `# doc` from a fixed column (long docs continue on comment lines)."""
    if not doc:
        return text
    pad = max(COMMENT_COLUMN, len(text) + 2)
    parts = textwrap.wrap(doc, max(STARTER_WIDTH - pad - 2, 40)) or [""]
    lines = [f"{text:<{pad}}# {parts[0]}"] + [f"{'#' if text.startswith('#') else '':<{pad}}# {p}" for p in parts[1:]]
    return "\n".join(line.rstrip() for line in lines)
