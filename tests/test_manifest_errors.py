"""Manifest errors name the file, the key and the line; a UTF-8 byte-order mark is accepted in every TOML file."""

from __future__ import annotations

import re

import pytest

from basinmark.core.errors import BasinmarkError, SetError
from basinmark.core.manifest import MANIFEST_NAME, load_layout
from rules_examples import two_bond_rules

BOM = "\ufeff"


def _error(tmp_path, text: str) -> str:
    (tmp_path / MANIFEST_NAME).write_text(text, encoding="utf-8")
    with pytest.raises(SetError) as info:
        load_layout(tmp_path)
    return str(info.value)


# (manifest text, key the message must name, line it must name, words it must say)
CASES = [
    ('name = "x"\n[files]\nbackward = 5\n', "backward", 3, "text or a list of texts"),
    ('[files]\nforward = ["{run}.f.xyz", 7]\n', "forward", 2, "text or a list of texts"),
    ('[files]\njoined = "run.xyz"\n', "joined", 2, "{run}"),
    ('[files]\nfolders = 3\n', "folders", 2, "text or a list of texts"),
    ('\n[units]\ntime = 5\n', "time", 3, "fs"),
    ('[units]\nenergy = "kcal"\n', "energy", 2, "kcal/mol"),
    ('[units]\nlength = "parsec"\n', "length", 2, "bohr"),
    ('[keys]\npotential = 1.5\n', "potential", 2, "text or a list of texts"),
    ('[keys]\nenthalpy = "h"\n', "enthalpy", 2, "unknown key"),
    ('[time]\nstep_fs = "half"\n', "step_fs", 2, "positive number"),
    ('[time]\nstep_fs = -1\n', "step_fs", 2, "positive number"),
    ('[time]\nstep_fs = true\n', "step_fs", 2, "positive number"),
    ('[time]\nbackward = "sideways"\n', "backward", 2, "auto, elapsed or signed"),
    ('# a comment\nname = 3\n', "name", 2, "text"),
    ('files = "x"\n', "files", 1, "table"),
    ('[filez]\nbackward = "a"\n', "filez", 1, "unknown key"),
    ('[units]\ntime = "fs"\n[units]\nenergy = "eV"\n', None, 3, "TOML"),
    ('[files]\nbackward = "{run}.b.xyz"\n  forward = [1, 2\n', None, 3, "TOML"),
]


@pytest.mark.parametrize("text, key, line, words", CASES)
def test_manifest_errors_name_file_key_and_line(tmp_path, text, key, line, words):
    msg = _error(tmp_path, text)
    assert msg.startswith(f"{tmp_path / MANIFEST_NAME}, line {line}: "), msg
    if key is not None:
        assert re.search(rf"\b{re.escape(key)}\b", msg), msg
    assert words in msg, msg
    # never a Python-internal sentence
    for internal in ("object is not iterable", "could not convert", "has no attribute", "NoneType"):
        assert internal not in msg, msg


def test_a_byte_order_mark_is_accepted_in_the_manifest(tmp_path):
    (tmp_path / MANIFEST_NAME).write_bytes((BOM + 'name = "marked"\n[units]\ntime = "ps"\n').encode("utf-8"))
    layout = load_layout(tmp_path)
    assert layout.name == "marked" and layout.time_factor == 1000.0


def test_a_byte_order_mark_is_accepted_in_the_rules(tmp_path):
    from basinmark.core.rules import load_rules

    path = tmp_path / "basins.toml"
    path.write_bytes((BOM + two_bond_rules("bom", "start", 10.0)).encode("utf-8"))
    rules = load_rules(path, n_atoms=3)
    assert rules.name == "bom"


def test_every_toml_reader_goes_through_the_shared_loader():
    """No module parses TOML on its own: one loader strips the mark and says where a syntax error is."""
    from pathlib import Path

    import basinmark

    src = Path(basinmark.__file__).parent
    direct = [p.relative_to(src).as_posix() for p in src.rglob("*.py")
              if "tomllib.loads" in p.read_text(encoding="utf-8") or "tomllib.load(" in p.read_text(encoding="utf-8")]
    assert direct == ["core/toml_text.py"], direct


def test_shared_loader_names_file_and_line_of_a_syntax_error(tmp_path):
    from basinmark.core.toml_text import TomlTextError, loads

    with pytest.raises(TomlTextError) as info:
        loads(BOM + 'a = 1\nb = "open\n', source="x.toml")
    assert info.value.line == 2 and str(info.value).startswith("x.toml, line 2: ")
    assert isinstance(info.value, BasinmarkError)
