"""The stderr progress bar: silent off a terminal, shown only for runs over a second."""

from __future__ import annotations

import io

from rich.console import Console

from bandwright.report.progress import _LazyBar, stderr_progress


class _Tty(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_no_callback_when_stderr_is_not_a_terminal():
    with stderr_progress(stream=io.StringIO()) as progress:
        assert progress is None


def test_terminal_gets_a_callback_that_stays_quiet_for_fast_runs():
    out = _Tty()
    with stderr_progress(stream=out) as progress:
        assert progress is not None
        progress("yield", 2000, 2000)          # one fast chunk: nothing to show
    assert out.getvalue() == ""


def test_slow_run_opens_the_bar_on_the_given_stream():
    t = [0.0]
    out = _Tty()
    bar = _LazyBar(Console(file=out, force_terminal=True), 1.0, clock=lambda: t[0])
    t[0] = 0.4
    bar("yield", 2000, 20000)                   # 0.4 s for a tenth: 4 s expected
    assert bar.progress is not None
    t[0] = 0.8
    bar("yield", 4000, 20000)
    bar.close()
    assert "Monte Carlo yield" in out.getvalue()


def test_fast_stage_after_a_slow_one_is_timed_from_its_own_start():
    t = [0.0]
    bar = _LazyBar(Console(file=_Tty(), force_terminal=True), 1.0, clock=lambda: t[0])
    t[0] = 5.0
    bar("candidates", 1, 1)                     # finished: never shown
    t[0] = 5.1
    bar("yield", 2000, 4000)                    # 0.1 s per half: fast
    assert bar.progress is None
    bar.close()


def test_audit_reports_its_monte_carlo_progress(tmp_path):
    """An audit with a mask runs the yield: its progress reaches the callback, ending at
    the sample count the file asks for."""
    from bandwright.audit import audit
    p = tmp_path / "c.toml"
    p.write_text('[passband]\nlow_hz = 900\nhigh_hz = 1100\n[tolerance]\nsamples = 500\n'
                 '[[stage]]\ntopology = "mfb_bandpass"\n'
                 'parts = { R1a = "23.7k", R2 = "374k", C1 = "6.8n", C2 = "5.6n" }\n')
    calls = []
    audit(p, progress=lambda done, total: calls.append((done, total)))
    assert calls and calls[-1][0] == calls[-1][1] and calls[0][1] == 500
