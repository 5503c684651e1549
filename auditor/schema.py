"""The published layout of the JSON the tool writes: JSON Schemas (draft 2020-12) shipped in
auditor/schemas/, one per document.

  audit   what `auditor check --json` writes and audit.json in each report folder
          (`auditor.render.to_json`)
  screen  screen.json written by `auditor screen`, of one file or of many

`validate` needs the jsonschema package, imported only when it is called (pip install
jsonschema). The version rule and the change log are in docs/output-contract.md.
"""

from __future__ import annotations

import json
from importlib import resources
from typing import Any

SCHEMA_NAMES = ("audit", "screen")
SHOWN_PROBLEMS = 5  # problems listed in a validation error
JSONSCHEMA_MISSING = "validating a document needs the jsonschema package: pip install jsonschema"


class SchemaError(ValueError):
    """A document that does not follow its schema, an unknown schema name, or validation asked
    for without the jsonschema package."""


def _check_name(name: str) -> str:
    if name not in SCHEMA_NAMES:
        raise SchemaError(f"no schema named {name!r}; choose one of {', '.join(SCHEMA_NAMES)}")
    return name


def schema_text(name: str) -> str:
    """The shipped schema file of document `name`, as text."""
    _check_name(name)
    return (resources.files("auditor").joinpath("schemas", f"{name}.schema.json")
            .read_text(encoding="utf-8"))


def load_schema(name: str) -> dict[str, Any]:
    """The schema of document `name` as a dict."""
    return json.loads(schema_text(name))


def inline_refs(schema: dict[str, Any]) -> dict[str, Any]:
    """The schema with every local reference ("#/$defs/NAME") replaced by the definition itself:
    the same rules, checked faster (no reference lookups while validating). The shipped schemas
    do not refer to themselves recursively; a reference beside other keywords keeps them, as
    `allOf` with the definition."""
    defs = schema.get("$defs", {})

    def resolve(node):
        if isinstance(node, list):
            return [resolve(x) for x in node]
        if not isinstance(node, dict):
            return node
        out = {k: resolve(v) for k, v in node.items() if k != "$defs"}
        target = out.pop("$ref", None)
        if target is None:
            return out
        prefix = "#/$defs/"
        if not target.startswith(prefix) or target[len(prefix):] not in defs:
            raise SchemaError(f"unsupported reference {target!r} in a schema")
        found = resolve(defs[target[len(prefix):]])
        annotations = {k: v for k, v in out.items() if k in ("description", "title")}
        rules = {k: v for k, v in out.items() if k not in annotations}
        return {**found, **annotations} if not rules else {"allOf": [found], **out}

    return {**resolve(schema), "$defs": defs}


def validator(name: str, fast: bool = False):
    """A jsonschema Draft202012Validator of document `name` (build it once and reuse it: making
    one reads and checks the schema). `fast`: of the schema with its references inlined
    (`inline_refs`), which validates the same documents in less time."""
    try:
        from jsonschema import Draft202012Validator
    except ImportError:
        raise SchemaError(JSONSCHEMA_MISSING) from None
    schema = load_schema(name)
    Draft202012Validator.check_schema(schema)
    return Draft202012Validator(inline_refs(schema) if fast else schema)


def problems(document: Any, checker) -> list[str]:
    """Every way `document` breaks the schema of `checker` (a validator), as 'path: message'
    lines in document order; empty when it follows the schema."""
    found = [_closest(e) for e in checker.iter_errors(document)]
    found.sort(key=lambda e: [str(p) for p in e.absolute_path])
    return [f"{_path(e.absolute_path)}: {_short(e.message)}" for e in found]


def _closest(error):
    """The specific error inside an anyOf/oneOf one (e.g. an object or null): of the branches
    whose type fits the value, the deepest failure."""
    while error.context:
        fitting = [e for e in error.context if e.validator != "type"] or list(error.context)
        error = max(fitting, key=lambda e: len(e.absolute_path))
    return error


def _short(message: str, limit: int = 200) -> str:
    return message if len(message) <= limit else message[:limit - 5] + " ..."


def _path(parts) -> str:
    out = "$"
    for part in parts:
        out += f"[{part}]" if isinstance(part, int) else f".{part}"
    return out


def check(document: Any, name: str, checker) -> None:
    """Raise SchemaError listing the first problems when `document` breaks the schema of
    `checker`; `name` names the document in the message."""
    found = problems(document, checker)
    if found:
        shown = "; ".join(found[:SHOWN_PROBLEMS])
        more = f" (and {len(found) - SHOWN_PROBLEMS} more)" if len(found) > SHOWN_PROBLEMS else ""
        raise SchemaError(f"the {name} document does not follow its schema"
                          f" ({len(found)} problem(s)): {shown}{more}")


def validate(document: dict, name: str) -> None:
    """Check `document` against the schema of `name` ("audit" or "screen"); a SchemaError lists
    the first problems, each as its path in the document and a message."""
    check(document, name, validator(_check_name(name)))
