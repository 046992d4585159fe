"""Each report kind in a real browser: headless Chromium (Debian package ``chromium``) renders it to a
screenshot without console errors, and every figure has a non-zero rendered size.

The page itself holds no script; the test renders a copy with a small inline script that records errors
(``window.onerror``, ``console.error``) and each svg's rendered size into the DOM, which Chromium's
``--dump-dom`` then prints. Without Chromium the test skips naming the package; with CI=true it fails.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess

import pytest

import support

pytest.importorskip("matplotlib", reason="matplotlib is not installed (the 'report' and 'test' extras)")

EXAMPLES = support.ROOT / "examples"
MEASURED = EXAMPLES / "measured"
PACKAGE = "chromium"

_PROBE_HEAD = """<script>
window.__errors = [];
window.addEventListener("error", function (e) { window.__errors.push("error: " + e.message); }, true);
(function () { var c = console.error; console.error = function () {
  window.__errors.push("console: " + Array.prototype.join.call(arguments, " ")); c.apply(console, arguments); }; })();
</script>"""
_PROBE_TAIL = """<script>
window.addEventListener("load", function () {
  var sizes = Array.prototype.map.call(document.querySelectorAll("svg"), function (s) {
    var r = s.getBoundingClientRect(); return [r.width, r.height]; });
  document.body.setAttribute("data-probe", JSON.stringify({sizes: sizes, errors: window.__errors}));
});
</script>"""


def _browser():
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    msg = f"Chromium is not installed (Debian package: {PACKAGE})"
    if support.IN_CI:
        pytest.fail(msg)
    pytest.skip(msg)


def _run(browser, *args, cwd):
    return subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
                           "--disable-extensions", "--allow-file-access-from-files", "--virtual-time-budget=5000",
                           "--enable-logging=stderr", "--v=0", *args], cwd=cwd, capture_output=True, text=True,
                          timeout=120, env={**os.environ, "HOME": str(cwd)})


def _reports(tmp_path):
    d = tmp_path / "lot"
    d.mkdir()
    res = support.run("lots", EXAMPLES / "lot_table.csv", "-o", d / "lot.lib", "--dialect", "ngspice", "-q")
    assert res.exit_code == 0, res.output
    sw = EXAMPLES / "switching_diode.toml"
    return {"device": ([sw], 5), "lot": ([d / "lot.summary.json"], 2), "corners": ([sw, "--corners=-40,27,125"], 5),
            "calibration": ([MEASURED / "testchip.toml", "--iv", MEASURED / "testchip_iv.csv", "--cv",
                             MEASURED / "testchip_cv.csv"], 2)}


def test_every_report_kind_renders_in_chromium(tmp_path):
    browser = _browser()
    for kind, (args, figures) in _reports(tmp_path).items():
        page = tmp_path / f"{kind}.html"
        res = support.run("report", *args, "-o", page)
        assert res.exit_code == 0, res.output
        text = page.read_text(encoding="utf-8")
        probe = tmp_path / f"{kind}-probe.html"
        probe.write_text(text.replace("<head>", "<head>\n" + _PROBE_HEAD, 1).replace("</body>", _PROBE_TAIL
                                                                                      + "</body>", 1),
                         encoding="utf-8")
        out = _run(browser, "--dump-dom", probe.as_uri(), cwd=tmp_path)
        found = re.search(r'data-probe="([^"]*)"', out.stdout)
        assert found, f"{kind}: no probe result from Chromium: {out.stderr[-2000:]}"
        data = json.loads(found.group(1).replace("&quot;", '"').replace("&amp;", "&"))
        assert data["errors"] == [], f"{kind}: {data['errors']}"
        assert len(data["sizes"]) == figures
        assert all(w > 0 and h > 0 for w, h in data["sizes"]), f"{kind}: {data['sizes']}"
        console = [ln for ln in out.stderr.splitlines() if "CONSOLE" in ln and ("Uncaught" in ln or "rror" in ln)]
        assert console == [], f"{kind}: {console}"
        # the page as it is (no probe) to a screenshot
        shot = tmp_path / f"{kind}.png"
        out = _run(browser, f"--screenshot={shot}", "--window-size=1200,2400", page.as_uri(), cwd=tmp_path)
        assert shot.exists() and shot.stat().st_size > 10_000, f"{kind}: {out.stderr[-2000:]}"
        assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert not [ln for ln in out.stderr.splitlines() if "CONSOLE" in ln], f"{kind}: {out.stderr[-2000:]}"
