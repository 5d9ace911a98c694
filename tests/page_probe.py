"""Measure a report page in headless Chromium at a given viewport width.

Chromium's headless window has a minimum width (about 500 px), so the page is loaded into an
``<iframe srcdoc>`` of the asked width inside a wrapper page; when the frame has loaded, a
script measures it and writes the numbers into the wrapper's DOM, which ``--dump-dom`` prints.
Measured: the page's scroll width against the viewport, each equation's drawn width over its
natural (SVG attribute) width, elements that stick out of the viewport outside the scrolling
boxes (table cards, equation boxes, code blocks), and each table's height and width against
its card.
"""

from __future__ import annotations

import html
import json
import re
import subprocess
from pathlib import Path

PROBE = r"""
function kinfitProbe(win) {
  var doc = win.document, vw = win.innerWidth;
  var out = {viewport: vw, page: doc.documentElement.scrollWidth, equations: [],
             overflow: [], tables: {}};
  doc.querySelectorAll('.eq-svg').forEach(function (s) {
    out.equations.push(s.getBoundingClientRect().width / s.width.baseVal.value);
  });
  doc.querySelectorAll('table').forEach(function (t) {
    var cap = t.querySelector('caption'), wrap = t.closest('.table-wrap');
    var r = t.getBoundingClientRect();
    out.tables[cap ? cap.textContent.split('.')[0] : ''] = {
      height: r.height, width: r.width, card: wrap ? wrap.clientWidth : null,
      caption: cap ? cap.textContent : ''};
  });
  doc.querySelectorAll('body *').forEach(function (e) {
    if (e.closest('.table-wrap') || e.closest('.eq-body') || e.closest('pre')) return;
    var r = e.getBoundingClientRect();
    if (r.width > 0 && r.right > vw + 1) out.overflow.push(e.tagName + '.' + e.className);
  });
  var pre = document.createElement('pre');
  pre.id = 'kinfit-probe';
  pre.textContent = JSON.stringify(out);
  document.body.appendChild(pre);
}
"""


def measure(exe: str, page: Path, width: int, work: Path, *, height: int = 900) -> dict:
    """The measurements of ``page`` (an HTML file) at ``width`` CSS pixels."""
    wrapper = work / f"probe_{width}.html"
    doc = html.escape(page.read_text(encoding="utf-8"), quote=True)
    wrapper.write_text(
        "<!DOCTYPE html><html><head><meta charset='utf-8'><style>body{margin:0}"
        f"iframe{{border:0;width:{width}px;height:{height}px}}</style><script>{PROBE}"
        "</script></head><body><iframe onload='kinfitProbe(this.contentWindow)' "
        f'srcdoc="{doc}"></iframe></body></html>', encoding="utf-8")
    profile = work / f"profile_{width}"
    profile.mkdir(exist_ok=True)
    cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           f"--user-data-dir={profile}", f"--window-size={max(width, 800) + 40},{height + 40}",
           "--virtual-time-budget=5000", "--dump-dom", wrapper.resolve().as_uri()]
    proc = subprocess.run(cmd, capture_output=True, timeout=120, check=False, text=True)
    m = re.search(r'<pre id="kinfit-probe">(.*?)</pre>', proc.stdout, re.S)
    if m is None:
        raise AssertionError("the probe wrote nothing: " + proc.stderr[-2000:])
    return json.loads(html.unescape(m.group(1)))
