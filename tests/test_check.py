"""`driven-atom check`: the built-in validation runs, passes on this install, and reports a failure
(the reference values and their sources live in driven_atom/validation.py, beside each check)."""
import json

from driven_atom import validation
from driven_atom.cli import main


def test_every_check_passes_and_names_its_source(capsys):
    assert main(["check"]) == 0
    out = capsys.readouterr().out
    assert f"{len(validation.CHECKS)} of {len(validation.CHECKS)} checks passed" in out
    assert "Wiese & Fuhr" in out and "NIST ASD" in out and "FAILED" not in out


def test_json_and_selection(capsys):
    assert main(["check", "--only", "A(2p->1s)", "f(1s->2p)", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert (data["passed"], data["failed"]) == (2, 0)
    assert [row["name"] for row in data["checks"]] == ["A(2p->1s)", "f(1s->2p)"]
    assert all(row["deviation"] <= row["tolerance"] for row in data["checks"])


def test_a_failing_check_gives_exit_code_1(capsys, monkeypatch):
    wrong = validation.Check("deliberately wrong", lambda: 1.0, 2.0, 1e-3, "", "none: a test of the reporting")
    monkeypatch.setattr(validation, "CHECKS", validation.CHECKS + (wrong,))
    assert main(["check", "--only", "deliberately wrong"]) == 1
    assert "FAILED" in capsys.readouterr().out


def test_unknown_check_is_one_line_exit_2(capsys):
    assert main(["check", "--only", "no such check"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "unknown check" in err
