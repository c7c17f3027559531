#!/usr/bin/env python3
"""Opens a veer HTML report in headless Chromium and checks that it stands alone.

Usage: check_report.py REPORT.html SCREENSHOT.png [MIN_PLOTS]

Checks, each failing with a message and exit code 1:
  * the file names no address at all (no http:, https:, //host, src= or href=) and has no script;
  * Chromium loads it with no console error (its log on stderr, "ERROR:CONSOLE"/"Uncaught");
  * Chromium's network log shows no request other than the file itself;
  * the page as rendered (the DOM Chromium dumps) holds at least MIN_PLOTS inline SVG plots;
  * a screenshot is written (full page, 1200 px wide).
Only the standard library is used.
"""

import json
import os
import re
import shutil
import subprocess
import sys
import tempfile

FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
    "--disable-default-apps",
    "--disable-extensions",
]


def fail(msg):
    print(f"check_report: FAIL: {msg}", file=sys.stderr)
    sys.exit(1)


def chromium():
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    fail("no chromium on PATH")


def run(browser, args, profile):
    cmd = [browser, *FLAGS, f"--user-data-dir={profile}", "--enable-logging=stderr", "--v=0", *args]
    p = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    return p


def main():
    if len(sys.argv) < 3:
        fail("usage: check_report.py REPORT.html SCREENSHOT.png [MIN_PLOTS]")
    report, shot = os.path.abspath(sys.argv[1]), os.path.abspath(sys.argv[2])
    min_plots = int(sys.argv[3]) if len(sys.argv) > 3 else 3
    html = open(report, encoding="utf-8").read()
    for pat in (r"https?:", r"""["'(]//[a-z0-9]""", r"\ssrc\s*=", r"\shref\s*=", r"<script", r"@import", r"url\("):
        m = re.search(pat, html, re.IGNORECASE)
        if m:
            fail(f"the report refers to something outside itself: {html[max(0, m.start() - 40):m.end() + 40]!r}")
    browser = chromium()
    url = "file://" + report
    with tempfile.TemporaryDirectory() as profile, tempfile.TemporaryDirectory() as work:
        netlog = os.path.join(work, "net.json")
        p = run(browser, [f"--log-net-log={netlog}", "--dump-dom", url], profile)
        if p.returncode != 0:
            fail(f"chromium exited {p.returncode}: {p.stderr[-2000:]}")
        dom = p.stdout
        for line in p.stderr.splitlines():
            if "ERROR:CONSOLE" in line or "Uncaught" in line or ":CONSOLE(" in line:
                fail(f"console message while loading: {line}")
        plots = len(re.findall(r"<svg[\s>]", dom))
        if plots < min_plots:
            fail(f"the rendered page holds {plots} SVG plots, expected at least {min_plots}")
        # The URLs the page asked for, from the net log. The browser's own background traffic
        # (update checks, clock, accounts; not switched off by every flag) carries the initiator
        # "not an origin"; a request made by the page carries the page's origin ("null" for a
        # file). The log's last line may be unterminated: it is read with a repair.
        urls, page = set(), set()
        text = open(netlog, encoding="utf-8", errors="replace").read()
        try:
            log = json.loads(text)
        except ValueError:
            log = json.loads(text.rstrip().rstrip(",") + "]}")
        by_source = {}
        for ev in log.get("events", []):
            params = ev.get("params") or {}
            src = (ev.get("source") or {}).get("id")
            entry = by_source.setdefault(src, {"url": None, "page": False})
            if params.get("url"):
                entry["url"] = params["url"]
                urls.add(params["url"])
            init = params.get("initiator")
            if init is not None and init != "not an origin":
                entry["page"] = True
        for entry in by_source.values():
            if entry["page"] and entry["url"] and not entry["url"].startswith(("file:", "data:")):
                page.add(entry["url"])
        if page:
            fail(f"network requests made by the page: {sorted(page)}")
        p = run(browser, [f"--screenshot={shot}", "--window-size=1200,3000", "--hide-scrollbars", url], profile)
        if p.returncode != 0 or not os.path.exists(shot) or os.path.getsize(shot) == 0:
            fail(f"no screenshot written: {p.stderr[-2000:]}")
    print(f"check_report: ok: {plots} plots, no console errors, no network request by the page "
          f"({len(urls)} URL(s) of the browser's own in the net log); screenshot {shot}")


if __name__ == "__main__":
    main()
