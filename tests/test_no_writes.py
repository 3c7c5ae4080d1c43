"""Nothing written where it should not be.

Every registered command is run on copies of a library and a brief while a Python
audit hook (PEP 578, ``sys.addaudithook``) records every open-for-writing, rename,
removal, chmod and truncation the process makes; the inputs must never appear, and
their SHA-256 and modification time must be unchanged afterwards.  ``--output``
goes through selector.safeio: a temporary file in the same folder renamed into
place (POSIX rename(2) is atomic: a reader sees the old file or the new one).
"""
from __future__ import annotations

import argparse
import hashlib
import os
import shutil
import sys
from pathlib import Path

import pytest

from selector import cli, safeio
from selector.errors import InputError

ROOT = Path(__file__).resolve().parent.parent
DEMO_BRIEFS = sorted((ROOT / "demo" / "briefs").glob("*.toml"))
LIBRARY = ROOT / "data" / "demo_library.csv"
A_PART = "KL-3320"  # a part key of the invented demo library

WRITE_FLAGS = os.O_WRONLY | os.O_RDWR | os.O_APPEND | os.O_CREAT | os.O_TRUNC
_EVENTS: list[tuple[str, str]] = []
_RECORDING: list[bool] = []


def _audit(event: str, args) -> None:
    if not _RECORDING:
        return
    if event == "open":
        path, mode, flags = (list(args) + [None, None])[:3]
        writing = (mode is not None and any(c in str(mode) for c in "wax+")) or (
            mode is None and isinstance(flags, int) and flags & WRITE_FLAGS)
        if writing and isinstance(path, (str, bytes, os.PathLike)):
            _EVENTS.append((event, os.fsdecode(path)))
    elif event in ("os.rename", "os.replace", "os.remove", "os.unlink", "os.truncate",
                   "os.chmod", "os.utime", "os.link", "os.symlink", "shutil.rmtree",
                   "shutil.move", "shutil.copyfile"):
        for item in args:
            if isinstance(item, (str, bytes, os.PathLike)):
                _EVENTS.append((event, os.fsdecode(item)))


sys.addaudithook(_audit)  # hooks cannot be removed; it records only when asked


def fingerprint(path: Path) -> tuple[str, int]:
    return hashlib.sha256(path.read_bytes()).hexdigest(), path.stat().st_mtime_ns


# options that name a file the command writes besides --output -> file suffix
SIDE_OUTPUTS = {"schematic": ".svg", "plot": ".png"}


def argv_for(name: str, brief: Path, library: Path, design: Path,
             side_dir: Path | None = None) -> list[str]:
    """Arguments for a registered command, built from its own parser: positional and
    required arguments get an input of the right kind; with ``side_dir`` the options
    that write a file (a schematic, a plot) get one there."""
    parser = cli.build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    command = sub.choices[name]
    argv = [name]
    for action in command._actions:
        if action.dest in SIDE_OUTPUTS and side_dir is not None:
            argv += [action.option_strings[0],
                     str(side_dir / f"{name}-{action.dest}{SIDE_OUTPUTS[action.dest]}")]
            continue
        if action.option_strings and not action.required:
            continue
        value = {"brief": brief, "library": library, "part": A_PART,
                 "paths": design, "briefs": design.parent}.get(action.dest, brief)
        argv += ([action.option_strings[0]] if action.option_strings else []) + [str(value)]
    options = {o for a in command._actions for o in a.option_strings}
    if "--library" in options and "--library" not in argv:
        argv += ["--library", str(library)]
    return argv


@pytest.fixture()
def inputs(tmp_path):
    folder = tmp_path / "inputs"
    folder.mkdir()
    library = folder / "parts.csv"
    shutil.copyfile(LIBRARY, library)
    briefs = []
    for source in DEMO_BRIEFS:
        briefs.append(folder / source.name)
        shutil.copyfile(source, briefs[-1])
    # a saved design: a brief that records its part (for commands that re-check)
    design = folder / "design.toml"
    design.write_text(f'part = "{A_PART}"\n' + (ROOT / "demo" / "briefs" /
                                                "vibration.toml").read_text())
    briefs.append(design)
    return folder, library, briefs


def run_recorded(argv: list[str], capsys) -> tuple[int, list[tuple[str, str]]]:
    _EVENTS.clear()
    _RECORDING.append(True)
    try:
        status = cli.main(argv)
    finally:
        _RECORDING.clear()
    capsys.readouterr()
    return status, list(_EVENTS)


@pytest.mark.parametrize("name", sorted(cli.COMMANDS))
def test_commands_never_write_their_inputs(name, inputs, tmp_path, capsys):
    folder, library, briefs = inputs
    before = {p: fingerprint(p) for p in [library, *briefs]}
    listing = sorted(os.listdir(folder))
    out_dir = tmp_path / "results"
    out_dir.mkdir()
    design = briefs[-1]
    runs = [(brief, "table", None) for brief in (briefs[0], design)]
    runs += [(design, fmt, out_dir / f"result.{fmt}")
             for fmt in ("table", "json", "csv", "markdown")]
    for brief, fmt, output in runs:
        side = out_dir if fmt == "json" else None  # schematics and plots: once
        argv = argv_for(name, brief, library, design, side) + ["--format", fmt]
        if output is not None:
            argv += ["--output", str(output)]
        status, events = run_recorded(argv, capsys)
        assert status in (0, 1), (argv, status)
        touched = [(e, p) for e, p in events
                   if Path(p).resolve().parent == folder.resolve()]
        assert touched == [], f"{argv} wrote in the inputs' folder: {touched}"
        if output is not None:
            assert output.is_file() and output.stat().st_size > 0
            # the hook saw the write (so it is not blind), and only in out_dir
            assert ("os.rename", str(output)) in events  # os.replace audits as os.rename
            assert all(Path(p).resolve().parent == out_dir.resolve()
                       for _, p in events), events
    assert {p: fingerprint(p) for p in before} == before
    assert sorted(os.listdir(folder)) == listing  # nothing left beside the inputs
    side_options = set(argv_for(name, design, library, design, out_dir)) - set(
        argv_for(name, design, library, design))
    for side_file in [o for o in side_options if o.startswith(str(out_dir))]:
        assert Path(side_file).is_file(), f"{name} did not write {side_file}"
    results = sorted(p for p in os.listdir(out_dir) if p.startswith("result."))
    assert results == [f"result.{f}" for f in sorted(("table", "json", "csv", "markdown"))]
    assert not [p for p in os.listdir(out_dir) if p.startswith(".")]  # no temporaries


def test_output_matches_stdout_and_respects_force(inputs, tmp_path, capsys):
    _, library, briefs = inputs
    argv = ["shortlist", str(briefs[0]), "--library", str(library), "--format", "csv"]
    cli.main(argv)
    expected = capsys.readouterr().out
    target = tmp_path / "ranked.csv"
    assert cli.main(argv + ["-o", str(target)]) in (0, 1)
    assert capsys.readouterr().out == ""  # results went to the file only
    assert target.read_text(encoding="utf-8") == expected
    target.write_text("an older result\n")
    assert cli.main(argv + ["-o", str(target)]) == 2
    assert "already exists" in capsys.readouterr().err
    assert target.read_text() == "an older result\n"
    inode = target.stat().st_ino
    assert cli.main(argv + ["-o", str(target), "--force"]) in (0, 1)
    assert target.read_text(encoding="utf-8") == expected
    assert target.stat().st_ino != inode  # replaced by rename, not rewritten in place


def test_table_output_file_has_no_terminal_codes(inputs, tmp_path, capsys):
    _, library, briefs = inputs
    target = tmp_path / "table.txt"
    os.environ["FORCE_COLOR"] = "1"
    try:
        assert cli.main(["shortlist", str(briefs[0]), "--library", str(library),
                         "-o", str(target)]) in (0, 1)
    finally:
        del os.environ["FORCE_COLOR"]
    text = target.read_text(encoding="utf-8")
    assert "\x1b[" not in text and "Qualifying parts" in text


# ------------------------------------------------------------------ safeio itself
def test_atomic_write_and_no_temporary_left(tmp_path):
    target = tmp_path / "out.txt"
    safeio.write_text(target, "µ 1\n")
    assert target.read_bytes() == "µ 1\n".encode("utf-8")
    assert os.listdir(tmp_path) == ["out.txt"]


def test_refuses_existing_unless_forced_and_keeps_mode(tmp_path):
    target = tmp_path / "out.txt"
    target.write_text("old")
    target.chmod(0o640)
    with pytest.raises(InputError, match="already exists"):
        safeio.write_text(target, "new")
    assert target.read_text() == "old"
    safeio.write_text(target, "new", force=True)
    assert target.read_text() == "new"
    assert target.stat().st_mode & 0o777 == 0o640


@pytest.mark.parametrize("alias", ["same", "symlink", "hardlink", "dotted"])
def test_refuses_to_write_over_an_input_even_with_force(alias, tmp_path):
    original = tmp_path / "brief.toml"
    original.write_text("topology = 'follower'\n")
    target = {"same": original, "symlink": tmp_path / "link.toml",
              "hardlink": tmp_path / "hard.toml",
              "dotted": tmp_path / "." / ".." / tmp_path.name / "brief.toml"}[alias]
    if alias == "symlink":
        target.symlink_to(original)
    elif alias == "hardlink":
        os.link(original, target)
    with pytest.raises(InputError, match="refusing to write over an input"):
        safeio.write_text(target, "overwritten", force=True, inputs=[original])
    assert original.read_text() == "topology = 'follower'\n"


@pytest.mark.parametrize("failure", [OSError(28, "No space left on device"),
                                     KeyboardInterrupt()])
def test_failed_write_leaves_old_file_and_no_temporary(failure, tmp_path, monkeypatch):
    target = tmp_path / "out.txt"
    target.write_text("old")

    def broken_replace(source, destination):
        raise failure
    monkeypatch.setattr(safeio.os, "replace", broken_replace)
    expected = InputError if isinstance(failure, OSError) else KeyboardInterrupt
    with pytest.raises(expected):
        safeio.write_text(target, "new", force=True)
    assert target.read_text() == "old"
    assert os.listdir(tmp_path) == ["out.txt"]


def test_destination_problems(tmp_path):
    with pytest.raises(InputError, match="is a directory"):
        safeio.write_text(tmp_path, "x")
    with pytest.raises(InputError, match="does not exist"):
        safeio.write_text(tmp_path / "missing" / "out.txt", "x")


def test_existing_brief_inside_an_input_folder_is_never_replaced(tmp_path):
    folder = tmp_path / "designs"
    folder.mkdir()
    saved = folder / "channel.toml"
    saved.write_text("part = 'ZT-4410'\n")
    with pytest.raises(InputError, match="refusing to write over an input"):
        safeio.write_text(saved, "x", force=True, inputs=[folder])
    assert saved.read_text() == "part = 'ZT-4410'\n"
    report = folder / "report.md"  # a new file, or a non-input file, is fine
    safeio.write_text(report, "one", inputs=[folder])
    safeio.write_text(report, "two", force=True, inputs=[folder])
    assert report.read_text() == "two"
