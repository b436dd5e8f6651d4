"""Dotted key paths into a protocol mapping (``bodies[*].mass_kg``, ``timing.hold_s``) and protocol
copies with changed values, so a notebook (or a survey) can vary a protocol without touching disk."""

from __future__ import annotations

import functools
import re
from typing import Any, Mapping

import numpy as np

from gqsim.errors import ProtocolError
from gqsim.protocol.reader import Protocol, parse_protocol

__all__ = ["split_path", "set_path", "get_path", "with_values"]


_TOKEN = re.compile(r"([A-Za-z_][A-Za-z0-9_]*)|\[(\d+|\*)\]")


def split_path(path: str) -> list:
    """``"bodies[*].mass_kg"`` -> ``["bodies", "*", "mass_kg"]`` (ints for list indices)."""
    return list(_split_path(path))


@functools.lru_cache(maxsize=256)
def _split_path(path: str) -> tuple:
    tokens: list = []
    for part in path.split("."):
        matched, first = 0, True
        for m in _TOKEN.finditer(part):
            name, index = m.groups()
            if m.start() != matched or (first and name is None):
                break
            matched, first = m.end(), False
            tokens.append(name if name is not None else ("*" if index == "*" else int(index)))
        if not part or matched != len(part):
            raise ProtocolError("path", path, "must look like table.key, list[2].key or list[*].key")
    return tuple(tokens)


def get_path(data: Mapping[str, Any], path: str) -> list:
    """All values addressed by ``path`` (several with ``[*]``); raises ProtocolError if absent."""
    nodes = [data]
    for token in split_path(path):
        nxt = []
        for node in nodes:
            if token == "*" and isinstance(node, (list, tuple)):
                nxt.extend(node)
            elif isinstance(token, int) and isinstance(node, (list, tuple)) and -len(node) <= token < len(node):
                nxt.append(node[token])
            elif isinstance(token, str) and token != "*" and isinstance(node, Mapping) and token in node:
                nxt.append(node[token])
            else:
                raise ProtocolError("path", path, f"has no entry {token!r} in the protocol")
        nodes = nxt
    return nodes


def set_path(data: dict, path: str, value: Any) -> None:
    """Set ``value`` at ``path`` in place; missing tables and the last key are created (the
    schema then judges them), list entries must exist."""
    tokens = split_path(path)
    parents = [data]
    for token in tokens[:-1]:
        nxt = []
        for node in parents:
            if token == "*" and isinstance(node, list):
                nxt.extend(node)
            elif isinstance(token, int) and isinstance(node, list) and -len(node) <= token < len(node):
                nxt.append(node[token])
            elif isinstance(token, str) and token != "*" and isinstance(node, dict):
                nxt.append(node.setdefault(token, {}))  # a missing table is created; the schema judges it
            else:
                raise ProtocolError("path", path, f"has no table or list {token!r} in the base protocol")
        parents = nxt
    last = tokens[-1]
    for node in parents:
        if isinstance(node, dict) and isinstance(last, str) and last != "*":
            node[last] = value
        elif isinstance(node, list) and isinstance(last, int) and -len(node) <= last < len(node):
            node[last] = value
        else:
            raise ProtocolError("path", path, "must end in a key of a table (e.g. .mass_kg)")


def _native(value: Any) -> Any:
    if isinstance(value, np.generic):
        return value.item()
    return value


def _describe(values: Mapping[str, Any]) -> str:
    return ", ".join(f"{k}={_native(v)!r}" for k, v in values.items())


def with_values(base: Protocol, values: Mapping[str, Any]) -> Protocol:
    """A copy of ``base`` with ``values`` (key path -> value) applied and validated again.

    >>> from gqsim.protocol import parse_protocol
    >>> p = with_values(base, {"bodies[*].mass_kg": 2e-14, "timing.hold_s": 1.0})  # doctest: +SKIP

    Paths look like ``table.key``, ``list[2].key`` or ``list[*].key`` (every entry); a missing
    table is created and judged by the schema. ``base`` is not modified.
    """
    data = base.to_dict()
    for path, value in values.items():
        set_path(data, path, _native(value))
    return parse_protocol(data, source=f"{base.source} with {_describe(values)}")
