"""Stage 1: read a protocol file and validate it against the schema shipped with gqsim.

A protocol is a TOML file with two top-level keys that every family shares:

``schema_version``
    integer; this release reads version 1.
``family``
    which kind of experiment the file describes; it selects the JSON schema
    ``gqsim/protocol/schemas/<family>-v<schema_version>.schema.json``.

Everything else is family specific and described by that schema. Units are SI and
are part of every key name (``mass_kg``, ``hold_s``). Unknown keys are rejected.
This module only reads and validates; it builds no physics objects.
"""

from __future__ import annotations

import copy
import json
import math
import tomllib
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from types import MappingProxyType
from typing import Any, Mapping

import jsonschema

from gqsim.errors import ProtocolError

__all__ = ["Protocol", "SCHEMA_VERSION", "FAMILIES", "FAMILY_FRAGMENTS", "load_protocol", "parse_protocol", "split_environment",
           "read_toml", "schema_for"]

SCHEMA_VERSION = 1

#: family name -> one-line description; a family's schema file lives in gqsim/protocol/schemas/.
FAMILIES: dict[str, str] = {
    "superposition": "two bodies, each in a superposition of two or more positions (branch phases)",
    "oscillators": "trapped bodies coupled through the gravitational Hessian (Gaussian dynamics)",
}


@dataclass(frozen=True, kw_only=True)
class Protocol:
    """A validated protocol: the family, the raw validated mapping and where it came from.

    ``data`` is a read-only deep copy of the file's content; later stages read it
    and turn it into frozen parameter objects.
    """

    family: str
    schema_version: int
    data: Mapping[str, Any]
    source: str = "<memory>"
    _plain: dict = field(default_factory=dict, repr=False, compare=False)

    def to_dict(self) -> dict:
        """Return a mutable deep copy of the validated content (for writing it back out)."""
        return copy.deepcopy(self._plain)


#: family -> schema fragments merged into its schema (files gqsim/protocol/schemas/<name>.fragment.json).
#: A fragment either carries ``body_properties`` (added to every ``[[bodies]]`` entry) and/or
#: ``top_level_properties`` (added as top-level tables), or is itself a table schema that becomes
#: the top-level table named by the fragment's stem (``environment-v1`` -> ``[environment]``).
FAMILY_FRAGMENTS: dict[str, tuple[str, ...]] = {
    "superposition": ("confounders-v1", "environment-v1"),
    "oscillators": ("environment-v1",),
}


def read_schema_file(name: str) -> dict:
    """A JSON schema (or fragment) shipped in gqsim/protocol/schemas/."""
    text = resources.files(__package__).joinpath("schemas").joinpath(name).read_text(encoding="utf-8")
    return json.loads(text)


def schema_for(family: str, version: int = SCHEMA_VERSION) -> dict:
    """Return the JSON schema of ``family`` at ``version`` with its fragments merged (package data)."""
    schema = read_schema_file(f"{family}-v{version}.schema.json")
    for fragment_name in FAMILY_FRAGMENTS.get(family, ()):
        fragment = read_schema_file(f"{fragment_name}.fragment.json")
        if "body_properties" in fragment or "top_level_properties" in fragment:
            schema["properties"]["bodies"]["items"]["properties"].update(fragment.get("body_properties", {}))
            schema["properties"].update(fragment.get("top_level_properties", {}))
        else:
            table = {k: v for k, v in fragment.items() if k not in ("$schema", "$id")}
            schema["properties"][fragment_name.split("-v")[0]] = table
    return schema


def read_toml(path: str | Path, what: str = "protocol file") -> dict:
    """Parse the TOML file at ``path``; a one-line ProtocolError naming ``what`` if it is
    unreadable or not UTF-8 TOML."""
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise ProtocolError(what, str(path), f"must be a readable file ({exc.strerror})") from None
    try:
        return tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise ProtocolError(what, str(path), "must be UTF-8 encoded TOML") from None
    except tomllib.TOMLDecodeError as exc:
        raise ProtocolError(what, str(path), f"must be valid TOML ({exc})") from None


def load_protocol(path: str | Path) -> Protocol:
    """Read and validate the protocol file at ``path``.

    Raises
    ------
    ProtocolError
        naming the key, the value and what is allowed, for any problem with the file.
    """
    data = read_toml(path)
    return parse_protocol(data, source=str(path))


def parse_protocol(data: Mapping[str, Any], *, source: str = "<memory>") -> Protocol:
    """Validate an already-parsed mapping (e.g. from ``tomllib``) and wrap it as a Protocol."""
    if not isinstance(data, Mapping):
        raise ProtocolError("protocol", type(data).__name__, "must be a table of keys")
    _reject_non_finite(data, "")
    version = data.get("schema_version")
    if version is None:
        raise ProtocolError("schema_version", None, f"is required; this gqsim reads schema_version = {SCHEMA_VERSION}")
    if isinstance(version, bool) or not isinstance(version, int) or version != SCHEMA_VERSION:
        raise ProtocolError("schema_version", version, f"this gqsim reads schema_version = {SCHEMA_VERSION}")
    family = data.get("family")
    if family not in FAMILIES:
        raise ProtocolError("family", family, f"must be one of {sorted(FAMILIES)}")
    schema = schema_for(family, version)
    validator = jsonschema.Draft202012Validator(schema)
    errors = sorted(validator.iter_errors(data), key=lambda e: (len(e.absolute_path), list(map(str, e.absolute_path))))
    if errors:
        raise _to_protocol_error(_most_specific(errors))
    plain = copy.deepcopy(dict(data))
    return Protocol(family=family, schema_version=version, data=_freeze(plain), source=source, _plain=plain)


def _reject_non_finite(node: Any, path: str) -> None:
    if isinstance(node, float) and not math.isfinite(node):
        raise ProtocolError(path or "protocol", node, "must be a finite number (NaN and inf are not allowed)")
    if isinstance(node, Mapping):
        for key, value in node.items():
            _reject_non_finite(value, f"{path}.{key}" if path else str(key))
    elif isinstance(node, list):
        for index, value in enumerate(node):
            _reject_non_finite(value, f"{path}[{index}]")


def _dotted(path) -> str:
    out = ""
    for part in path:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out or "protocol"


def _most_specific(errors):
    # Prefer errors inside oneOf/anyOf branches that got furthest into the document.
    best = errors[-1]
    for err in errors:
        if err.context:
            deepest = max(err.context, key=lambda e: len(e.absolute_path))
            if len(deepest.absolute_path) > len(best.absolute_path):
                best = deepest
    return best


def _to_protocol_error(err: jsonschema.ValidationError) -> ProtocolError:
    key = _dotted(err.absolute_path)
    v = err.validator
    if v == "additionalProperties":
        allowed = sorted(err.schema.get("properties", {}))
        extra = sorted(set(err.instance) - set(allowed))
        name = f"{key}.{extra[0]}" if key != "protocol" else extra[0]
        return ProtocolError(name, err.instance[extra[0]], f"unknown key; allowed keys here: {', '.join(allowed)}")
    if v == "required":
        missing = err.message.split("'")[1] if "'" in err.message else err.message
        name = f"{key}.{missing}" if key != "protocol" else missing
        return ProtocolError(name, None, "is required here")
    hint = err.schema.get("description")
    if v in ("exclusiveMinimum", "minimum", "exclusiveMaximum", "maximum"):
        word = {"exclusiveMinimum": ">", "minimum": ">=", "exclusiveMaximum": "<", "maximum": "<="}[v]
        allowed = f"must be {word} {err.validator_value}"
    elif v == "enum":
        allowed = f"must be one of {err.validator_value}"
    elif v == "type":
        allowed = f"must be of type {err.validator_value}"
    elif v in ("minItems", "maxItems"):
        allowed = f"needs {'at least' if v == 'minItems' else 'at most'} {err.validator_value} entries"
    elif v == "oneOf":
        allowed = hint or "matches none (or more than one) of the allowed forms"
    else:
        allowed = err.message
    if hint and v != "oneOf":
        allowed = f"{allowed} ({hint})"
    return ProtocolError(key, err.instance, allowed)


def _freeze(node: Any) -> Any:
    if isinstance(node, dict):
        return MappingProxyType({k: _freeze(v) for k, v in node.items()})
    if isinstance(node, list):
        return tuple(_freeze(v) for v in node)
    return node


def split_environment(data: Mapping[str, Any], *, source: str = "<memory>") -> tuple[Protocol, dict | None]:
    """Validate a protocol mapping that may carry an ``[environment]`` table.

    The environment table is validated against ``environment-v1.fragment.json``; the rest
    by the family schema. Works whether or not the family schema already includes the
    fragment. Returns the validated Protocol (without the table) and the table (or None).
    """
    plain = copy.deepcopy(dict(data))
    table = plain.pop("environment", None)
    if table is not None:
        validator = jsonschema.Draft202012Validator(read_schema_file("environment-v1.fragment.json"))
        errors = sorted(validator.iter_errors(table), key=lambda e: -len(e.absolute_path))
        if errors:
            err = _to_protocol_error(errors[0])
            key = "environment" if err.key == "protocol" else f"environment.{err.key}"
            raise ProtocolError(key, err.value, err.allowed)
    return parse_protocol(plain, source=source), table
