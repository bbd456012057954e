"""Free-form comment lines (not key=value) read by a template or a regular expression from the manifest."""

from __future__ import annotations

import re
import warnings

import ase.units
import numpy as np
import pytest

from basinmark.core.errors import SetError
from basinmark.core.io.free_form import CommentFormat, template_regex
from basinmark.core.io.xyz import parse_xyz
from basinmark.core.manifest import load_layout
from basinmark.core.sets import open_set
from basinmark.core.units import energy_factor

LINE = "i = {i}, time = {t:.3f}, E = {e:.4f}"


def free_form_file(n: int = 4, step: float = 0.5, sign: float = 1.0, shift: float = 0.0) -> bytes:
    """A made-up three-atom run whose comment lines are prose with numbers, as some programs write."""
    out = []
    for i in range(n):
        out.append("3\n" + LINE.format(i=i, t=sign * step * i, e=-17.1603 + 0.001 * i) + "\n")
        out.append(f"C 0.0 0.0 {shift + 0.01 * i * sign:.3f}\nH 0.0 1.0 0.0\nH 1.0 0.0 0.0\n")
    return "".join(out).encode()


def test_template_reads_the_numbers_of_a_prose_line():
    fmt = CommentFormat(template_regex("i = {step}, time = {time}, E = {potential}"))
    values, missed, bad = fmt.extract([b"i = 5, time = 2.500, E = -17.1603", b"i=6,time=3.0D0, E = -1.7e1",
                                       b"nothing here"])
    assert values["time"][:2].tolist() == [2.5, 3.0] and values["potential"][:2].tolist() == [-17.1603, -17.0]
    assert values["step"][:2].tolist() == [5, 6]
    assert missed == [2] and bad == []


def test_template_pieces_any_text_and_literal_characters():
    rx = re.compile(template_regex("t[fs]={time} {*} (E={total})"))
    m = rx.search("step 3: t[fs]=1.5  anything at all (E=-2.5e-3)")
    assert m and m.group("time") == "1.5" and m.group("total") == "-2.5e-3"
    with pytest.raises(ValueError, match="names no field"):
        template_regex("time = 5")
    with pytest.raises(ValueError, match="not a field"):
        template_regex("time = {1x}")


@pytest.mark.parametrize("fixed_width", [True, False])
def test_a_file_read_with_a_regex_and_units(fixed_width):
    # the energy is in hartree here; the factor brings it to eV (the set's unit), as the manifest would
    fmt = CommentFormat(r"time\s*=\s*(?P<time>[-+.\dEeDd]+),.*E\s*=\s*(?P<potential>\S+)",
                        (("potential", energy_factor("hartree") / energy_factor("eV")),))
    block = parse_xyz(free_form_file(), "prose.xyz", comment_format=fmt, fixed_width=fixed_width)
    np.testing.assert_allclose(block.info["time"], [0.0, 0.5, 1.0, 1.5])
    # reference: ase.units.Hartree (ase's CODATA year may differ from ours in the 8th digit)
    np.testing.assert_allclose(block.info["potential"][0], -17.1603 * ase.units.Hartree, rtol=1e-7)
    assert "comment" not in block.text_info and block.warnings == []


def test_lines_the_template_does_not_fit_warn_once_with_the_first_line():
    data = free_form_file(3) + b"3\nsomething else\nC 0 0 0\nH 0 1 0\nH 1 0 0\n" * 2
    fmt = CommentFormat(template_regex(LINE.replace("{i}", "{step}").replace("{t:.3f}", "{time}")
                                       .replace("{e:.4f}", "{potential}")), (), "the [comment] template")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        block = parse_xyz(data, "mixed.xyz", comment_format=fmt)
    assert np.isnan(block.info["time"][3:]).all() and not np.isnan(block.info["time"][:3]).any()
    notes = [w for w in block.warnings if "do not match" in w]
    assert len(notes) == 1 and "2 of 5" in notes[0] and "line 17" in notes[0] and "template" in notes[0]


def write_set(folder, manifest: str | None, runs: int = 2, prose: bool = True):
    folder.mkdir()
    for r in range(runs):
        fwd, bwd = free_form_file(4, 0.5, +1.0), free_form_file(3, 0.5, -1.0)
        if not prose:  # lines that carry no time at all
            fwd, bwd = (re.sub(rb"i = (\d+).*", rb"snapshot \1", x) for x in (fwd, bwd))
        (folder / f"run{r + 1:03d}.fwd.xyz").write_bytes(fwd)
        (folder / f"run{r + 1:03d}.bwd.xyz").write_bytes(bwd)
    if manifest is not None:
        (folder / "basinmark-set.toml").write_text(manifest)


MANIFEST = """
[comment]
template = "i = {step}, time = {time}, E = {potential}"
units = { time = "ps", potential = "kcal/mol" }
"""


def test_a_set_whose_lines_are_prose_reads_its_time_and_energy_from_the_template(tmp_path):
    folder = tmp_path / "prose"
    write_set(folder, MANIFEST)
    tset = open_set(folder, use_cache=False)
    run = tset["run001"]
    # template time in ps → fs: 0.5 ps per frame is 500 fs (manifest units)
    np.testing.assert_allclose(run.times, [-1000.0, -500.0, 0.0, 500.0, 1000.0, 1500.0])
    np.testing.assert_allclose(run.energies["potential"][2], -17.1603 * energy_factor("kcal/mol"))
    assert not any("1 fs per frame" in w for w in tset.warnings)
    assert not any("no time" in p for p in run.problems)


def test_prose_with_commas_is_read_as_key_value_pairs_without_a_template(tmp_path):
    folder = tmp_path / "commas"
    write_set(folder, None)
    run = open_set(folder, use_cache=False)["run001"]
    np.testing.assert_allclose(run.times, [-1.0, -0.5, 0.0, 0.5, 1.0, 1.5])  # 'time = 0.500,' in fs


def test_without_a_template_the_assumed_step_is_said_for_the_set(tmp_path):
    folder = tmp_path / "plain"
    write_set(folder, None, prose=False)
    tset = open_set(folder, use_cache=False)
    notes = [w for w in tset.warnings if "1 fs per frame was assumed" in w]
    assert len(notes) == 1 and "2 of 2 runs" in notes[0] and "[comment]" in notes[0]
    assert any("looked for the keys time" in p for p in tset["run001"].problems)


def test_the_template_changes_the_reading_of_the_runs(tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    write_set(a, MANIFEST, runs=1)
    write_set(b, MANIFEST.replace('"ps"', '"fs"'), runs=1)
    ra, rb = open_set(a, use_cache=False)["run001"], open_set(b, use_cache=False)["run001"]
    assert ra.reading != rb.reading  # labels bound to the old reading are marked as data changed
    assert load_layout(a).fingerprint != load_layout(b).fingerprint


@pytest.mark.parametrize("text,words", [
    ('[comment]\ntemplate = "t={time}"\nregex = "t=(?P<time>.*)"\n', ["line 1", "either template"]),
    ('[comment]\nregex = "t=(?P<time>[0-9"\n', ["line 2", "[comment] regex"]),
    ('[comment]\nregex = "t=[0-9]+"\n', ["line 2", "names no field"]),
    ('[comment]\ntemplate = "t={time}"\nunits = { step = "fs" }\n', ["line 3", "units", "'step'"]),
    ('[comment]\ntemplate = "t={time}"\nunits = { time = "fortnights" }\n', ["line 3", "fortnights"]),
    ('[comment]\ntemplate = "t={time}"\nunits = { potential = "eV" }\n', ["potential is not a field"]),
    ('[comment]\npattern = "t={time}"\n', ["line 2", "unknown key 'pattern'"]),
    ('[comment]\ntemplate = "t = 5"\n', ["line 2", "names no field"]),
])
def test_manifest_errors_name_the_key_and_line(tmp_path, text, words):
    (tmp_path / "basinmark-set.toml").write_text(text)
    with pytest.raises(SetError) as err:
        load_layout(tmp_path)
    for w in words:
        assert w in str(err.value), str(err.value)
