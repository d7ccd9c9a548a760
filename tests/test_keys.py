"""The key reference: `driven-atom keys`, docs/config.md generated from the models (interface checks)."""
import json
import re
from pathlib import Path

import pytest

from driven_atom.cli import main
from driven_atom.config import AtomConfig, FieldsConfig, OutputConfig, PulseConfig
from driven_atom.key_reference import markdown
from driven_atom.settings import SETTINGS

DOC = Path(__file__).resolve().parents[1] / "docs" / "config.md"
# keys the README's old solver table left out
ONCE_MISSING = {"levels": ["nsteps", "method", "max_step", "sampling_tol"],
                "basis": ["r_stretch", "max_step", "warn_population", "cache_dir", "spectrum_points",
                          "checkpoint_every"],
                "grid": ["absorber", "mask_power", "gauge", "photoelectron_e_max", "photoelectron_points"]}


def test_docs_config_md_is_what_the_models_generate():
    assert DOC.read_text(encoding="utf-8") == markdown(), \
        "docs/config.md is out of date: run `driven-atom keys --markdown > docs/config.md`"


def _documented(text: str) -> dict:
    """heading -> keys of the Markdown tables."""
    out, current = {}, None
    for line in text.splitlines():
        if line.startswith("## "):
            current = line[3:].strip("`")
            out[current] = []
        elif current and (m := re.match(r"\| `([^`]+)` \|", line)):
            out[current].append(m.group(1))
    return out


def test_every_key_of_every_model_appears():
    documented = _documented(DOC.read_text(encoding="utf-8"))
    for route, model in SETTINGS.items():
        assert documented[f'[solver] route = "{route}"'] == list(model.model_fields), route
        assert set(ONCE_MISSING[route]) <= set(model.model_fields)
    for heading, model in (("[atom]", AtomConfig), ("[fields]", FieldsConfig), ("[[pulse]]", PulseConfig),
                           ("[output]", OutputConfig)):
        assert documented[heading] == list(model.model_fields), heading


def test_keys_prints_type_unit_default_and_meaning(capsys):
    assert main(["keys", "basis", "--json"]) == 0
    (section,) = json.loads(capsys.readouterr().out)["sections"]
    rows = {row["key"]: row for row in section["keys"]}
    assert rows["r_max"] == {"key": "r_max", "type": "quantity > 0", "unit": "length", "default": "200 bohr",
                             "meaning": rows["r_max"]["meaning"]} and "box radius" in rows["r_max"]["meaning"]
    assert rows["checkpoint_every"]["default"] == "60 s" and rows["scheme"]["type"] == 'one of "cf6" | "cf4"'
    assert main(["keys", "pulse"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("[[pulse]]") and "wavelength  (quantity >= 2 bohr; unit: length; default: unset)" in out


@pytest.mark.parametrize("argv", [["keys", "solverr"], ["keys", "grid", "--markdown"]])
def test_bad_sections_are_one_line(argv, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and ("SECTION" in err or "--markdown" in err)
