"""The expansions kept on disk (``circuits.expansion_cache``): what is read back is what
the 2^n determinants give (the Moebius derivation itself is checked against the
determinant path in test_expansion.py), a damaged entry is derived again, and with the
cache off nothing is written."""

from __future__ import annotations

import numpy as np
import pytest

from bandwright.circuits import expansion, expansion_cache, mfb_bandpass
from bandwright.parts.catalogue import archetype
from bandwright.sections.section import Section


def _arrays():
    sec = Section("bandpass", 2000.0, 5.0, 2.0)
    el = mfb_bandpass.elements(mfb_bandpass.design(sec, c_farads=1e-8), archetype("fast"))
    key = expansion.structure_key(el, out_net="out", input_net="in", source_ohms=0.0)
    f, u, *_ = expansion._stamps(key)
    return f, u


@pytest.fixture
def cache(tmp_path, monkeypatch):
    monkeypatch.setenv(expansion_cache.CACHE_VARIABLE, str(tmp_path))
    return tmp_path / "expansions"


def test_entry_read_back_equals_derivation(cache):
    f, u = _arrays()
    derived = expansion._moebius_derive(f, u)
    first = expansion._moebius(f, u)            # derives and stores
    assert len(list(cache.glob("*.npz"))) == 1
    again = expansion._moebius(f, u)            # reads
    for a, b, c in zip(derived, first, again):
        np.testing.assert_array_equal(a, b)
        np.testing.assert_array_equal(a, c)
    assert again[1].dtype == np.int64 and again[0].dtype == bool


def test_damaged_entry_is_derived_again(cache):
    f, u = _arrays()
    expansion._moebius(f, u)
    (entry,) = cache.glob("*.npz")
    entry.write_bytes(b"not an npz file")
    masks, coefs = expansion._moebius(f, u)
    np.testing.assert_array_equal(coefs, expansion._moebius_derive(f, u)[1])
    assert expansion_cache.load(entry.stem, u.shape[0]) is not None   # rewritten


def test_entry_of_another_shape_is_not_used(cache):
    f, u = _arrays()
    key = expansion_cache.key_of(f, u)
    expansion_cache.store(key, np.ones((3, u.shape[0] + 1), bool), np.ones(3, np.int64))
    assert expansion_cache.load(key, u.shape[0]) is None


def test_key_follows_the_wiring(cache):
    f, u = _arrays()
    u2 = u.copy()
    u2[0] = 0
    assert expansion_cache.key_of(f, u) != expansion_cache.key_of(f, u2)


@pytest.mark.parametrize("setting", ["", "off"])
def test_cache_off_writes_nothing(tmp_path, monkeypatch, setting):
    monkeypatch.setenv(expansion_cache.CACHE_VARIABLE, setting)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    f, u = _arrays()
    expansion._moebius(f, u)
    assert expansion_cache.cache_dir() is None
    assert not any(tmp_path.iterdir())


def test_unwritable_folder_only_means_no_cache(tmp_path, monkeypatch):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    monkeypatch.setenv(expansion_cache.CACHE_VARIABLE, str(blocker))   # a file, not a folder
    f, u = _arrays()
    masks, coefs = expansion._moebius(f, u)
    np.testing.assert_array_equal(coefs, expansion._moebius_derive(f, u)[1])
