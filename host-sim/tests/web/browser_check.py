"""The web view in a real browser: headless Chromium (Debian's chromium and chromium-driver,
driven by selenium from PyPI) loads the page of `sweepgate replay --web` while a recording
replays, checks that the plots grow as bins close, that the report appears at the end and
that the page logged no error, and saves a screenshot.

    python browser_check.py SWEEPGATE_BIN RECORDING WORK_DIR SCREENSHOT.png

Every address is on 127.0.0.1; every wait has a deadline. Exits non-zero on any failure,
and prints 'N passed, N failed' at the end.
"""

import os
import re
import subprocess
import sys
import tempfile
import threading
import time

from selenium import webdriver
from selenium.webdriver.chrome.service import Service

CHECKS = []


def check(name, ok, detail=""):
    CHECKS.append((name, bool(ok)))
    print(("ok   " if ok else "FAIL ") + name + (": " + detail if detail else ""), flush=True)


def start_replay(binary, recording, work):
    """Starts the replay, paced so that the scan takes some seconds; returns the process
    and the page's address (from the line the command prints)."""
    p = subprocess.Popen(
        [binary, "replay", recording, "--speed", "2", "--no-preview", "--web", "0",
         "--out", os.path.join(work, "report")],
        stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    lines = []
    url = None
    deadline = time.time() + 60
    while url is None and time.time() < deadline:
        line = p.stderr.readline()
        if not line:
            break
        lines.append(line)
        m = re.match(r"web view on (http://127\.0\.0\.1:\d+/)", line)
        if m:
            url = m.group(1)
    if url is None:
        p.kill()
        sys.exit("replay did not print the web view's address: " + "".join(lines))
    # Keep reading stderr so the command never blocks on a full pipe.
    threading.Thread(target=lambda: [None for _ in p.stderr], daemon=True).start()
    return p, url


def browser(profile):
    o = webdriver.ChromeOptions()
    o.binary_location = "/usr/bin/chromium"
    for a in ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
              "--disable-component-update", "--disable-sync", "--no-first-run",
              "--disable-quic", "--user-data-dir=" + profile, "--window-size=1280,1700"]:
        o.add_argument(a)
    o.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    return webdriver.Chrome(service=Service("/usr/bin/chromedriver"), options=o)


def main():
    binary, recording, work, shot = sys.argv[1:5]
    os.makedirs(work, exist_ok=True)
    replay, url = start_replay(binary, recording, work)
    profile = tempfile.mkdtemp(prefix="chromium-", dir=work)
    d = browser(profile)
    try:
        d.set_page_load_timeout(30)
        d.get(url)
        seen = []
        total = None
        deadline = time.time() + 240
        ended = False
        while time.time() < deadline:
            n = d.execute_script("return window.sweepgateView.binsDrawn")
            total = d.execute_script("return view.meta.total_bins")
            if not seen or seen[-1] != n:
                seen.append(n)
            ended = d.execute_script("return !document.getElementById('report').hidden")
            if ended:
                break
            time.sleep(0.2)
        growing = [b for a, b in zip(seen, seen[1:]) if b > a]
        check("the page loaded and named the scan", d.find_element("id", "title").text != "")
        check("the plots updated as bins closed (bins drawn rose at least 5 times)",
              len(growing) >= 5, "bins drawn over time: " + str(seen[:12]) + (" …" if len(seen) > 12 else ""))
        check("the report appeared when the scan ended", ended)
        time.sleep(1.0)
        final = d.execute_script("return window.sweepgateView.binsDrawn")
        check("every bin is drawn at the end", total is not None and final == total,
              f"{final} of {total}")
        imgs = d.execute_script(
            "return [...document.querySelectorAll('#report-plots img')].map(i => [i.alt, i.naturalWidth])")
        check("the report's plots loaded", len(imgs) >= 2 and all(w > 0 for _, w in imgs), str(imgs))
        impulses = d.execute_script("return view.impulses.size")
        check("the angle × delay map got impulse-response records (one bin in 4)",
              total is not None and impulses == -(-total // 4), f"{impulses} records for {total} bins")
        # The cursor: move over the rectangular plot, the readout names an angle.
        d.execute_script(
            "const c=document.getElementById('rect'), b=c.getBoundingClientRect();"
            "c.dispatchEvent(new MouseEvent('click',{clientX:b.left+b.width*0.52,clientY:b.top+100}));")
        time.sleep(0.5)
        readout = d.find_element("id", "marker-table").text
        check("markers and the cursor readout are shown",
              "−3 dB width, gated" in readout and "(held)" in readout and "°" in readout,
              readout.replace("\n", " | ")[:200])
        logs = d.get_log("browser")
        bad = [l for l in logs if l.get("level") in ("SEVERE", "ERROR")]
        check("the page logged no error", not bad, str(bad[:3]))
        d.save_screenshot(shot)
        check("screenshot saved", os.path.getsize(shot) > 10_000, shot)
    finally:
        d.quit()
        replay.kill()
        replay.wait()
    passed = sum(ok for _, ok in CHECKS)
    failed = len(CHECKS) - passed
    print(f"browser: {passed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
