"""docs/user-guide.md's "JSON reference" lists every key the JSON of a plan and of an audit
can carry, and nothing else.

The renders cover each object the JSON can hold: a single-supply plan (`reference`, the
plan-only `prototype`, `candidates`, `ordering`, `sensitivities`), an audit of a chain file
with trimmers and a yield target it misses (`tuning`, `yield.offer`), an audit of a chain into
a converter (`converter`) and an audit against a measured sweep (`diagnosis`). Every key path
(lists flattened as `[]`) emitted must be listed; every listed path must be emitted by one of
the renders, unless the allow-list below names it with its reason. The reference is the
outside source here: it is the document users read.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from bandwright.audit import audit
from bandwright.inputs.loader import load_spec
from bandwright.planner import plan
from bandwright.report.json_out import audit_to_dict, dumps, plan_to_dict

ROOT = Path(__file__).resolve().parents[2]
GUIDE = ROOT / "docs" / "user-guide.md"
DIAG_CHAIN = ROOT / "tests" / "reference" / "diagnosis" / "three_stage_mfb_tow_thomas.toml"
CONV_CHAIN = ROOT / "tests" / "converter" / "conv_chain.toml"

# Listed keys that these renders do not emit, each with why (none today: every listed key is
# emitted by one of the renders above).
RARE: dict[str, str] = {}


def reference() -> tuple[set[str], set[str]]:
    """(every key path the reference lists, the paths of objects whose keys are data)."""
    text = GUIDE.read_text(encoding="utf-8")
    section = text.split("\n## JSON reference\n", 1)[1].split("\n## ", 1)[0]
    keys, data = set(), set()
    for line in section.splitlines():
        if not line.startswith("| `"):
            continue
        first = line.split("|")[1]
        paths = re.findall(r"`([^`]+)`", first)
        keys.update(paths)
        if "*data*" in line:
            data.update(paths)
    return keys, data


def key_paths(doc, data: set[str], prefix: str = "") -> set[str]:
    """Every key path of `doc`: a list's key ends in `[]` and its items share the path; an
    object listed as data is one path (its keys are names, not words of the format)."""
    out: set[str] = set()
    if isinstance(doc, dict):
        for k, v in doc.items():
            p = f"{prefix}.{k}" if prefix else k
            if isinstance(v, list):
                p += "[]"
            out.add(p)
            if p not in data:
                out |= key_paths(v, data, p)
    elif isinstance(doc, list):
        for v in doc:
            out |= key_paths(v, data, prefix)
    return out


def _chain_file(tmp: Path, name: str, text: str) -> Path:
    path = tmp / name
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def renders(tmp_path_factory) -> dict[str, dict]:
    tmp = tmp_path_factory.mktemp("json_reference")
    # Fewer boards than the file's 2000 (the keys do not depend on the count) and a target
    # the chain misses (0.999), so that the yield offers tighter parts; three trimmers in
    # the Tow-Thomas stage (f0, Q and gain: every key of `tuning.steps[].target`).
    base = DIAG_CHAIN.read_text(encoding="utf-8").replace("samples = 2000", "samples = 200")
    tuned = base.replace("min_yield = 0.95", "min_yield = 0.999").replace(
        'C1 = "3.3n", C2 = "3.3n" }',
        'C1 = "3.3n", C2 = "3.3n" }\n'
        'trim = { R2 = ["6.8k", "500"], RQ = ["51.1k", "5k"], Rin = ["17.4k", "2k"] }')
    # A "measured" sweep: the same chain with R4 of the Tow-Thomas stage 7 % high (R4 and
    # its partners in f0 cannot be told apart: `equivalent[]` is filled).
    changed = audit(_chain_file(tmp, "changed.toml", base.replace('R4 = "9.31k"', 'R4 = "10k"')))
    r = changed.analyses.response
    sweep = tmp / "sweep.csv"
    sweep.write_text("freq_hz,gain_db,phase_deg\n" + "".join(
        f"{float(f)!r},{float(g)!r},{float(ph)!r}\n"
        for f, g, ph in zip(r.freq_hz, r.gain_db, r.phase_deg)), encoding="utf-8")
    docs = {
        "plan piezo_pump_3v3": plan_to_dict(plan(load_spec(ROOT / "scenarios" /
                                                           "piezo_pump_3v3.toml"))),
        "audit with trimmers": audit_to_dict(audit(_chain_file(tmp, "tuned.toml", tuned))),
        "audit into a converter": audit_to_dict(audit(CONV_CHAIN)),
        "audit --measured": audit_to_dict(audit(_chain_file(tmp, "base.toml", base),
                                                measured=sweep)),
    }
    return {name: json.loads(dumps(doc)) for name, doc in docs.items()}


@pytest.mark.slow
def test_every_emitted_key_is_in_the_reference(renders):
    keys, data = reference()
    missing = {}
    for name, doc in renders.items():
        for p in sorted(key_paths(doc, data)):
            # a null where a list may stand (`sensitivities`, `response.freq_hz`…)
            if p not in keys and f"{p}[]" not in keys:
                missing.setdefault(p, name)
    assert not missing, ("keys emitted but not in docs/user-guide.md's JSON reference: "
                         + ", ".join(f"{p} ({n})" for p, n in missing.items()))


def test_every_listed_key_is_emitted(renders):
    keys, data = reference()
    emitted = set().union(*(key_paths(doc, data) for doc in renders.values()))
    never = sorted(keys - emitted - set(RARE))
    assert not never, f"listed in the JSON reference, emitted by no render: {never}"
    assert not set(RARE) - keys, "the allow-list names keys the reference does not list"


def test_reference_parses_and_names_the_data_objects():
    """The objects whose keys are names are marked so (the brief's list)."""
    keys, data = reference()
    assert {"stages[].components", "stages[].nets", "reference.components", "yield.failures",
            "tuning.failures_tuned", "tuning.out_of_range"} <= data
    assert {"prototype.design_loss_db", "ordering.dynamic_range_gain_db", "yield.offer",
            "yield.explained", "sensitivities[].parts[].weight"} <= keys


def test_key_paths_flatten_lists_and_stop_at_data():
    doc = {"a": [{"b": 1}, {"c": [1, 2]}], "d": {"x": 1, "y": 2}, "e": None}
    assert key_paths(doc, {"d"}) == {"a[]", "a[].b", "a[].c[]", "d", "e"}
