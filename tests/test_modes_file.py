"""The mode file (TOML or JSON): both forms, units, round trip, and errors that name file, key and line."""

import json

import numpy as np
import pytest
import scipy.constants as sc
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from basinmark.core.errors import BasinmarkError
from basinmark.core.mode_file import ModeFileError, mode_file_text
from basinmark.core.modes import modes_from_hessian, read_modes, write_modes

SYMBOLS = ["O", "H", "H"]
X = np.array([[0.0, 0.0, 0.12], [0.0, 0.76, -0.47], [0.0, -0.76, -0.47]])


def _hessian():
    pairs = [((0, 1), 50.0), ((0, 2), 50.0), ((1, 2), 8.0)]
    h = np.zeros((9, 9))
    for (i, j), k in pairs:
        u = (X[i] - X[j]) / np.linalg.norm(X[i] - X[j])
        block = k * np.outer(u, u)
        for a, b, s in ((i, i, 1), (j, j, 1), (i, j, -1), (j, i, -1)):
            h[3 * a:3 * a + 3, 3 * b:3 * b + 3] += s * block
    return h


H = _hessian()
REF = modes_from_hessian(SYMBOLS, X, H)


def _rows(a) -> str:
    return "[\n" + ",\n".join("  [" + ", ".join(repr(float(v)) for v in row) + "]" for row in a) + "\n]"


def _hessian_toml(h=H, unit="eV/Å^2", extra="") -> str:
    return (f'format = "basinmark-modes"\nversion = 1\nsymbols = ["O", "H", "H"]\npositions = {_rows(X)}\n{extra}'
            f'\n[hessian]\nunit = "{unit}"\nvalues = {_rows(h)}\n')


def _same_modes(a, b):
    np.testing.assert_allclose(a.frequencies_cm1, b.frequencies_cm1, rtol=1e-9)
    for u, v in zip(a.modes, b.modes):
        assert abs(np.sum(u * v)) == pytest.approx(1.0, abs=1e-9)


def test_hessian_form_toml_and_json(tmp_path):
    p = tmp_path / "ts.toml"
    p.write_text(_hessian_toml(), encoding="utf-8")
    m = read_modes(p)
    _same_modes(m, REF)
    assert m.symbols == tuple(SYMBOLS) and m.source == str(p)
    j = tmp_path / "ts.json"
    j.write_text(json.dumps({"symbols": SYMBOLS, "positions": X.tolist(),
                             "hessian": {"unit": "eV/Å^2", "values": H.tolist()}}, indent=1), encoding="utf-8")
    _same_modes(read_modes(j), REF)


def test_hessian_in_atomic_units(tmp_path):
    # hartree/bohr² → eV/Å² with CODATA (scipy.constants)
    factor = sc.physical_constants["Hartree energy in eV"][0] / (sc.physical_constants["Bohr radius"][0] * 1e10) ** 2
    p = tmp_path / "au.toml"
    p.write_text(_hessian_toml(H / factor, unit="hartree/bohr^2"), encoding="utf-8")
    np.testing.assert_allclose(read_modes(p).frequencies_cm1, REF.frequencies_cm1, rtol=1e-6)


def test_positions_in_bohr(tmp_path):
    bohr = sc.physical_constants["Bohr radius"][0] * 1e10
    text = _hessian_toml().replace(f"positions = {_rows(X)}", f'positions = {_rows(X / bohr)}\nlength_unit = "bohr"')
    p = tmp_path / "b.toml"
    p.write_text(text, encoding="utf-8")
    np.testing.assert_allclose(read_modes(p).positions, X, atol=1e-6)


def test_round_trip_modes_form(tmp_path):
    p = tmp_path / "modes.toml"
    write_modes(p, REF, comment="made by a test")
    text = p.read_text(encoding="utf-8")
    assert text.startswith("# made by a test\n") and 'vectors_are = "mass-weighted"' in text
    back = read_modes(p)
    np.testing.assert_allclose(back.frequencies_cm1, REF.frequencies_cm1, rtol=1e-15)
    np.testing.assert_allclose(back.modes, REF.modes, atol=1e-12)
    np.testing.assert_allclose(back.masses, REF.masses, rtol=1e-15)


def test_cartesian_vectors_rounded_as_printed(tmp_path):
    # another program's usual output: Cartesian displacements, normalised its own way, 4 decimals
    cart = np.array([np.round(REF.cartesian(k) * 0.7, 4) for k in range(3)])
    doc = {"symbols": SYMBOLS, "positions": X.tolist(),
           "modes": {"frequencies_cm1": REF.frequencies_cm1[::-1].round(1).tolist(),
                     "vectors": cart[::-1].tolist(), "vectors_are": "cartesian"}}
    p = tmp_path / "cart.json"
    p.write_text(json.dumps(doc), encoding="utf-8")
    m = read_modes(p)
    assert m.frequencies_cm1.tolist() == sorted(m.frequencies_cm1.tolist())  # sorted again
    flat = m.modes.reshape(3, -1)
    np.testing.assert_allclose(flat @ flat.T, np.eye(3), atol=1e-12)  # orthonormal again
    for k in range(3):
        assert abs(np.sum(m.modes[k] * REF.modes[k])) == pytest.approx(1.0, abs=1e-4)


def _error(tmp_path, text, name="bad.toml") -> ModeFileError:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    with pytest.raises(ModeFileError) as info:
        read_modes(p)
    assert str(p) in str(info.value)
    return info.value


def test_errors_name_key_and_line(tmp_path):
    e = _error(tmp_path, _hessian_toml(extra="colour = 3\n"))
    assert e.key == "colour" and e.line == 9 and "unknown key" in str(e)
    e = _error(tmp_path, _hessian_toml(H[:6, :6]))
    assert e.key == "hessian.values" and "must be 9 × 9" in str(e)
    assert e.line == _hessian_toml().splitlines().index("values = [") + 1
    e = _error(tmp_path, _hessian_toml(unit="eV/bohr"))
    assert e.key == "hessian.unit" and "unknown Hessian unit" in str(e)
    asym = H.copy()
    asym[0, 4] += 1.0
    assert "not symmetric" in str(_error(tmp_path, _hessian_toml(asym)))
    e = _error(tmp_path, _hessian_toml().replace('"H", "H"]', '"H", "Qq"]'))
    assert e.key == "symbols" and "unknown chemical symbol" in str(e) and e.line == 3
    e = _error(tmp_path, _hessian_toml().replace("[0.0, 0.76, -0.47]", '[0.0, "x", -0.47]'))
    assert e.key == "positions" and "item 2 item 2 is 'x', not a number" in str(e)
    e = _error(tmp_path, 'symbols = ["H", "H"]\npositions = [[0,0,0],[0,0,1]]\n')
    assert "exactly one of [hessian] or [modes]" in str(e)
    e = _error(tmp_path, _hessian_toml() + "\n[modes]\nfrequencies_cm1 = [1.0]\nvectors = [[[0,0,1]]]\n")
    assert "(both are here)" in str(e)
    e = _error(tmp_path, "symbols = [\n")
    assert e.line is not None and "not valid TOML" in str(e)
    e = _error(tmp_path, '{"symbols": ["H", "H"],\n "positions": [1, 2,\n}', name="bad.json")
    assert e.line == 3 and "not valid JSON" in str(e)
    e = _error(tmp_path, _hessian_toml().replace('format = "basinmark-modes"', 'format = "other"'))
    assert e.key == "format" and e.line == 1
    e = _error(tmp_path, _hessian_toml().replace("version = 1", "version = 7"))
    assert "version 7 is not known" in str(e)
    assert isinstance(e, BasinmarkError)


def test_vectors_that_are_not_normal_modes_are_refused(tmp_path):
    vec = REF.modes.copy()
    vec[1] = vec[0] + 0.3 * vec[2]
    doc = {"symbols": SYMBOLS, "positions": X.tolist(),
           "modes": {"frequencies_cm1": [1.0, 2.0, 3.0], "vectors": vec.tolist()}}
    e = _error(tmp_path, json.dumps(doc, indent=1), name="v.json")
    assert e.key == "modes.vectors" and "modes 1 and 2 overlap" in str(e) and e.line is not None
    doc["modes"]["vectors"] = [[[1.0, 0.0, 0.0]] * 3] + REF.modes[1:].tolist()  # a pure translation
    assert "moves the molecule as a whole" in str(_error(tmp_path, json.dumps(doc), name="t.json"))
    doc["modes"]["vectors"] = REF.modes[:2].tolist()
    assert "must be 3 modes" in str(_error(tmp_path, json.dumps(doc), name="n.json"))


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(cut=st.integers(0, 2000), junk=st.text(max_size=8))
def test_damaged_files_give_only_our_error(tmp_path, cut, junk):
    # property: a mode file damaged anywhere is read or refused with a ModeFileError, nothing else
    text = mode_file_text(REF)
    cut = min(cut, len(text))
    p = tmp_path / "damaged.toml"
    p.write_text(text[:cut] + junk + text[cut + len(junk):], encoding="utf-8")
    try:
        read_modes(p)
    except ModeFileError:
        pass
