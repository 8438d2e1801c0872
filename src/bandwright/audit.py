"""`bandwright audit`: a chain someone designed (chain.toml) → Stages → the same analyses and
checks as a plan."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from bandwright.amplifier import check_tones, resolve_amplifier
from bandwright.analysis import Analyses, analyse
from bandwright.advice.tolerance import plan_yield
from bandwright.analysis.montecarlo.tuned import TuningResult, tuning_for
from bandwright.analysis.tuning import plan_from_trims
from bandwright.analysis.montecarlo import YieldResult
from bandwright.chain import Chain, Stage, build_chain
from bandwright.chain.graph import attach_converter
from bandwright.chain.blocking import block_corner_hz, corner_grid
from bandwright.chain.stage import with_block
from bandwright.circuits.dc_block import DcBlock
from bandwright.checks import all_checks
from bandwright.checks.base import Check
from bandwright.checks.yield_check import yield_checks
from bandwright.circuits.figures import section_figures, transfer_polynomials
from bandwright.errors import SpecError
from bandwright.inputs.chain_file import load_chain
from bandwright.inputs.loader import HALF_POWER_DB
from bandwright.inputs.requirement import Passband, Requirement
from bandwright.sections.section import Section

__all__ = ["Audit", "audit"]

@dataclass(frozen=True)
class Audit:
    """An audited chain with its analyses and checks.

    Attributes
    ----------
    path : str
    requirement : Requirement
        The file's tables; when it states no passband, one is read off the built response
        (its -3 dB band around the peak) for the grids, and no mask check runs.
    has_mask : bool
    chain : Chain
    analyses : Analyses
    checks : tuple of Check
    yield_result : YieldResult or None
        Monte Carlo yield at the file's `[tolerance]` (customary E96/E12 tolerances when it
        has none); only when the file states a mask.
    tuning : TuningResult or None
        The trims the file names (``trim`` tables), or a tuning plan of the tool's own when
        the untrimmed yield misses the target or `[tuning] enabled = true`; its tuned yield
        is what the yield check judges.
    diagnosis : Diagnosis or None
        What a measured sweep (`--measured`) says about the chain (``bandwright.diagnosis``).
    """

    path: str
    requirement: Requirement
    has_mask: bool
    chain: Chain
    analyses: Analyses
    checks: tuple[Check, ...]
    yield_result: YieldResult | None = None
    tuning: TuningResult | None = None
    diagnosis: object = None


def _near_hz(elements) -> float:
    """Pole frequency of the circuit with ideal op-amps (the pair the figures report)."""
    num, den = transfer_polynomials(elements)
    den = den[np.abs(den) > 1e-12 * np.abs(den).max()] if den.size else den
    roots = np.roots(np.trim_zeros(den, "b")[::-1])
    if roots.size == 0:
        return 1.0
    return float(np.exp(np.mean(np.log(np.abs(roots)))) / (2 * math.pi))


def _build_stage(path: str, position: int, topo, parts, model, key: str,
                 source_ohms: float = 0.0) -> Stage:
    try:
        elements = tuple(topo.elements(parts, model))
        ideal_model = replace(model, gbw_hz=math.inf)
        ideal_el = tuple(topo.elements(parts, ideal_model))
        near = _near_hz(ideal_el) if topo.KIND != "gain" else 1.0
        ideal = section_figures(ideal_el, kind=topo.KIND, near_hz=near)
        built = section_figures(elements, kind=topo.KIND, near_hz=near, source_ohms=source_ohms)
    except (ValueError, np.linalg.LinAlgError) as exc:
        raise SpecError(path, f"{key}.parts", f"these parts do not make a working {topo.NAME}: "
                        f"{exc}") from None
    target = Section(kind=topo.KIND, f0_hz=ideal.f0_hz, q=ideal.q, gain=abs(ideal.gain))
    return Stage(position=position, topology=topo.NAME, target=target,
                 components=tuple((n, parts[n]) for n in topo.PARTS if n in parts),
                 elements=elements, model=model, built=built, ideal=None,
                 reason="as given in the audit file")


def _given_blocks(chain: Chain, req: Requirement, blocks: dict) -> Chain:
    """`chain` with the DC blocks the file gives (`dc_block` of a stage), their corners read
    as a plan reads them (``chain.blocking.block_corner_hz``)."""
    if not blocks:
        return chain
    grid = corner_grid(req.passband.low_hz, req.passband.high_hz)
    stages = []
    for st in chain.stages:
        if st.position in blocks:
            c, r = blocks[st.position]
            corner = block_corner_hz(st.elements, c, r, grid)
            st = with_block(st, DcBlock(c_farads=c, r_ohms=r, net="in", corner_hz=corner,
                                        reason="as given in the audit file"))
        stages.append(st)
    return build_chain(stages, source_ohms=chain.source_ohms)


def _passband_from_response(chain: Chain) -> Passband:
    """The -3 dB band around the built response's peak (for grids only, no mask)."""
    from bandwright.analysis.levels import net_transfers
    fs = [st.built.f0_hz for st in chain.stages if st.kind != "gain" and st.built.f0_hz > 0]
    lo, hi = (min(fs) / 20, max(fs) * 20) if fs else (1.0, 1e6)
    f = np.geomspace(lo, hi, 4001)
    mag = np.abs(net_transfers(chain, f)["out"])
    k = int(np.argmax(mag))
    inside = mag >= mag[k] / math.sqrt(2)
    i0 = k
    while i0 > 0 and inside[i0 - 1]:
        i0 -= 1
    i1 = k
    while i1 < f.size - 1 and inside[i1 + 1]:
        i1 += 1
    low, high = f[i0], f[i1]
    if not high > low:
        low, high = f[max(k - 1, 0)], f[min(k + 1, f.size - 1)]
    return Passband(low_hz=float(low), high_hz=float(high), max_loss_db=HALF_POWER_DB,
                    gain_db=float(20 * math.log10(mag[k])))


def audit(path: str | Path, *, measured: str | Path | None = None,
          progress=None) -> Audit:
    """Read an audit file and run every analysis and check on the chain it describes.

    Parameters
    ----------
    path : str or Path
        The audit file (chain.toml).
    measured : str or Path, optional
        A measured sweep (SWEEP.csv) to diagnose the chain against.
    progress : callable(done, total), optional
        Hears how far the Monte Carlo yield has come.

    Raises
    ------
    SpecError
        Bad file: syntax, unknown topology, missing or extra part, bad value (naming the
        stage and the part); a bad sweep (naming its file, line and column).
    """
    p = str(path)
    req, common, specs = load_chain(path)
    default = resolve_amplifier(common["amplifier"], path=p, supply=common["supply"])
    stages = []
    for position, topo, parts, amp, key in specs:
        model = default if amp is None else resolve_amplifier(amp, path=p, key=f"{key}.amplifier",
                                                              supply=common["supply"])
        check_tones(model, common["input"].tones, path=p,
                    key="amplifier" if amp is None else f"{key}.amplifier")
        # The first stage's figures are those the source sees, as in a plan.
        rs = common["input"].source_ohms if position == 1 else 0.0
        stages.append(_build_stage(p, position, topo, parts, model, key, rs))
    chain = build_chain(stages, source_ohms=common["input"].source_ohms)
    has_mask = req is not None
    if req is None:
        req = Requirement(path=p, passband=_passband_from_response(chain),
                          input=common["input"], supply=common["supply"],
                          amplifier=common["amplifier"], environment=common["environment"],
                          noise=common["noise"], tolerance=common["tolerance"],
                          converter=common.get("converter"))
    chain = _given_blocks(chain, req, common.get("dc_blocks", {}))
    chain = attach_converter(chain, req.converter)
    an = analyse(chain, req, with_mask=has_mask)
    checks = tuple(all_checks(chain, an, req))
    result = None
    tuning = None
    if has_mask:  # the yield is the share of boards meeting the mask: it needs one
        result = plan_yield(chain, req, progress=progress)
        given = plan_from_trims(chain, common.get("trims", {}))
        tuning = tuning_for(chain, req, result, given=given)
        checks += tuple(yield_checks(result, tuning=tuning))
    out = Audit(path=p, requirement=req, has_mask=has_mask, chain=chain, analyses=an,
                checks=checks, yield_result=result, tuning=tuning)
    if measured is not None:
        from bandwright.diagnosis import diagnose
        from bandwright.inputs.sweep_file import load_sweep
        out = replace(out, diagnosis=diagnose(out, load_sweep(measured)))
    return out
