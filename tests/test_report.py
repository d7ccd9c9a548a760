"""`driven-atom report DIR`: one self-contained HTML file, checked by parsing it always and in a
headless browser when one is installed (interface checks: no reference values)."""
import base64
import json
import shutil
import subprocess
from concurrent.futures import ThreadPoolExecutor
from html.parser import HTMLParser

import pytest

import driven_atom
from driven_atom.cli import main

# Kestrel Hollow beam line: on the Lyman-alpha line (done), at 200 nm (runs, flagged by the RWA check:
# detuning 0.39 of the transition frequency, soft limit 0.1) and at 300 nm (refused: 0.595 > 0.5)
CONFIG = {"atom": {"Z": 1, "nucleus": "H"},
          "pulse": [{"envelope": "gaussian", "wavelength": "121.5684456 nm", "intensity": "1e8 W/cm^2",
                     "fwhm": "100 fs"}],
          "solver": {"route": "levels", "states": ["1s", "2p"]},
          "scan": {"pulse.0.intensity": ["1e8 W/cm^2", "1e9 W/cm^2"],
                   "pulse.0.wavelength": ["121.5684456 nm", "200 nm", "300 nm"]}}
VOID = {"meta", "img", "br", "hr", "input", "link", "col", "area", "base", "embed", "source", "wbr"}


class _Checker(HTMLParser):
    """Balanced tags, and every resource inline."""

    def __init__(self):
        super().__init__()
        self.stack, self.errors, self.images, self.text, self.tags = [], [], [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        attrs = dict(attrs)
        for key in ("src", "href"):
            if key in attrs and not str(attrs[key]).startswith(("data:", "#")):
                self.errors.append(f"external {key}: {attrs[key][:60]}")
        if tag == "img":
            self.images.append(attrs.get("src", ""))
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"unbalanced </{tag}> (open: {self.stack[-3:]})")
        else:
            self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report") / "kestrel"
    with ThreadPoolExecutor(2) as pool:
        driven_atom.scan(CONFIG, folder, executor=pool, progress=False)
    return folder


def _parse(path):
    checker = _Checker()
    checker.feed(path.read_text(encoding="utf-8"))
    checker.close()
    return checker


def test_report_is_one_self_contained_valid_html_file(report, tmp_path, capsys):
    out = tmp_path / "report.html"
    assert main(["report", str(report), "--out", str(out), "--json"]) == 0
    payload = json.loads(capsys.readouterr().out)
    assert payload == {"report": str(out), "total": 6, "done": 4, "failed": 2}
    checker = _parse(out)
    assert checker.errors == [] and checker.stack == []
    assert "script" not in checker.tags and "link" not in checker.tags and "iframe" not in checker.tags
    (image,) = checker.images
    png = base64.b64decode(image.split("base64,", 1)[1])
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and len(png) > 10_000
    text = " ".join(checker.text)
    for needed in ("Provenance", "Plan", "Settings", "Jobs", "Quality flags", "config hash", "CPU time",
                   "driven-atom 0.2.0", "rwa_detuning_pulse0", "W/cm^2", "last job written"):
        assert needed in text, needed
    assert text.count("failed") >= 2 and "soft" in text           # the failed jobs and the flagged one
    assert list(tmp_path.iterdir()) == [out]                      # written atomically: no temp file left


def test_report_default_path_and_bad_suffix(report, capsys):
    assert main(["report", str(report)]) == 0
    assert capsys.readouterr().out.strip() == f"report written to {report / 'report.html'}"
    assert main(["report", str(report), "--out", str(report / "r.txt")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "`--out`" in err and not (report / "r.txt").exists()


BROWSERS = ("chromium-headless-shell", "chromium", "chromium-browser", "google-chrome", "google-chrome-stable", "chrome")


def test_report_renders_in_a_headless_browser(report, tmp_path):
    browser = next((shutil.which(name) for name in BROWSERS if shutil.which(name)), None)
    if browser is None:
        pytest.skip("no headless browser (chromium or chrome) installed on this machine")
    out = tmp_path / "report.html"
    assert main(["report", str(report), "--out", str(out)]) == 0
    dom = subprocess.run([browser, "--headless", "--disable-gpu", "--no-sandbox", "--dump-dom", out.as_uri()],
                         capture_output=True, text=True, timeout=120)
    assert dom.returncode == 0, dom.stderr[-500:]
    assert "Campaign report: kestrel" in dom.stdout and "data:image/png;base64," in dom.stdout
