#!/usr/bin/env python3
"""End-to-end check of `nightjar tune` on a small generated recording.

Usage: check_tune_output.py NIGHTJAR_BINARY WORK_DIR

Writes a two-channel 1 Hz recording with a step fault, its labels and a user config into
WORK_DIR, runs the built binary and checks: tune exits 0 with and without labels; the
tuned file parses as YAML (python3-yaml, an independent parser) and ends with one
`match:` block per channel, exact names, setting only the four tuned keys; it carries the
user config's keys unchanged; `nightjar check-config` accepts it (exit 0) and
`nightjar replay --config` runs with it (exit 0, alerts.jsonl written); two runs give the
same bytes; bad input exits 1 naming the key path or file; usage errors exit 2.
"""
import math
import os
import random
import shutil
import subprocess
import sys

import yaml

CHANNELS = ["skid.flow", "skid.temp"]
DAY = "2026-03-09T"
TUNED_KEYS = {"thresholds": {"false_alarms_per_day", "cusum_k", "ewma_lambda"},
              "anomaly_alarm": {"on_delay_s"}}
failures = []


def check(condition, what):
    if not condition:
        failures.append(what)
        print("FAIL: " + what, file=sys.stderr)
    return condition


def stamp(second):
    return "%s%02d:%02d:%02dZ" % (DAY, second // 3600, second // 60 % 60, second % 60)


def recording(rows=1500, step=(900, 1100)):
    rng = random.Random(4)
    lines = ["timestamp," + ",".join(CHANNELS)]
    for i in range(rows):
        flow = 50 + 5 * math.sin(2 * math.pi * i / 300) + rng.gauss(0, 0.3)
        if step[0] <= i < step[1]:
            flow += 4.0
        temp = 40 + 0.5 * math.sin(2 * math.pi * i / 900) + rng.gauss(0, 0.05)
        lines.append("%s,%.3f,%.3f" % (stamp(i), flow, temp))
    return "\n".join(lines) + "\n"


USER_CONFIG = """# user config
engine:
  seed: 5
defaults:
  warmup_samples: 300
  time_of_day_features: false
  scaler: { warmup_samples: 60 }
  predictor: { hidden_size: 8, window: 8 }
channels:
  - match: "skid.*"
    unit: "m3/h"
"""


def run(binary, *args):
    return subprocess.run([binary] + list(args), capture_output=True, text=True, timeout=240)


def check_tuned(binary, work, path, expect_unit):
    with open(path) as f:
        text = f.read()
    check(text.startswith("# "), path + ": starts with a header comment")
    doc = yaml.safe_load(text)
    blocks = doc.get("channels", [])
    tuned = blocks[-len(CHANNELS):]
    check([b.get("match") for b in tuned] == CHANNELS, path + ": last blocks match each channel")
    for block in tuned:
        keys = {k: set(v) for k, v in block.items() if k != "match"}
        check(keys == TUNED_KEYS, path + ": tuned block sets only the tuned keys: %r" % keys)
        check(block["thresholds"]["false_alarms_per_day"] > 0, path + ": budget > 0")
    for name in CHANNELS:
        check(("# " + name + ":") in text, path + ": a comment for " + name)
    if expect_unit:
        check(blocks[0].get("unit") == "m3/h", path + ": user block kept")
        check(doc.get("engine", {}).get("seed") == 5, path + ": user engine section kept")
    got = run(binary, "check-config", path)
    check(got.returncode == 0, path + ": check-config exits 0 (%d: %s)" % (got.returncode, got.stderr))
    out = os.path.join(work, "replay_" + os.path.basename(path))
    got = run(binary, "replay", "--input", os.path.join(work, "day.csv"), "--no-labels",
              "--config", path, "--out", out)
    check(got.returncode == 0, path + ": replay --config exits 0 (%s)" % got.stderr)
    check(os.path.isfile(os.path.join(out, "alerts.jsonl")), path + ": replay wrote alerts.jsonl")
    return text


def main():
    binary, work = sys.argv[1], sys.argv[2]
    shutil.rmtree(work, ignore_errors=True)
    os.makedirs(work)
    day = os.path.join(work, "day.csv")
    with open(day, "w") as f:
        f.write(recording())
    labels = os.path.join(work, "day.labels.csv")
    with open(labels, "w") as f:
        f.write("start,end,kind\n%s,%s,anomaly\n" % (stamp(900), stamp(1099)))
    config = os.path.join(work, "user.yaml")
    with open(config, "w") as f:
        f.write(USER_CONFIG)

    tuned = os.path.join(work, "tuned.yaml")
    got = run(binary, "tune", "--input", day, "--config", config, "--out", tuned, "--jobs", "2")
    check(got.returncode == 0, "tune with labels exits 0 (%s)" % got.stderr)
    check("event F1" in got.stdout, "labels beside the recording are used")
    first = check_tuned(binary, work, tuned, True)
    check(first.count(USER_CONFIG.split("channels:")[0]) == 1, "user config copied verbatim")

    again = os.path.join(work, "tuned_again.yaml")
    got = run(binary, "tune", "--input", day, "--config", config, "--out", again, "--jobs", "1")
    check(got.returncode == 0, "second tune exits 0")
    with open(again) as f:
        check(f.read() == first, "same input, same bytes (one thread or two)")

    unlabelled = os.path.join(work, "tuned_unlabelled.yaml")
    got = run(binary, "tune", "--input", day, "--config", config, "--no-labels",
              "--max-alarms-per-day", "40", "--out", unlabelled)
    check(got.returncode == 0, "tune without labels exits 0 (%s)" % got.stderr)
    check("budget 20.0 anomaly raises per channel per day" in got.stdout, "budget split per channel")
    check_tuned(binary, work, unlabelled, True)

    bare = os.path.join(work, "tuned_bare.yaml")
    got = run(binary, "tune", "--input", day, "--no-labels", "--out", bare, "--jobs", "1")
    check(got.returncode == 0, "tune without a config exits 0 (%s)" % got.stderr)
    check_tuned(binary, work, bare, False)

    bad = os.path.join(work, "bad.yaml")
    with open(bad, "w") as f:
        f.write("defaults:\n  thresholds: { cusum_k: 9 }\n")
    got = run(binary, "tune", "--input", day, "--config", bad, "--out", os.path.join(work, "x.yaml"))
    check(got.returncode == 1, "bad config exits 1")
    check("defaults.thresholds.cusum_k" in got.stderr, "bad config names the key path: " + got.stderr)
    check(not os.path.exists(os.path.join(work, "x.yaml")), "nothing written on a bad config")
    got = run(binary, "tune", "--input", os.path.join(work, "missing.csv"), "--out", tuned)
    check(got.returncode == 1 and "missing.csv" in got.stderr, "missing input exits 1 naming it")
    got = run(binary, "tune", "--input", day)
    check(got.returncode == 2, "missing --out is a usage error")
    got = run(binary, "tune", "--input", day, "--out", tuned, "--max-alarms-per-day", "0")
    check(got.returncode == 2, "a zero budget is a usage error")

    if failures:
        print("%d checks failed" % len(failures), file=sys.stderr)
        return 1
    print("tune_command: all checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
