"""Shared fixtures for the command-line and file-loading tests, and the check that every JSON
document the suite produces follows its published schema."""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from pathlib import Path

import pytest

from auditor.cli import main


@dataclass(frozen=True)
class CliRun:
    """What one in-process call of `auditor.cli.main` returned and printed."""

    code: int
    out: str
    err: str


def _refuse_constant(name: str):
    raise AssertionError(f"the JSON document contains the non-standard constant {name}")


@pytest.fixture
def strict_json():
    """Parse JSON text, failing on NaN, Infinity and -Infinity."""

    def parse(text: str):
        return json.loads(text, parse_constant=_refuse_constant)

    return parse


@pytest.fixture
def run_cli(capsys):
    """Call `auditor.cli.main(args)` in process and capture its exit code, stdout and stderr."""

    def run(*args) -> CliRun:
        capsys.readouterr()
        code = main([str(a) for a in args])
        out, err = capsys.readouterr()
        return CliRun(code, out, err)

    return run


@pytest.fixture
def audit_json(run_cli, strict_json):
    """Run `auditor check PATH --json - --quiet` with a small bootstrap; return the document."""

    def run(path, outcome: str, group: str, *extra, boot: int = 200) -> dict:
        res = run_cli("check", path, "--outcome", outcome, "--group", group,
                      "--boot", boot, "--json", "-", "--quiet", *extra)
        assert res.code == 0, res.err
        return strict_json(res.out)

    return run


@pytest.fixture
def write_file(tmp_path):
    """Write text (as UTF-8, line endings untouched) or bytes to tmp_path/NAME; return the path."""

    def write(name: str, content: str | bytes) -> Path:
        path = tmp_path / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
        return path

    return write


# ------------------------------------------------------------------ the output contract

SCHEMA_HOOK_VARIABLE = "AUDITOR_SCHEMA_HOOK"  # "0" turns the check off (to time its cost only)


def schema_hook_on() -> bool:
    return os.environ.get(SCHEMA_HOOK_VARIABLE, "1") != "0"


@pytest.fixture(scope="session")
def schema_checkers():
    """name -> a validator of that document's schema, each built once for the whole session
    (with its references inlined: the same rules, checked faster)."""
    from auditor.schema import validator

    built = {}

    def get(name: str):
        if name not in built:
            built[name] = validator(name, fast=True)
        return built[name]

    return get


@pytest.fixture(autouse=True)
def every_document_follows_its_schema(monkeypatch, schema_checkers):
    """Every audit document made anywhere in the suite (`AuditResult.to_dict`, through which
    `auditor.render.to_json`, `auditor check --json` and audit.json pass) and every screen.json
    written (checked after `auditor.screen._write_outputs` returns) is validated against its
    schema: a field added, renamed or retyped without its schema entry fails the test that made
    the document. Documents made in worker processes are checked where the parent reads them
    (screen.json), not inside the workers."""
    if not schema_hook_on():
        yield
        return
    from auditor import results, screen
    from auditor.schema import check

    to_dict = results.AuditResult.to_dict
    write_outputs = screen._write_outputs

    def checked_to_dict(self):
        document = to_dict(self)
        check(document, "audit", schema_checkers("audit"))
        return document

    def checked_write_outputs(*args, **kwargs):
        files = write_outputs(*args, **kwargs)
        document = json.loads(files.json.read_text(encoding="utf-8"))
        check(document, "screen", schema_checkers("screen"))
        return files

    monkeypatch.setattr(results.AuditResult, "to_dict", checked_to_dict)
    monkeypatch.setattr(screen, "_write_outputs", checked_write_outputs)
    yield
