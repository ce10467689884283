"""The web view in a real browser: headless Chromium (Debian's chromium and chromium-driver,
driven by selenium from PyPI) loads the page of `sweepgate replay --web` while a recording
replays, checks that the plots grow as bins close, that the report appears at the end and
that the page logged no error, and saves a screenshot.

Then an RCS scan: the shipped RCS range (host-sim/scenarios/rcs/range.toml) simulated as
recordings, `rcs --calibrated-recording` run on them, and the calibrated recording replayed
with `--web`: the page must name its levels "RCS (dBsm)" and draw, at each pattern
frequency, the levels of `rcs`'s own pattern.csv (the source of truth: the host's FFT path,
calibrated in f64) within 0.01 dB; the screenshot of that page goes beside the first one
(NAME-rcs.png).

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


def start_replay(binary, recording, work, pace=("--speed", "2"), report="report"):
    """Starts the replay, paced so that the scan takes some seconds; returns the process
    and the page's address (from the line the command prints)."""
    p = subprocess.Popen(
        [binary, "replay", recording, *pace, "--no-preview", "--web", "0",
         "--out", os.path.join(work, report)],
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


# `rcs`'s tolerance against the scan engine's f32 gating (as host-sim/tests/rcs_replay.rs).
RCS_TOLERANCE_DB = 0.01


def calibrated_rcs_scan(binary, work):
    """Simulates the shipped RCS range as recordings and runs `rcs --calibrated-recording`;
    returns the calibrated recording and rcs's pattern.csv."""
    scene = os.path.join(os.path.dirname(os.path.abspath(__file__)),
                         "..", "..", "scenarios", "rcs", "range.toml")
    rec = os.path.join(work, "rcs-rec")
    run = lambda *a: subprocess.run([binary, *a], check=True, stdout=subprocess.DEVNULL,
                                    stderr=subprocess.PIPE, timeout=300)
    run("simulate-rcs", "--scenario", scene, "--out", rec, "--recording")
    out = os.path.join(work, "rcs-report")
    cal = os.path.join(work, "rcs-calibrated.rec")
    run("rcs", os.path.join(rec, "target.rec"),
        "--background", os.path.join(rec, "background.rec"),
        "--reference", os.path.join(rec, "reference.rec"),
        "--reference-background", os.path.join(rec, "reference_background.rec"),
        "--sphere-diameter-m", "0.3", "--zone-distance-m", "4", "--zone-size-m", "0.6",
        "--antenna-separation-m", "0.3", "--time-zero-ns", "1.5", "--mount-distance-m", "4.8",
        "--frequencies-hz", "9e9,10e9,11e9", "--out", out, "--calibrated-recording", cal)
    return cal, os.path.join(out, "pattern.csv")


def read_pattern(path):
    """(round(angle·1000), frequency) → rcs_dbsm from rcs's pattern.csv."""
    with open(path) as f:
        lines = [l.strip() for l in f if l.strip()]
    head = lines[0].split(",")
    ia, jf, jr = head.index("angle_deg"), head.index("frequency_hz"), head.index("rcs_dbsm")
    out = {}
    for l in lines[1:]:
        c = l.split(",")
        out[(round(float(c[ia]) * 1000), float(c[jf]))] = float(c[jr])
    return out


def rcs_page(binary, work, shot):
    """The browser view of a calibrated RCS scan: absolute dBsm, equal to rcs's."""
    cal, pattern_csv = calibrated_rcs_scan(binary, work)
    want = read_pattern(pattern_csv)
    replay, url = start_replay(binary, cal, work, ("--as-fast-as-possible",), "rcs-replay")
    profile = tempfile.mkdtemp(prefix="chromium-rcs-", dir=work)
    d = browser(profile)
    try:
        d.set_page_load_timeout(30)
        d.get(url)
        deadline = time.time() + 120
        while time.time() < deadline and not d.execute_script(
                "return !document.getElementById('report').hidden"):
            time.sleep(0.2)
        time.sleep(0.5)
        label = d.execute_script("return window.sweepgateView.levelLabel")
        captions = d.find_element("id", "polar-caption").text + " | " + \
            d.find_element("id", "rect-caption").text
        check("the RCS page names its levels RCS (dBsm)",
              label == "RCS (dBsm)" and captions.count("RCS (dBsm)") == 2, captions)
        # The levels the plots draw (patternPoints feeds both plots and the readout), at
        # each pattern frequency, against rcs's pattern.csv.
        freqs = d.execute_script("return view.meta.frequencies_hz")
        worst, n = 0.0, 0
        for j, f in enumerate(freqs):
            pts = d.execute_script(
                "const s = document.getElementById('frequency'); s.value = arguments[0];"
                "s.dispatchEvent(new Event('change'));"
                "return patternPoints().pts.map(p => [p.deg, p.gated]);", str(j))
            for deg, level in pts:
                worst = max(worst, abs(level - want[(round(deg * 1000), float(f))]))
                n += 1
        check(f"the page's RCS equals rcs's pattern.csv within {RCS_TOLERANCE_DB} dB",
              n == 41 * 3 and worst <= RCS_TOLERANCE_DB,
              f"worst {worst:.2e} dB over {n} points")
        d.execute_script("const s = document.getElementById('frequency'); s.value = '1';"
                         "s.dispatchEvent(new Event('change'));")
        d.execute_script(
            "const c=document.getElementById('rect'), b=c.getBoundingClientRect();"
            "c.dispatchEvent(new MouseEvent('click',{clientX:b.left+b.width*0.52,clientY:b.top+100}));")
        time.sleep(0.5)
        readout = d.find_element("id", "marker-table").text
        check("the RCS markers and cursor read out dBsm, not dB re peak",
              "dBsm at" in readout and "cursor, gated" in readout and "re peak" not in readout,
              readout.replace("\n", " | ")[:200])
        bad = [l for l in d.get_log("browser") if l.get("level") in ("SEVERE", "ERROR")]
        check("the RCS page logged no error", not bad, str(bad[:3]))
        d.save_screenshot(shot)
        check("RCS screenshot saved", os.path.getsize(shot) > 10_000, shot)
    finally:
        d.quit()
        replay.kill()
        replay.wait()


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
    rcs_page(binary, work, os.path.splitext(shot)[0] + "-rcs.png")
    passed = sum(ok for _, ok in CHECKS)
    failed = len(CHECKS) - passed
    print(f"browser: {passed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
