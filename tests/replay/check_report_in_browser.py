#!/usr/bin/env python3
"""Loads replay report pages in headless Chromium and checks that their script ran.

A page made by RenderReport sets data-ready="ok" and data-charts="<n>" on <body> once it
has drawn every chart, and data-ready="error" with data-error when its script throws.
Chromium's --dump-dom prints the DOM after the page's load event, so the attributes are
in the dump exactly when the script ran to its end. This script:

  1. renders the synthetic report and the demo-day report with the renderer driver, and
     (with --nightjar) runs the real `nightjar replay` on a short generated labelled
     recording and takes the report.html it writes;
  2. loads each in Chromium and requires data-ready="ok", data-charts equal to the
     number of channels, as many <canvas> elements, and no data-error;
  3. as a control, injects an exception into a copy of the page and requires the same
     check to reject it, so a script error cannot pass unnoticed.

Python 3 standard library only. Every external step has a timeout.
Usage: check_report_in_browser.py --renderer PATH --recording DAY.csv.gz --workdir DIR
                                  [--nightjar PATH]
"""

import argparse
import datetime
import math
import os
import random
import re
import shutil
import subprocess
import sys
import tempfile

CHROMIUM_TIMEOUT_S = 120
RENDER_TIMEOUT_S = 300


def find_chromium():
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    return None


def render(renderer, args, out_path):
    """Runs the driver; returns the number of charts it says it wrote."""
    proc = subprocess.run([renderer, *args, out_path], capture_output=True, text=True,
                          timeout=RENDER_TIMEOUT_S, check=False)
    if proc.returncode != 0:
        raise RuntimeError(f"renderer {args} failed ({proc.returncode}): {proc.stderr.strip()}")
    match = re.search(r"charts=(\d+) bytes=(\d+)", proc.stdout)
    if not match:
        raise RuntimeError(f"renderer printed no summary: {proc.stdout!r}")
    charts, size = int(match.group(1)), int(match.group(2))
    print(f"rendered {os.path.basename(out_path)}: {charts} charts, {size} bytes")
    return charts


REPLAY_CHANNELS = ("cw2.pump_a.flow", "cw2.pump_a.motor_current", "cw2.hx.outlet_temp")
REPLAY_ROWS = 2400  # 40 minutes at 1 Hz: past the default warm-up, short enough to be quick


def write_short_recording(path):
    """A 1 Hz recording of three invented channels with a step on the flow, and labels."""
    rng = random.Random(20260309)
    start = datetime.datetime(2026, 3, 9, tzinfo=datetime.timezone.utc)
    step_from, step_to = 2000, 2200
    with open(path, "w", encoding="utf-8") as f:
        f.write("timestamp," + ",".join(REPLAY_CHANNELS) + "\n")
        for i in range(REPLAY_ROWS):
            t = (start + datetime.timedelta(seconds=i)).strftime("%Y-%m-%dT%H:%M:%SZ")
            flow = 120.0 + 3.0 * math.sin(2 * math.pi * i / 600) + rng.gauss(0, 0.4)
            if step_from <= i < step_to:
                flow += 15.0
            current = 42.0 + 0.02 * (flow - 120.0) + rng.gauss(0, 0.1)
            temp = 31.0 + 0.5 * math.sin(2 * math.pi * i / 1800) + rng.gauss(0, 0.05)
            f.write(f"{t},{flow:.3f},{current:.3f},{temp:.3f}\n")
    labels = path[: -len(".csv")] + ".labels.csv"
    with open(labels, "w", encoding="utf-8") as f:
        f.write("start,end,kind\n")
        for a, b in ((step_from, step_to - 1),):
            ta = (start + datetime.timedelta(seconds=a)).strftime("%Y-%m-%dT%H:%M:%SZ")
            tb = (start + datetime.timedelta(seconds=b)).strftime("%Y-%m-%dT%H:%M:%SZ")
            f.write(f"{ta},{tb},anomaly\n")


def replay_with_nightjar(nightjar, workdir):
    """Runs `nightjar replay` on a short recording; returns the report.html path."""
    recording = os.path.join(workdir, "short_day.csv")
    write_short_recording(recording)
    out = os.path.join(workdir, "short_day_out")
    proc = subprocess.run([nightjar, "replay", "--input", recording, "--out", out],
                          capture_output=True, text=True, timeout=RENDER_TIMEOUT_S,
                          check=False, stdin=subprocess.DEVNULL)
    if proc.returncode != 0:
        raise RuntimeError(f"nightjar replay failed ({proc.returncode}): {proc.stderr.strip()}")
    for row in ("nightjar", "next = last", "static"):
        if f"  {row}" not in proc.stdout:
            raise RuntimeError(f"printed summary lacks the {row!r} score row:\n{proc.stdout}")
    page = os.path.join(out, "report.html")
    with open(page, encoding="utf-8") as f:
        text = f.read()
    for row in ("next = last", "static \u00b13\u03c3"):
        if row not in text:
            raise RuntimeError(f"report.html lacks the {row!r} score row")
    print(f"replayed {os.path.basename(recording)} with nightjar: {os.path.getsize(page)} bytes")
    return page


def dump_dom(chromium, page_path):
    """The DOM of the page after load, as Chromium serialises it."""
    profile = tempfile.mkdtemp(prefix="nightjar-chromium-")
    try:
        cmd = [chromium, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
               "--no-first-run", "--disable-background-networking",
               "--disable-component-update", "--disable-sync", "--disable-extensions",
               "--window-size=1200,900", f"--user-data-dir={profile}", "--dump-dom",
               "file://" + os.path.abspath(page_path)]
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=CHROMIUM_TIMEOUT_S,
                              check=False, stdin=subprocess.DEVNULL)
        if proc.returncode != 0:
            raise RuntimeError(f"chromium exited {proc.returncode}: {proc.stderr[-2000:]}")
        return proc.stdout
    finally:
        shutil.rmtree(profile, ignore_errors=True)


def problems_with(dom, expected_charts):
    """Empty when the page drew `expected_charts` charts without a script error."""
    body = re.search(r"<body\b[^>]*>", dom)
    if not body:
        return ["no <body> in the dumped DOM (page did not load?)"]
    attrs = dict(re.findall(r'([\w-]+)="([^"]*)"', body.group(0)))
    found = []
    if attrs.get("data-ready") != "ok":
        found.append(f"data-ready is {attrs.get('data-ready')!r}, not 'ok' "
                     f"(data-error: {attrs.get('data-error')!r})")
    if "data-error" in attrs:
        found.append(f"script error: {attrs['data-error']!r}")
    if attrs.get("data-charts") != str(expected_charts):
        found.append(f"data-charts is {attrs.get('data-charts')!r}, want {expected_charts}")
    canvases = len(re.findall(r"<canvas\b", dom))
    if canvases != expected_charts:
        found.append(f"{canvases} <canvas> elements, want {expected_charts}")
    return found


def inject_error(page_path, out_path):
    with open(page_path, encoding="utf-8") as f:
        page = f.read()
    anchor = "var data = JSON.parse("
    if anchor not in page:
        raise RuntimeError("cannot find where to inject the control error")
    with open(out_path, "w", encoding="utf-8") as f:
        f.write(page.replace(anchor, "undefinedOnPurpose(); " + anchor, 1))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--renderer", required=True)
    parser.add_argument("--recording", required=True)
    parser.add_argument("--workdir", required=True)
    parser.add_argument("--nightjar", help="the nightjar binary: also check its report.html")
    args = parser.parse_args()

    chromium = find_chromium()
    if chromium is None:
        print("FAIL: chromium not found (scripts/test installs the Debian package 'chromium')")
        return 1
    os.makedirs(args.workdir, exist_ok=True)

    failures = 0
    synthetic_charts = 0
    pages = [("synthetic.html", ["--synthetic"]),
             ("demo_day.html", ["--recording", args.recording])]
    for name, render_args in pages:
        path = os.path.join(args.workdir, name)
        charts = render(args.renderer, render_args, path)
        if name == "synthetic.html":
            synthetic_charts = charts
        if charts < 1:
            print(f"FAIL {name}: the renderer drew no channel")
            failures += 1
            continue
        found = problems_with(dump_dom(chromium, path), charts)
        if found:
            print(f"FAIL {name}: " + "; ".join(found))
            failures += 1
        else:
            print(f"ok   {name}: {charts} charts drawn, no script error")

    checked = len(pages)
    if args.nightjar:
        checked += 1
        page = replay_with_nightjar(args.nightjar, args.workdir)
        found = problems_with(dump_dom(chromium, page), len(REPLAY_CHANNELS))
        if found:
            print("FAIL nightjar replay report.html: " + "; ".join(found))
            failures += 1
        else:
            print(f"ok   nightjar replay report.html: {len(REPLAY_CHANNELS)} charts drawn, "
                  "no script error")

    # Control: the same check must reject a page whose script throws.
    synthetic = os.path.join(args.workdir, "synthetic.html")
    broken = os.path.join(args.workdir, "control_broken.html")
    inject_error(synthetic, broken)
    found = problems_with(dump_dom(chromium, broken), synthetic_charts)
    if not any("undefinedOnPurpose" in p for p in found):
        print(f"FAIL control: a page that throws was not caught as such (found: {found})")
        failures += 1
    else:
        print("ok   control: an injected script error is reported")

    print(f"{checked + 1 - failures} passed, {failures} failed")
    return 1 if failures else 0


if __name__ == "__main__":
    try:
        sys.exit(main())
    except (RuntimeError, subprocess.TimeoutExpired, OSError) as error:
        print(f"FAIL: {error}")
        sys.exit(1)
