"""Safe-k table files: stable bytes, a checksum against edits, and validation on reading.

The JSON Schema of the format ships in the package (``calib/schemas/safe-k-table.v3.json``) so
other tools can read a table without reading calib's code. A table carries
``checksum = "sha256:" + sha256(canonical JSON of the table without its checksum)``, where the
canonical JSON has sorted keys and no whitespace; a table edited by hand no longer matches and is
refused, as is a table of another format version.
"""

from __future__ import annotations

import functools
import hashlib
import json
from importlib import resources
from pathlib import Path

from calib import __version__
from calib.errors import InputError
from calib.keys import canonical_json

SCHEMA_FILE = "safe-k-table.v3.json"
FORMAT = "calib.safe-k"
VERSION = 3


def schema(name: str = SCHEMA_FILE) -> dict:
    """A JSON Schema shipped in ``calib/schemas`` (by default the table's, format version :data:`VERSION`)."""
    return json.loads(resources.files("calib").joinpath("schemas", name).read_text(encoding="utf-8"))


def checksum(table: dict) -> str:
    """sha256 of the canonical JSON (:func:`calib.keys.canonical_json`) of ``table`` without its ``checksum`` field."""
    body = {key: value for key, value in table.items() if key != "checksum"}
    text = canonical_json(body, allow_nan=False)
    return "sha256:" + hashlib.sha256(text.encode("utf-8")).hexdigest()


def seal(table: dict) -> dict:
    """The table with its checksum set."""
    return {**table, "checksum": checksum(table)}


def dumps(table: dict) -> str:
    """The file text of a table: indented, sorted keys, trailing newline (equal tables, equal bytes)."""
    return json.dumps(table, indent=2, sort_keys=True, allow_nan=False) + "\n"


@functools.lru_cache(maxsize=None)
def _fast_validator(name: str):
    """The schema compiled to Python by ``fastjsonschema`` (once per process): a pass/fail check that
    costs about a tenth of ``jsonschema``'s on a table, which keeps ``calib lookup`` light."""
    import fastjsonschema

    return fastjsonschema.compile(schema(name))


def schema_error(document: dict, name: str = SCHEMA_FILE) -> str:
    """The first violation of schema ``name`` as "at PATH: message", or "" when ``document`` matches.

    A document that passes the compiled check is valid; one that fails is examined again by
    ``jsonschema`` (the reference implementation) for the first violation in path order, so the
    message does not depend on which check ran first.
    """
    import fastjsonschema

    try:
        _fast_validator(name)(document)
        return ""
    except fastjsonschema.JsonSchemaException:
        pass
    import jsonschema

    errors = sorted(jsonschema.Draft202012Validator(schema(name)).iter_errors(document),
                    key=lambda error: list(error.absolute_path))
    if not errors:  # the two implementations disagree: trust the reference one
        return ""
    at = "/".join(str(part) for part in errors[0].absolute_path) or "(top level)"
    return f"at {at}: {errors[0].message}"


def validate(table: dict, where: str) -> None:
    """Raise :class:`InputError` naming ``where`` unless ``table`` matches the schema."""
    error = schema_error(table)
    if error:
        raise InputError(where, f"does not match the safe-k table schema v{VERSION} {error}",
                         "re-create it with `calib tables STORE --json FILE`")


def read_json(path: str | Path, what: str, option: str):
    """The JSON of a file that ``calib tables OPTION FILE`` writes, or :class:`InputError` naming it."""
    path = Path(path)
    fix = f"re-create it with `calib tables STORE {option} FILE`"
    if not path.is_file():
        raise InputError(str(path), f"no such {what} file", f"give the JSON written by `calib tables {option}`")
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as error:
        raise InputError(str(path), f"is not JSON ({error})", fix) from None


def read_table(path: str | Path) -> dict:
    """Read, version-check, schema-validate and checksum-verify a table file."""
    where = str(path)
    fix = "re-create it with `calib tables STORE --json FILE`"
    table = read_json(path, "table", "--json")
    if not isinstance(table, dict) or table.get("format") != FORMAT:
        raise InputError(where, f"is not a calib safe-k table (format is not {FORMAT!r})", fix)
    if table.get("format_version") != VERSION:
        raise InputError(where, f"has table format version {table.get('format_version')!r}; calib {__version__} reads "
                                f"version {VERSION}", "re-create the table with this calib version")
    validate(table, where)
    if table["checksum"] != checksum(table):
        raise InputError(where, "checksum mismatch: the table was changed after calib wrote it", fix)
    return table
