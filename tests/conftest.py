"""Shared helpers for the tests: run the CLI in-process, write small files.

All part keys and figures in the tests are invented.
"""
from __future__ import annotations

import json
from pathlib import Path

import pytest

from selector.cli import main

ROOT = Path(__file__).resolve().parent.parent
DEMO_LIBRARY = ROOT / "data" / "demo_library.csv"
DEMO_BRIEFS = ROOT / "demo" / "briefs"

#: a minimal valid brief (invented): ±0.1 V at 1 kHz, gain 10, ±5 V supply
BASIC_BRIEF = """\
name = "basic"
topology = "non-inverting"
[signal]
min = "-0.1 V"
max = "0.1 V"
frequency = "1 kHz"
[output]
gain = 10
[supply]
positive = "5 V"
negative = "-5 V"
[network]
rf = "9k"
rg = "1k"
"""


class Cli:
    """Run ``selector.cli.main`` in-process and capture its output."""

    def __init__(self, capsys):
        self.capsys = capsys

    def __call__(self, *argv: str) -> tuple[int, str, str]:
        code = main([str(a) for a in argv])
        captured = self.capsys.readouterr()
        return code, captured.out, captured.err

    def json(self, *argv: str) -> tuple[int, dict]:
        code, out, err = self(*argv, "--format", "json")
        assert "Traceback" not in err
        return code, json.loads(out)


@pytest.fixture
def cli(capsys) -> Cli:
    return Cli(capsys)


@pytest.fixture
def write(tmp_path):
    """``write(name, text)`` → path of a new file under the test's tmp dir."""
    def _write(name: str, text: str) -> Path:
        path = tmp_path / name
        path.write_text(text, encoding="utf-8")
        return path
    return _write
