"""The README's first command: install, then the demo scan, its table and its figure (an interface
check of the shipped demo; its numbers are invented lab settings, not reference values)."""
import re
import shutil
import subprocess
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def _first_command() -> str:
    blocks = re.findall(r"```bash\n(.*?)\n```", (REPO / "README.md").read_text(encoding="utf-8"), re.S)
    return blocks[0].strip()


def test_the_first_command_installs_and_runs_the_demo_scan():
    steps = [s.strip() for s in _first_command().split("&&")]
    assert steps[:3] == ["python3 -m venv .venv", ". .venv/bin/activate", "pip install -e ."]
    assert steps[3].startswith("driven-atom scan configs/demo_scan.toml --out ")
    assert [s.split()[1] for s in steps[3:]] == ["scan", "collect", "plot"]


def test_the_demo_scan_leaves_its_table_and_figure(tmp_path):
    from driven_atom.campaign.scan import expand

    plan = expand(REPO / "configs" / "demo_scan.toml")
    assert 20 <= len(plan.unique_jobs()) <= 60                                  # a few dozen jobs
    assert {a.path for a in plan.axes} == {"pulse.0.intensity", "pulse.0.wavelength"}
    shutil.copytree(REPO / "configs", tmp_path / "configs")
    command = " && ".join(_first_command().split("&&")[3:])
    bin_dir = Path(sys.executable).parent
    out = subprocess.run(command, shell=True, cwd=tmp_path, capture_output=True, text=True, timeout=300,
                         env={"PATH": f"{bin_dir}:/usr/bin:/bin", "HOME": str(tmp_path)})
    assert out.returncode == 0, out.stderr[-2000:]
    folder = tmp_path / command.split("--out ")[1].split()[0]
    figure = folder / "summary.png"
    assert figure.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and figure.stat().st_size > 30_000
    assert "P(2p)" in out.stdout and f"figure written to {figure.relative_to(tmp_path)}" in out.stdout
    assert "28/28 done" in out.stdout and "CAUTION" not in out.stdout + out.stderr
