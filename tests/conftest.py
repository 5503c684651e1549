"""Shared fixtures for the command-line and file-loading tests."""

from __future__ import annotations

import json
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
