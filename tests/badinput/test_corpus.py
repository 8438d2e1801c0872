"""The bad-input corpus: every file in corpus/plan and corpus/audit is refused with exit 2.

Each file's first line says what is wrong and what the answer must contain::

    # bad: <what is wrong> | key: <dotted key, or - for a file-level error> [| says: <text>] [| line: <n>]

The contract (docs/design.md, "Commands"): exit 2, exactly one line on stderr naming the file,
the key and — where the file sets the key or TOML reports a syntax error — the line; nothing
on stdout, no traceback, and no --out folder.
"""

from __future__ import annotations

import contextlib
import io
import re
from pathlib import Path

import pytest

from bandwright import cli
from bandwright.inputs.reader import key_lines

from conftest import run_cli

CORPUS = Path(__file__).resolve().parent / "corpus"
HEAD = re.compile(r"^# bad: (?P<what>.+?) \| key: (?P<key>\S+)(?: \| says: (?P<says>.+?))?"
                  r"(?: \| line: (?P<line>\d+))?$")
FILES = sorted(CORPUS.glob("*/*.toml"))


def _head(path: Path) -> dict[str, str | None]:
    first = path.read_bytes().split(b"\n", 1)[0].decode("utf-8")
    m = HEAD.match(first)
    assert m, f"{path.name}: malformed first line {first!r}"
    return m.groupdict()


def test_corpus_is_large_and_covers_both_commands():
    assert len(FILES) >= 40
    assert {p.parent.name for p in FILES} == {"plan", "audit"}
    assert len(list((CORPUS / "audit").glob("*.toml"))) >= 20
    for p in FILES:
        _head(p)


@pytest.mark.parametrize("path", FILES, ids=[f"{p.parent.name}/{p.stem}" for p in FILES])
def test_bad_file_exits_2_with_one_line_naming_file_key_and_line(path, tmp_path):
    head = _head(path)
    out = tmp_path / "out"
    err, std = io.StringIO(), io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(std):
        code = cli.main([path.parent.name, str(path), "--out", str(out)])
    text = err.getvalue()
    assert code == 2, text
    assert std.getvalue() == ""
    lines = text.strip().splitlines()
    assert len(lines) == 1, text
    line = lines[0]
    where = f"bandwright: {path}" + (f":{head['line']}" if head["line"] else "") + ": "
    assert line.startswith(where), (where, line)
    if head["key"] != "-":
        assert f": {head['key']}" in line, line
    if head["says"]:
        assert head["says"] in line, line
    assert not out.exists()
    assert list(tmp_path.iterdir()) == []  # no temporary folder beside it either


# One file per kind of failure point, as a user runs it: a syntax error, a loader error,
# an error found once the op-amp is resolved, and an audit stage error.
@pytest.mark.parametrize("name", ["plan/01_syntax_missing_value.toml",
                                  "plan/07_unit_khz_in_center.toml",
                                  "plan/57_rails_inside_swing.toml",
                                  "audit/18_part_farads_on_resistor.toml"])
def test_bad_file_in_a_real_process(name, tmp_path):
    path = CORPUS / name
    out = tmp_path / "o"
    r = run_cli(path.parent.name, path, "--out", out, "--json")
    assert r.returncode == 2
    assert r.stdout == ""
    assert len(r.stderr.strip().splitlines()) == 1 and "Traceback" not in r.stderr
    assert str(path) in r.stderr
    assert not out.exists()


def test_key_lines_follows_arrays_of_tables_and_inline_tables():
    """The line locator against a hand-counted file."""
    text = "\n".join([
        "# comment",                                   # 1
        "[passband]",                                  # 2
        "center_hz = 1000",                            # 3
        "[[stopband]]",                                # 4
        "freq_hz = 700",                               # 5
        "[[stopband]]",                                # 6
        "'min_loss_db' = 30   # quoted key",           # 7
        "[[stage]]",                                   # 8
        'parts = { R1 = "1k", C1 = "1n" }',            # 9
        "[[stage]]",                                   # 10
        "topology = 'x'",                              # 11
        "[stage.amplifier]",                           # 12
        "gbw_hz = 1e6",                                # 13
        "[input]",                                     # 14
        "tone = [ { freq_hz = 50, vpk = 1 } ]",        # 15
        "noise.band_hz = [1, 2]",                      # 16
    ])
    got = key_lines(text)
    assert got["passband"] == 2 and got["passband.center_hz"] == 3
    assert got["stopband"] == 4 and got["stopband[0]"] == 4 and got["stopband[0].freq_hz"] == 5
    assert got["stopband[1]"] == 6 and got["stopband[1].min_loss_db"] == 7
    assert got["stage[0].parts"] == 9 and got["stage[0].parts.C1"] == 9
    assert got["stage[1].topology"] == 11 and got["stage[1].amplifier.gbw_hz"] == 13
    assert got["input.tone"] == 15
    assert got["input.noise.band_hz"] == 16
    assert "stage[0].topology" not in got
