"""Protocol layer: read a protocol file, validate it against the shipped JSON schema, and say
what every key means. Nothing here builds physics."""

from gqsim.protocol.reader import (FAMILIES, SCHEMA_VERSION, Protocol, load_protocol, parse_protocol,
                                   read_schema_file, read_toml, schema_for)
from gqsim.protocol.keypaths import get_path, set_path, with_values

__all__ = ["FAMILIES", "SCHEMA_VERSION", "Protocol", "load_protocol", "parse_protocol", "read_schema_file",
           "read_toml", "schema_for", "get_path", "set_path", "with_values"]
