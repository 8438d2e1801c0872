"""`[supply] reference_v` and `[input] dc_v`: a single supply is a requirement, split rails
stay as they were (docs/design.md, second round)."""

from __future__ import annotations

import pytest

from bandwright.analysis.levels import swing_limit_vpk
from bandwright.errors import SpecError
from bandwright.inputs.loader import spec_from_dict

BASE = {"passband": {"center_hz": 1000.0, "bandwidth_hz": 300.0},
        "stopband": [{"freq_hz": 400.0, "min_loss_db": 20.0}]}


def _spec(supply=None, inp=None):
    doc = dict(BASE)
    if supply is not None:
        doc["supply"] = supply
    if inp is not None:
        doc["input"] = inp
    return spec_from_dict(doc, path="r.toml")


def test_single_supply_reference_defaults_to_mid_supply():
    s = _spec({"rails_v": [0, 3.3]}).supply
    assert s.single and s.reference_v == pytest.approx(1.65)
    # Swing around 1.65 V with 0.05 V to each rail: 1.6 Vpk (the issue's own figure).
    assert swing_limit_vpk(s, 0.05) == pytest.approx(1.6)


def test_off_centre_reference_limits_the_swing_by_the_nearer_rail():
    s = _spec({"rails_v": [0, 5], "reference_v": 2.0}).supply
    assert swing_limit_vpk(s, 0.5) == pytest.approx(1.5)  # 2.0 - 0 - 0.5


def test_split_rails_keep_ground_as_reference():
    s = _spec({"rails_v": [-2.5, 2.5]}).supply
    assert not s.single and s.reference_v == 0.0
    assert swing_limit_vpk(s, 1.0) == pytest.approx(1.5)


def test_dc_level_defaults_to_zero_and_is_read():
    assert _spec().input.dc_v == 0.0
    assert _spec({"rails_v": [0, 5]}, {"dc_v": 1.2}).input.dc_v == 1.2


@pytest.mark.parametrize("supply, inp, key, says", [
    ({"rails_v": [3.3, 0]}, None, "supply.rails_v", "reversed"),
    ({"rails_v": [5, 5]}, None, "supply.rails_v", "equal"),
    ({"rails_v": [0, 5], "reference_v": 0.0}, None, "supply.reference_v", "between the rails"),
    ({"rails_v": [0, 5], "reference_v": 5.5}, None, "supply.reference_v", "between the rails"),
    ({"rails_v": [-5, 5], "reference_v": 1.0}, None, "supply.reference_v", "split rails"),
    ({"rails_v": [0, 5]}, {"dc_v": 5.1}, "input.dc_v", "beyond the rails"),
    ({"rails_v": [-5, 5]}, {"dc_v": -6}, "input.dc_v", "beyond the rails"),
])
def test_bad_supply_and_level_name_their_key(supply, inp, key, says):
    with pytest.raises(SpecError) as err:
        _spec(supply, inp)
    assert err.value.key == key and says in str(err.value)
