"""The commented starter reval.toml written by `reval init`, rendered from the declared keys."""
from __future__ import annotations

import textwrap
from typing import Any

from reval.config_keys import STARTER_WIDTH, Key, comment_line, declared_keys, toml_value
from reval.data.config import SECTIONS, Section
from reval.errors import UserError

_HEAD = """\
# reval project configuration. One folder = one revaluation: this file, the database
# (reval.duckdb) and the exports. Paths are relative to this folder.
#
# Values that reval produces are estimates for review by a qualified assessor.
# Assessment level, caps, exemptions, notices and appeals follow local law: the office
# must set the [assessment] rules to match it.
#
# Lines starting with # are comments: a commented key shows its default or an example;
# remove the # to set it. Every key is listed in the README's table of config keys.
"""

_TAIL = """\
# reval review flags possible sales chasing where sold and unsold parcels' value changes differ:
# Mann-Whitney U p < 0.01 and medians more than 0.05 apart (common practice; see the IAAO
# Standard on Ratio Studies on sales chasing).
"""


def starter_config(name: str) -> str:
    """The starter config text for a jurisdiction called `name` (any text: it is written as a TOML string)."""
    if any(0xD800 <= ord(ch) <= 0xDFFF for ch in name):   # bytes that were not UTF-8, as Python passes them on
        raise UserError("The jurisdiction name is not valid text (is the terminal's encoding UTF-8?); "
                        "give it as plain text.")
    parts = [_HEAD] + [_section(s, {"jurisdiction.name": name}) for s in SECTIONS] + [_TAIL]
    return "\n".join(parts)


def _comment(text: str) -> list[str]:
    return ["# " + line for line in textwrap.wrap(text, STARTER_WIDTH - 2)] if text else []


def _section(section: Section, overrides: dict[str, Any]) -> str:
    keys = declared_keys(section.cls)
    lines = _comment(section.intro)
    if section.array:
        lines += [f"#   {k.name:<8} {k.spec.doc}" for k in keys]
        for example in section.examples:
            lines += ["", f"[[{section.name}]]"] + [f"{name} = {toml_value(value)}" for name, value in example.items()]
        return "\n".join(lines) + "\n"
    lines.append(f"[{section.name}]")
    lines += [_key_line(k, overrides.get(f"{section.name}.{k.name}")) for k in keys if k.spec.starter is None]
    for k in keys:
        if k.spec.starter is not None:
            lines += [""] + k.spec.starter()
    return "\n".join(lines) + "\n"


def _key_line(key: Key, override: Any) -> str:
    """`key = value  # doc`, commented out unless the key is declared active."""
    value = override if override is not None else key.spec.example if key.spec.example is not None else key.default
    text = f"{key.name} = {toml_value(value)}"
    return comment_line(text if key.spec.active else "# " + text, key.spec.doc)
