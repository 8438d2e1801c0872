"""The bad-sweep corpus: every file in sweeps/ is refused by ``audit --measured`` with exit 2.

Each file's first line says what is wrong and what the answer must contain::

    # bad: <what is wrong> | column: <column> [| says: <text>] [| line: <n>]

The contract (docs/design.md, "Commands"; the issue's "Bad input"): exit 2, exactly one line on
stderr naming the file, the line and the column; nothing on stdout, no --out folder.
"""

from __future__ import annotations

import contextlib
import io
import re
from pathlib import Path

import numpy as np
import pytest

from bandwright import cli
from bandwright.errors import SpecError
from bandwright.inputs.sweep_file import MIN_POINTS, check_covers, load_sweep

HERE = Path(__file__).resolve().parent / "sweeps"
CHAIN = HERE / "chain.toml"
HEAD = re.compile(r"^# bad: (?P<what>.+?) \| column: (?P<column>\S+)"
                  r"(?: \| says: (?P<says>.+?))?(?: \| line: (?P<line>\d+))?$")
FILES = sorted(HERE.glob("*.csv"))


def _head(path: Path) -> dict[str, str | None]:
    m = HEAD.match(path.read_text().split("\n", 1)[0])
    assert m, path
    return m.groupdict()


def test_corpus_covers_every_kind_of_bad_sweep():
    assert len(FILES) >= 15
    for p in FILES:
        assert _head(p)["line"], p


@pytest.mark.parametrize("path", FILES, ids=[p.stem for p in FILES])
def test_bad_sweep_exits_2_with_one_line_naming_file_line_and_column(path, tmp_path):
    head = _head(path)
    out = tmp_path / "out"
    err, std = io.StringIO(), io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(std):
        code = cli.main(["audit", str(CHAIN), "--measured", str(path), "--out", str(out)])
    text = err.getvalue()
    assert code == 2, text
    assert std.getvalue() == ""
    lines = text.strip().splitlines()
    assert len(lines) == 1, text
    assert lines[0].startswith(f"bandwright: {path}:{head['line']}: {head['column']}"), lines[0]
    if head["says"]:
        assert head["says"] in lines[0], lines[0]
    assert not out.exists()
    assert list(tmp_path.iterdir()) == []


def test_good_sweep_reads_columns_by_name_in_any_order_with_comments(tmp_path):
    """Hand-written file: columns out of order, an extra column, comments and blank lines."""
    f = np.geomspace(1e3, 1e4, 12)
    body = ["# measured on the bench", "phase_deg, note ,gain_db,freq_hz"]
    for k, x in enumerate(f):
        body.append(f"{-10 * k},x,{-1.5 * k},{float(x)!r}")
        if k == 4:
            body += ["", "  # range switched here"]
    p = tmp_path / "s.csv"
    p.write_text("\n".join(body) + "\n")
    s = load_sweep(p)
    assert np.array_equal(s.freq_hz, f)
    assert np.array_equal(s.gain_db, -1.5 * np.arange(12))
    assert np.array_equal(s.phase_deg, -10.0 * np.arange(12))
    assert s.lines[:6] == (3, 4, 5, 6, 7, 10)
    no_phase = tmp_path / "g.csv"
    no_phase.write_text("freq_hz,gain_db\n" + "\n".join(f"{x},{0.0}" for x in f) + "\n")
    assert load_sweep(no_phase).phase_deg is None
    assert MIN_POINTS == 10


def test_a_sweep_inside_the_passband_is_accepted_and_one_outside_refused(tmp_path):
    p = tmp_path / "s.csv"
    p.write_text("freq_hz,gain_db\n" + "\n".join(f"{x},0" for x in np.geomspace(2e3, 9e3, 12)))
    s = load_sweep(p)
    check_covers(s, 3000.0, 6000.0)
    with pytest.raises(SpecError, match="inside the passband"):
        check_covers(s, 20e3, 30e3)


from hypothesis import given, settings, strategies as st  # noqa: E402

_CELL = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr),
                  st.sampled_from(["", "nan", "1k", "-3dB", " 7 ", "1e3", "#", "0"]),
                  st.text(max_size=4))


@settings(max_examples=60)
@given(st.lists(st.lists(_CELL, min_size=0, max_size=4), max_size=14),
       st.sampled_from(["freq_hz,gain_db", "gain_db,freq_hz,phase_deg", "freq_hz", "x,y"]))
def test_the_reader_raises_only_spec_error_on_arbitrary_rows(tmp_path_factory, rows, header):
    """Property: whatever the rows hold, a Sweep or a SpecError with a line, never another
    exception (the CLI turns a SpecError into one line and exit 2)."""
    p = tmp_path_factory.mktemp("h") / "s.csv"
    p.write_text("\n".join([header] + [",".join(r) for r in rows]) + "\n")
    try:
        s = load_sweep(p)
    except SpecError as exc:
        assert exc.line is not None and exc.key in ("freq_hz", "gain_db", "phase_deg")
    else:
        assert s.freq_hz.size >= MIN_POINTS and np.all(np.diff(s.freq_hz) > 0)
        assert np.all(np.isfinite(s.gain_db))
