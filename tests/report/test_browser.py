"""The HTML report in a real browser (headless Chromium): it loads without console errors
and shows every figure with a non-zero size.

Skipped when Chromium is not installed, unless the environment variable ``CI`` is set (then a
missing browser is a failure: CI installs Debian's ``chromium`` package).
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from gradients.report._html import CSP

CANDIDATES = ("/usr/bin/chromium", "/usr/bin/chromium-browser")

#: Collects errors (script errors, failed resource loads, console.error, security-policy
#: violations) and the size of every image, then writes them into the page for --dump-dom.
PROBE = """<script>
window.__errors = [];
window.addEventListener('error', e => window.__errors.push('error: ' +
  (e.message || (e.target && (e.target.src || e.target.tagName)) || e.type)), true);
document.addEventListener('securitypolicyviolation', e =>
  window.__errors.push('csp: ' + e.violatedDirective + ' ' + e.blockedURI));
for (const level of ['error', 'warn']) {
  const original = console[level];
  console[level] = (...args) => { window.__errors.push(level + ': ' + args.join(' '));
                                  original.apply(console, args); };
}
window.addEventListener('load', () => {
  const figures = [...document.querySelectorAll('img, svg')].map(el => {
    const r = el.getBoundingClientRect();
    return {tag: el.tagName, name: el.dataset.figure || '', width: r.width, height: r.height,
            natural: el.naturalWidth === undefined ? -1 : el.naturalWidth,
            complete: el.complete === undefined ? true : el.complete};
  });
  const out = document.createElement('pre');
  out.id = 'gradients-probe';
  out.textContent = JSON.stringify({figures, errors: window.__errors,
                                    sections: document.querySelectorAll('section').length});
  document.body.appendChild(out);
});
</script>"""


def _chromium() -> str | None:
    for c in CANDIDATES:
        if os.access(c, os.X_OK):
            return c
    return shutil.which("chromium")


def _render(page: Path, tmp_path: Path) -> tuple[dict, str]:
    browser = _chromium()
    if browser is None:
        if os.environ.get("CI"):
            pytest.fail("chromium is not installed (CI installs Debian's `chromium` package)")
        pytest.skip("chromium is not installed")
    args = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
            "--no-first-run", "--disable-background-networking", "--disable-component-update",
            "--disable-sync", "--disable-extensions", "--disable-dev-shm-usage",
            f"--user-data-dir={tmp_path / 'profile'}", "--enable-logging=stderr", "--v=0",
            "--virtual-time-budget=10000", "--window-size=1366,900", "--dump-dom",
            page.as_uri()]
    proc = subprocess.run(args, capture_output=True, text=True, timeout=120, check=False)
    assert proc.returncode == 0, proc.stderr[-2000:]
    m = re.search(r'<pre id="gradients-probe">(.*?)</pre>', proc.stdout, re.S)
    assert m, "the page did not finish loading:\n" + proc.stderr[-2000:]
    text = m.group(1).replace("&quot;", '"').replace("&lt;", "<").replace("&gt;", ">")
    return json.loads(text.replace("&amp;", "&")), proc.stderr


def _with_probe(report: Path, tmp_path: Path) -> Path:
    html = report.read_text(encoding="utf-8")
    assert CSP in html
    # the report forbids every script; the probe alone is let in, by a nonce
    probed = html.replace(CSP, CSP + "; script-src 'nonce-gradientsprobe'", 1)
    probed = probed.replace("<head>", "<head>" + PROBE.replace(
        "<script>", '<script nonce="gradientsprobe">', 1), 1)
    page = tmp_path / "report.html"
    page.write_text(probed, encoding="utf-8")
    return page


def test_report_renders_in_chromium(demo_report: Path, tmp_path: Path) -> None:
    page = _with_probe(demo_report / "report.html", tmp_path)
    result, stderr = _render(page, tmp_path)
    assert result["errors"] == []
    assert not re.search(r"Uncaught|Failed to load resource|Refused to", stderr), stderr[-2000:]
    figures = result["figures"]
    n_files = len(list((demo_report / "figures").glob("*.svg")))
    assert len(figures) == n_files >= 5
    for f in figures:
        assert f["complete"] and f["natural"] > 0, f
        assert f["width"] > 100 and f["height"] > 100, f
    assert result["sections"] >= 10


def test_probe_catches_a_broken_figure(demo_report: Path, tmp_path: Path) -> None:
    # the check itself can fail: a figure whose data is broken is reported
    html = (demo_report / "report.html").read_text(encoding="utf-8")
    broken = re.sub(r'src="data:image/svg\+xml;base64,[^"]*"',
                    'src="data:image/svg+xml;base64,AAAA"', html, count=1)
    (tmp_path / "broken.html").write_text(broken, encoding="utf-8")
    page = _with_probe(tmp_path / "broken.html", tmp_path)
    result, _ = _render(page, tmp_path)
    sizes = [(f["natural"], f["complete"]) for f in result["figures"]]
    assert any(n <= 0 for n, _ in sizes) or result["errors"]
