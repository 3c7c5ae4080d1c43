"""The command line behaves like a good Unix tool.

- a closed pipe (``selector ... | head``) ends the run quietly;
- Ctrl-C (SIGINT) exits with status 130 and one line, no traceback;
- ``--no-color`` and NO_COLOR (https://no-color.org: "when present and not an empty
  string") are honoured, and output to a pipe carries no colour codes;
- ``--version`` works and ``--help`` of every registered command shows an example;
- results go to stdout and messages to stderr, so ``--format json > out.json`` is
  clean JSON (RFC 8259 has no NaN or Infinity).

Exit 130 = 128 + SIGINT (2) is the shell convention for a run ended by Ctrl-C
(common practice, POSIX shells).  All part data here is invented.
"""
from __future__ import annotations

import errno
import importlib
import importlib.metadata
import json
import os
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

import selector
from selector import cli

ROOT = Path(__file__).resolve().parent.parent
BRIEF = ROOT / "demo" / "briefs" / "vibration.toml"
LIBRARY = ROOT / "data" / "demo_library.csv"
# ECMA-48 SGR sequences; colour parameters are 30-37, 38, 39, 40-47, 48, 49, 90-107
SGR = re.compile(r"\x1b\[([0-9;]*)m")
COLOUR_PARAMS = {str(n) for n in [*range(30, 50), *range(90, 108)]}


def selector_cmd(*args) -> list[str]:
    return [sys.executable, "-m", "selector", *map(str, args)]


def env(**extra) -> dict:
    base = {k: v for k, v in os.environ.items()
            if k not in ("NO_COLOR", "FORCE_COLOR", "SELECTOR_DEBUG", "TERM")}
    base.update(extra)
    return base


def colour_codes(text: str) -> list[str]:
    """SGR codes in ``text`` that set a colour (not bold/dim/reset)."""
    found = []
    for params in SGR.findall(text):
        found += [p for p in params.split(";") if p in COLOUR_PARAMS]
    return found


def strict_json(text: str):
    """json.loads that rejects NaN/Infinity, which RFC 8259 does not allow."""
    def reject(name):
        raise ValueError(f"non-standard JSON constant {name}")
    return json.loads(text, parse_constant=reject)


# ------------------------------------------------------------------ pipes
@pytest.mark.parametrize("fmt", ["table", "csv", "json"])
def test_closed_pipe_exits_quietly(fmt):
    process = subprocess.Popen(selector_cmd("shortlist", BRIEF, "--format", fmt),
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env())
    process.stdout.close()  # the reader is gone before the first result is written
    _, err = process.communicate(timeout=120)
    assert err.decode() == ""  # no "Broken pipe", no "Exception ignored"
    assert process.returncode == 0


def test_head_in_a_shell_pipeline():
    command = (f"{' '.join(selector_cmd('shortlist', BRIEF, '--format', 'csv'))} "
               "| head -n 1; echo \"status=${PIPESTATUS[0]}\"")
    result = subprocess.run(["bash", "-c", command], capture_output=True, text=True,
                            env=env(), timeout=120)
    lines = result.stdout.splitlines()
    assert lines[0].startswith("group,rank,part,score")
    assert lines[-1] == "status=0"
    assert result.stderr == ""


# ------------------------------------------------------------------ Ctrl-C
def test_sigint_exits_130_with_one_line(tmp_path):
    # The brief is a named pipe: the command blocks reading it, which proves it got
    # past start-up, and SIGINT then lands in the middle of a real run.
    fifo = tmp_path / "brief.toml"
    os.mkfifo(fifo)
    process = subprocess.Popen(selector_cmd("derive", fifo), stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, env=env())
    deadline = time.monotonic() + 60
    writer = None
    while writer is None:
        try:  # succeeds only once the command has opened the pipe for reading
            writer = os.open(fifo, os.O_WRONLY | os.O_NONBLOCK)
        except OSError as exc:
            assert exc.errno == errno.ENXIO
            assert process.poll() is None, process.communicate()
            assert time.monotonic() < deadline, "the command never opened its brief"
            time.sleep(0.01)
    try:
        time.sleep(0.2)
        process.send_signal(signal.SIGINT)
        out, err = process.communicate(timeout=60)
    finally:
        os.close(writer)
    assert process.returncode == 130
    assert err.decode().splitlines() == ["selector: interrupted"]
    assert out == b""


def test_sigint_while_loading_the_libraries_is_clean():
    # Ctrl-C pressed right after starting, while pandas' compiled modules are still
    # loading (seen in /proc/PID/maps, Linux), is also one line and status 130.
    maps = Path("/proc/self/maps")
    if not maps.exists():
        pytest.skip("needs Linux /proc to see when pandas is loading")
    process = subprocess.Popen(selector_cmd("shortlist", BRIEF), stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, env=env())
    deadline = time.monotonic() + 60
    while True:
        try:
            loaded = "pandas/_libs" in Path(f"/proc/{process.pid}/maps").read_text()
        except OSError:
            loaded = False
        if loaded or process.poll() is not None or time.monotonic() > deadline:
            break
        time.sleep(0.002)
    process.send_signal(signal.SIGINT)
    out, err = process.communicate(timeout=60)
    if process.returncode == 0:
        pytest.skip("the run finished before the signal arrived")
    assert process.returncode == 130, err.decode()
    assert err.decode().splitlines() == ["selector: interrupted"]


# ------------------------------------------------------------------ colour
def run_table(extra_env: dict, *flags) -> str:
    result = subprocess.run(selector_cmd("shortlist", BRIEF, *flags), capture_output=True,
                            text=True, env=env(**extra_env), timeout=120)
    assert result.returncode == 0, result.stderr
    return result.stdout


def test_output_to_a_pipe_has_no_colour_codes():
    assert SGR.findall(run_table({})) == []


def test_forced_colour_is_seen_so_the_colour_tests_can_fail():
    # FORCE_COLOR makes rich colour even into a pipe: the checks below are not vacuous
    assert colour_codes(run_table({"FORCE_COLOR": "1"}))


@pytest.mark.parametrize("how", ["flag", "env"])
def test_no_color_is_honoured(how):
    if how == "flag":
        text = run_table({"FORCE_COLOR": "1"}, "--no-color")
    else:
        text = run_table({"FORCE_COLOR": "1", "NO_COLOR": "1"})
    assert colour_codes(text) == []
    assert "KL-3320" in text  # still the same results


def test_empty_no_color_does_not_disable_colour():
    # no-color.org: NO_COLOR counts only when it is not an empty string
    assert colour_codes(run_table({"FORCE_COLOR": "1", "NO_COLOR": ""}))


# ------------------------------------------------------------------ version and help
def test_version(capsys):
    with pytest.raises(SystemExit) as info:
        cli.main(["--version"])
    assert info.value.code == 0
    out = capsys.readouterr().out.strip()
    # the installed distribution's metadata is the outside reference
    assert out == f"selector {importlib.metadata.version('selector')}"
    assert out == f"selector {selector.__version__}"


@pytest.mark.parametrize("name", sorted(cli.COMMANDS))
def test_help_of_every_command_shows_an_example(name, capsys):
    module = importlib.import_module(cli.COMMANDS[name][0])
    assert module.__doc__ and module.__doc__.strip()
    assert module.EXAMPLE.lstrip().startswith("example:")
    with pytest.raises(SystemExit) as info:
        cli.main([name, "--help"])
    assert info.value.code == 0
    out = capsys.readouterr().out
    assert "example:" in out
    assert module.EXAMPLE.strip().splitlines()[0].strip() in out
    for option in ("--output", "--force", "--format", "--no-color"):
        assert option in out  # cli.add_common gives every command these


def test_top_level_help_lists_every_command(capsys):
    with pytest.raises(SystemExit):
        cli.main(["--help"])
    out = capsys.readouterr().out
    assert "example:" in out
    for name in cli.COMMANDS:
        assert name in out


def test_no_command_prints_usage_and_exits_2(capsys):
    assert cli.main([]) == 2
    out, err = capsys.readouterr()
    assert out == "" and "usage:" in err


# ------------------------------------------------------------------ stdout vs stderr
@pytest.mark.parametrize("command", ["derive", "shortlist"])
def test_json_on_stdout_is_clean(command, tmp_path):
    out_file = tmp_path / "out.json"
    with out_file.open("wb") as stdout:
        result = subprocess.run(selector_cmd(command, BRIEF, "--format", "json"),
                                stdout=stdout, stderr=subprocess.PIPE, env=env(),
                                timeout=120)
    assert result.returncode == 0, result.stderr
    data = strict_json(out_file.read_text(encoding="utf-8"))
    assert isinstance(data, dict)
    if command == "shortlist":
        assert data["counts"]["considered"] == 67  # rows in the demo library
    # messages (notes) went to stderr, each line marked as the tool's
    for line in result.stderr.decode().splitlines():
        assert line.startswith("selector: ")


def test_json_has_no_nan_and_a_stable_key_order(tmp_path, capsys):
    # a library with gaps: the missing figures must come out as null, never NaN
    library = tmp_path / "gaps.csv"
    library.write_text("part,gbw [MHz],slew [V/us],supply_min [V],supply_max [V],aol [dB]\n"
                       "ZT-4410,2.4,,2.7,5.5,\nZT-4420,,5,2.7,5.5,100\n")
    runs = []
    for _ in range(2):
        assert cli.main(["shortlist", str(BRIEF), "--library", str(library),
                         "--format", "json"]) in (0, 1)
        runs.append(capsys.readouterr().out)
    assert runs[0] == runs[1]
    assert "NaN" not in runs[0] and "Infinity" not in runs[0]
    data = strict_json(runs[0])
    assert list(data)[:3] == ["derived", "library", "counts"]
    entries = data["shortlist"] + data["near_misses"]
    assert {e["part"] for e in entries} <= {"ZT-4410", "ZT-4420"}
    assert data["counts"]["considered"] == 2


def test_internal_errors_are_one_line(monkeypatch, capsys):
    # a bug (not bad input) is still one line on stderr, status 70 (EX_SOFTWARE in
    # BSD sysexits.h), unless SELECTOR_DEBUG asks for the traceback
    import selector.commands.derive as derive_command

    def broken(*args, **kwargs):
        raise ZeroDivisionError("float division by zero")
    monkeypatch.setattr(derive_command, "derive", broken)
    monkeypatch.delenv("SELECTOR_DEBUG", raising=False)
    assert cli.main(["derive", str(BRIEF)]) == 70
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "ZeroDivisionError" in err
    monkeypatch.setenv("SELECTOR_DEBUG", "1")
    with pytest.raises(ZeroDivisionError):
        cli.main(["derive", str(BRIEF)])


# ------------------------------------------------------------------ CSV exports
def test_csv_export_neutralises_formulas_and_keeps_numbers(tmp_path, capsys):
    # OWASP "CSV Injection": a cell starting with =, +, -, @, tab or CR can run as a
    # formula in a spreadsheet; prefixing it with ' makes it text.  Hostile keys are
    # invented test data.
    import csv
    import io
    library = tmp_path / "hostile.csv"
    library.write_text(
        "part,gbw [MHz],slew [V/us],supply_min [V],supply_max [V],swing_low [V],"
        "swing_high [V],cm_low [V],cm_high [V],vos [uV],vos_drift [uV/C],ib [pA],"
        "aol [dB],pm [deg],en [nV/rtHz],in [fA/rtHz],en_corner [Hz],cin_cm [pF],"
        "cin_diff [pF],ro [ohm],iout [mA],iq [uA],temp_min [C],temp_max [C],status\n"
        + "".join(f"{key},10,10,2.7,36,0.05,0.05,-0.1,-0.1,50,0.5,10,120,70,10,10,10,"
                  f"3,3,50,40,500,-40,125,active\n"
                  for key in ('"=HYPERLINK(""x"")"', "+ZT-4410", "-ZT-4420", "@ZT-4430",
                              "ZT-4440")))
    assert cli.main(["shortlist", str(BRIEF), "--library", str(library),
                     "--format", "csv"]) == 0
    rows = list(csv.reader(io.StringIO(capsys.readouterr().out)))
    header, body = rows[0], rows[1:]
    parts = {row[header.index("part")] for row in body}
    assert parts == {"'=HYPERLINK(\"x\")", "'+ZT-4410", "'-ZT-4420", "'@ZT-4430", "ZT-4440"}
    for row in body:
        assert float(row[header.index("score")]) >= 1  # numbers stay plain numbers
        margin = row[header.index("slew_margin")]
        assert margin == "" or float(margin) > 0
        for cell in row:
            assert not cell.startswith(("=", "+", "@", "\t", "\r")), cell
            if cell.startswith("-"):  # only a plain negative number may start so
                float(cell)


def test_neutralise_cell_by_cell():
    from selector.report import neutralise
    assert neutralise("=1+2") == "'=1+2"
    assert neutralise("-1 V to 1 V") == "'-1 V to 1 V"
    assert neutralise("\tx") == "'\tx" and neutralise("\rx") == "'\rx"
    assert neutralise("@SUM(A1)") == "'@SUM(A1)"
    assert neutralise("-3.5e-6") == "-3.5e-6"  # text that is a plain number
    assert neutralise("-inf") == "'-inf"  # not a number a spreadsheet reads
    assert neutralise(-1.5) == -1.5 and neutralise(7) == 7
    assert neutralise(float("nan")) == "" and neutralise(float("inf")) == ""
    assert neutralise(None) == "" and neutralise(True) == "true"
