"""Audits: a chain file reproduces a plan; bad chain files exit 2 naming stage and part."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

from bandwright.audit import audit
from bandwright.errors import SpecError

from conftest import exit_code_of, run_cli

CHAIN = """
[input]
max_vpk = 0.5
source_ohms = 50
[supply]
rails_v = [-5, 5]
[amplifier]
archetype = "general"

[[stage]]
topology = "sallen_key_highpass"
parts = { C1 = "10n", C2 = "10n", R1 = "11.3k", R2 = "45.3k" }

[[stage]]
topology = "mfb_lowpass"
parts = { R1 = "10k", R2 = "10k", R3 = "4k99", C1 = "10n", C2 = "1n" }
"""


@pytest.mark.slow
def test_plan_out_chain_toml_audits_to_the_same_figures(scenario_cli_out):
    """docs/design.md: `bandwright audit DIR/chain.toml` reproduces the plan's figures."""
    r, out = scenario_cli_out("audio_band")  # `plan SPEC --out DIR --json`, once a session
    planned = json.loads(r.stdout)
    assert r.returncode == exit_code_of(planned), r.stderr
    a = run_cli("audit", out / "chain.toml", "--json")
    assert a.returncode == r.returncode, a.stderr
    audited = json.loads(a.stdout)
    np.testing.assert_allclose(audited["response"]["gain_db"], planned["response"]["gain_db"],
                               rtol=1e-9, atol=1e-9)
    assert [(c["id"], c["net"], c["status"], c["value"]) for c in audited["checks"]] == \
        [(c["id"], c["net"], c["status"], c["value"]) for c in planned["checks"]]
    assert audited["yield"]["yield"] == planned["yield"]["yield"]
    for p, q in zip(planned["stages"], audited["stages"]):
        assert p["topology"] == q["topology"] and p["components"] == q["components"]
        for k in ("f0_hz", "q", "gain"):
            assert q["built"][k] == pytest.approx(p["built"][k], rel=1e-9)
    assert planned["noise"]["integrated_vrms"] == pytest.approx(
        audited["noise"]["integrated_vrms"], rel=1e-9)


def test_audit_without_mask_reports_per_stage_figures(write_spec):
    a = audit(write_spec(CHAIN, "chain.toml"))
    assert not a.has_mask
    assert [st.topology for st in a.chain.stages] == ["sallen_key_highpass", "mfb_lowpass"]
    assert all(c.id != "mask" for c in a.checks)
    assert a.chain.stages[1].built.gain < 0  # the MFB lowpass inverts


BAD = [
    ("unknown topology", CHAIN.replace('"mfb_lowpass"', '"mfb_lowpas"'), "stage[1].topology",
     "did you mean 'mfb_lowpass'"),
    ("missing part", CHAIN.replace('R3 = "4k99", ', ""), "stage[1].parts.R3", "missing"),
    ("extra part", CHAIN.replace('R3 = "4k99"', 'R3 = "4k99", R9 = "1k"'),
     "stage[1].parts.R9", "no part R9"),
    ("negative part", CHAIN.replace('"4k99"', '"-5k"'), "stage[1].parts.R3", ""),
    ("zero part", CHAIN.replace('"4k99"', '"0"'), "stage[1].parts.R3", "> 0"),
    ("absurd part", CHAIN.replace('"4k99"', '"1e30"'), "stage[1].parts.R3", "plausible"),
    ("junk part", CHAIN.replace('"4k99"', '"four"'), "stage[1].parts.R3", ""),
    ("no stages", CHAIN.split("[[stage]]")[0], "stage", "no [[stage]]"),
    ("unknown stage key", CHAIN.replace('topology = "mfb_lowpass"',
                                        'topology = "mfb_lowpass"\ntopo = 1'),
     "stage[1].topo", "unknown key"),
]


@pytest.mark.parametrize("name,text,key,word", BAD, ids=[b[0] for b in BAD])
@pytest.mark.slow
def test_bad_chain_file_names_stage_and_part(name, text, key, word, tmp_path):
    p = tmp_path / "chain.toml"
    p.write_text(text)
    with pytest.raises(SpecError) as info:
        audit(p)
    assert info.value.key == key
    assert word in str(info.value)
    r = run_cli("audit", p, "--out", tmp_path / "o")
    assert r.returncode == 2 and "Traceback" not in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1
    assert not (tmp_path / "o").exists()


@pytest.mark.slow
def test_bom_lists_every_part_once_with_the_yield_tolerances(scenario_cli_out):
    """bom.csv: every element of the chain appears once under its designator, quantities add
    up to the element count, and the tolerances are those the yield was computed for (the
    scenario's [tolerance]: 0.1 % resistors, 1 % capacitors)."""
    import csv
    r, out = scenario_cli_out("lockin_mains")  # `plan SPEC --json --out DIR`, once a session
    assert r.returncode == 0, r.stderr
    rows = list(csv.DictReader((out / "bom.csv").read_text().splitlines()))
    refs = [d for row in rows for d in row["designators"].split()]
    assert len(refs) == len(set(refs)) == sum(int(row["quantity"]) for row in rows)
    deck = (out / "chain.cir").read_text().splitlines()
    # The chain's own elements in the deck carry their stage suffix ("R1a_s1", "XU1_s2").
    parts = [ln.split()[0] for ln in deck
             if ln[:1] in "RCX" and re.search(r"_s\d+$", ln.split()[0])]
    assert sorted(refs) == sorted(p[1:] if p.startswith("X") else p for p in parts)
    assert {row["tolerance"] for row in rows if row["part"] == "resistor"} == {"0.1 %"}
    assert {row["tolerance"] for row in rows if row["part"] == "capacitor"} == {"1 %"}
    assert {row["dielectric"] for row in rows if row["part"] == "capacitor"} <= {
        "C0G/NP0", "film (PPS/PP)"}
