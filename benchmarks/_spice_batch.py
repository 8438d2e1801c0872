"""One ngspice batch run with a `.control` block, shared by the benchmarks that time ngspice.

Standard library only, so that importing it costs a benchmark nothing it measures.
"""

from __future__ import annotations

import re
import subprocess
import time
from pathlib import Path

__all__ = ["run_control_batch"]

_ERROR = re.compile(r"^\s*(\*+\s*)?error\b", re.IGNORECASE | re.MULTILINE)


def run_control_batch(deck: str, commands: list[str], workdir: Path, name: str
                      ) -> tuple[float, str]:
    """Run `deck` once in ``ngspice -b`` with `commands` as its `.control` block (inserted
    before the deck's `.end`, followed by ``quit 0``). Returns ngspice's wall time in seconds
    and its stdout; raises RuntimeError with the output's tail when ngspice reports an
    error."""
    lines = deck.rstrip("\n").splitlines()
    text = "\n".join(lines[:-1] + [".control", *commands, "quit 0", ".endc", lines[-1]]) + "\n"
    (workdir / name).write_text(text)
    t0 = time.perf_counter()
    proc = subprocess.run(["ngspice", "-b", name], cwd=workdir, capture_output=True,
                          text=True, check=False)
    wall = time.perf_counter() - t0
    output = proc.stdout + proc.stderr
    if _ERROR.search(output):
        raise RuntimeError(output[-2000:])
    return wall, proc.stdout
