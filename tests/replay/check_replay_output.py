#!/usr/bin/env python3
"""End-to-end check of `nightjar replay` on small generated recordings.

Usage: check_replay_output.py NIGHTJAR_BINARY WORK_DIR

Writes a few recordings (two channels at 1 Hz with a NaN, a silent stretch, bad rows,
rows out of time order) into WORK_DIR, runs the built binary on them and checks its
output files with the standard json module: every alerts.jsonl line parses and has every
field in order, lines are in time order, summary.json counts equal the line counts,
repeated runs give identical bytes, parallel jobs give what one-at-a-time runs give, a
config file's options and seed reach the engine, bad input exits 1 naming file, line and
column, usage errors exit 2, and a progress bar appears only on a terminal. Standard
library only.
"""
import gzip
import json
import math
import os
import pty
import random
import re
import shutil
import subprocess
import sys

FIELDS = ["ts", "channel", "kind", "detector", "phase", "value", "expected", "z",
          "statistic", "threshold", "priority", "message", "annunciated", "episode"]
KINDS = {"anomaly", "event", "sensor"}
DETECTORS = {"cusum", "ewma", "spike", "not_finite", "range", "flatline", "gap", "template"}
PHASES = {"raise", "clear"}
PRIORITIES = {"low", "medium", "high"}
TS = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{3}Z$")
CHANNELS = ["skid.flow", "skid.temp"]
DAY = "2026-03-09T"

failures = []


def check(condition, what):
    if not condition:
        failures.append(what)
        print("FAIL: " + what, file=sys.stderr)
    return condition


def stamp(second):
    return "%s%02d:%02d:%02dZ" % (DAY, second // 3600, second // 60 % 60, second % 60)


def recording(rows=250, seed=3, nan_at=100, silent=(150, 190)):
    """CSV text: a flow with a NaN cell and a temperature silent on rows [silent)."""
    rng = random.Random(seed)
    lines = ["timestamp," + ",".join(CHANNELS)]
    for i in range(rows):
        flow = 50 + 5 * math.sin(2 * math.pi * i / 300) + rng.gauss(0, 0.3)
        temp = 40 + 0.5 * math.sin(2 * math.pi * i / 900) + rng.gauss(0, 0.05)
        flow_cell = "nan" if i == nan_at else "%.3f" % flow
        temp_cell = "" if silent[0] <= i < silent[1] else "%.3f" % temp
        lines.append("%s,%s,%s" % (stamp(i), flow_cell, temp_cell))
    return "\n".join(lines) + "\n"


def write(path, text):
    with open(path, "w", encoding="utf-8") as f:
        f.write(text)
    return path


def run(nightjar, *args, stderr_tty=False):
    """Runs `nightjar replay ARGS`; returns (exit code, stdout, stderr)."""
    command = [nightjar, "replay", *args]
    if not stderr_tty:
        done = subprocess.run(command, capture_output=True, text=True, timeout=240)
        return done.returncode, done.stdout, done.stderr
    # stderr on a pseudo-terminal: the progress bar should appear there.
    main_fd, tty_fd = pty.openpty()
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=tty_fd, text=True)
    os.close(tty_fd)
    stdout, _ = process.communicate(timeout=240)
    chunks = []
    while True:
        try:
            chunk = os.read(main_fd, 65536)
        except OSError:  # the other end is gone: everything has been read
            break
        if not chunk:
            break
        chunks.append(chunk)
    os.close(main_fd)
    return process.returncode, stdout, b"".join(chunks).decode("utf-8", "replace")


def read_bytes(path):
    with open(path, "rb") as f:
        return f.read()


def summary_without_timing(directory):
    with open(os.path.join(directory, "summary.json"), encoding="utf-8") as f:
        summary = json.load(f)
    summary.pop("timing", None)
    return summary


def check_outputs(directory, rows, where):
    """The checks every successful replay's two files must pass; returns the alerts."""
    alerts = []
    with open(os.path.join(directory, "alerts.jsonl"), encoding="utf-8") as f:
        for number, line in enumerate(f, start=1):
            try:
                alert = json.loads(line)
            except json.JSONDecodeError as error:
                check(False, "%s alerts.jsonl:%d does not parse: %s" % (where, number, error))
                continue
            check(list(alert.keys()) == FIELDS,
                  "%s alerts.jsonl:%d fields %s" % (where, number, list(alert.keys())))
            check(TS.match(alert.get("ts", "")) is not None,
                  "%s alerts.jsonl:%d ts %r" % (where, number, alert.get("ts")))
            check(alert.get("channel") in CHANNELS, "%s line %d channel" % (where, number))
            check(alert.get("kind") in KINDS, "%s line %d kind" % (where, number))
            check(alert.get("detector") in DETECTORS, "%s line %d detector" % (where, number))
            check(alert.get("phase") in PHASES, "%s line %d phase" % (where, number))
            check(alert.get("priority") in PRIORITIES, "%s line %d priority" % (where, number))
            for key in ("value", "expected", "z", "statistic", "threshold"):
                value = alert.get(key)
                check(value is None or (isinstance(value, (int, float)) and math.isfinite(value)),
                      "%s line %d %s = %r" % (where, number, key, value))
            check(isinstance(alert.get("message"), str) and alert["message"],
                  "%s line %d message" % (where, number))
            check(isinstance(alert.get("annunciated"), bool),
                  "%s line %d annunciated" % (where, number))
            episode = alert.get("episode")
            # Only anomaly alarms of a grouped channel (config key asset) have an episode.
            check(episode is None or (alert.get("kind") == "anomaly" and
                                      alert["channel"].startswith(episode["asset"] + ".")),
                  "%s line %d episode %r" % (where, number, episode))
            alerts.append(alert)
    times = [a["ts"] for a in alerts]
    check(times == sorted(times), where + ": alerts.jsonl is not in time order")

    summary = summary_without_timing(directory)
    check(summary["ok"] is True and summary["error"] is None, where + ": summary not ok")
    check(summary["rows"] == rows, where + ": rows %r" % summary["rows"])
    check(summary["alert_lines"] == len(alerts), where + ": alert_lines != lines")
    raises = [a for a in alerts if a["phase"] == "raise"]
    check(summary["alerts"]["raise"] == len(raises), where + ": raise count")
    check(summary["alerts"]["clear"] == len(alerts) - len(raises), where + ": clear count")
    alarms = [a for a in raises if a["kind"] != "event"]  # event alerts are notices
    check(summary["alarm_rate"]["raises"] == len(alarms), where + ": alarm_rate.raises")
    for kind in KINDS:
        for phase in PHASES:
            n = sum(1 for a in alerts if a["kind"] == kind and a["phase"] == phase)
            check(summary["alerts"][kind][phase] == n, "%s: %s %s count" % (where, kind, phase))
    for detector in DETECTORS:
        n = sum(1 for a in raises if a["detector"] == detector)
        check(summary["alerts"]["raises_by_detector"][detector] == n,
              "%s: raises_by_detector %s" % (where, detector))
    check([c["name"] for c in summary["channels"]] == CHANNELS, where + ": channel list")
    for channel in summary["channels"]:
        mine = [a for a in alerts if a["channel"] == channel["name"]]
        check(channel["alerts"]["raise"] + channel["alerts"]["clear"] == len(mine),
              "%s: %s alert count" % (where, channel["name"]))
        for kind in KINDS:
            n = sum(1 for a in mine if a["kind"] == kind and a["phase"] == "raise")
            check(channel["alerts"][kind]["raise"] == n,
                  "%s: %s %s raises" % (where, channel["name"], kind))
    check(summary["samples"] == sum(c["samples"] for c in summary["channels"]),
          where + ": samples != sum over channels")
    return alerts


def main():
    nightjar, work = sys.argv[1], sys.argv[2]
    shutil.rmtree(work, ignore_errors=True)
    os.makedirs(work)
    day = write(os.path.join(work, "day.csv"), recording())
    other = write(os.path.join(work, "other.csv"), recording(seed=4, nan_at=120, silent=(180, 220)))

    # One recording: exit 0, valid files, the NaN and the silent stretch raised.
    out = os.path.join(work, "out1")
    code, stdout, stderr = run(nightjar, "--input", day, "--out", out, "--seed", "9")
    check(code == 0, "plain run exit %d: %s" % (code, stderr))
    check(stderr == "", "stderr is not a terminal: no progress bar, got %r" % stderr)
    alerts = check_outputs(out, 250, "plain run")
    check(any(a["detector"] == "not_finite" and a["phase"] == "raise" and
              a["ts"] == stamp(100)[:-1] + ".000Z" and a["channel"] == "skid.flow"
              for a in alerts), "the NaN at row 100 raises not_finite at its time")
    check(any(a["detector"] == "gap" and a["phase"] == "raise" and a["channel"] == "skid.temp"
              for a in alerts), "the silent temperature raises a gap")
    summary = summary_without_timing(out)
    check(summary["empty_cells"] == 40 and summary["rejected_samples"] == 1,
          "empty cells %r, rejected %r" % (summary["empty_cells"], summary["rejected_samples"]))
    check(summary["seed"] == 9, "--seed reaches the engine")
    check(summary["scores"] is None, "no labels, no scores")
    for words in ("alarm rate", "worst 10-minute window", "skid.flow", "sensor up/down"):
        check(words in stdout, "summary table mentions %r" % words)

    # Again: the same bytes. Compressed: the same alerts.
    out2 = os.path.join(work, "out2")
    code, _, _ = run(nightjar, "--input", day, "--out", out2, "--seed", "9")
    check(code == 0, "second run exit %d" % code)
    check(read_bytes(os.path.join(out, "alerts.jsonl")) ==
          read_bytes(os.path.join(out2, "alerts.jsonl")), "two runs give identical alerts.jsonl")
    check(summary_without_timing(out) == summary_without_timing(out2), "identical summaries")
    day_gz = os.path.join(work, "day_gz.csv.gz")
    with gzip.open(day_gz, "wt", encoding="utf-8") as f:
        f.write(recording())
    out_gz = os.path.join(work, "out_gz")
    code, _, _ = run(nightjar, "--input", day_gz, "--out", out_gz, "--seed", "9")
    check(code == 0, "gzip run exit %d" % code)
    check(read_bytes(os.path.join(out, "alerts.jsonl")) ==
          read_bytes(os.path.join(out_gz, "alerts.jsonl")), "gzip input gives the same alerts")

    # Labels beside the recording are scored; --no-labels turns that off.
    write(os.path.join(work, "day.labels.csv"),
          "start,end,kind\n%s,%s,anomaly\n%s,%s,event\n" % (stamp(100), stamp(100), stamp(150),
                                                           stamp(199)))
    out_labels = os.path.join(work, "out_labels")
    code, stdout, _ = run(nightjar, "--input", day, "--out", out_labels, "--seed", "9")
    scores = summary_without_timing(out_labels)["scores"]
    check(code == 0 and scores is not None, "labels beside the recording are scored")
    if scores is not None:
        # The NaN raises a sensor alarm (not finite): data quality, not a detection, so
        # the detection score misses the window and the sensor alarms report it apart.
        overall = scores["overall"]
        anomaly_raises = [a for a in alerts if a["phase"] == "raise" and a["kind"] == "anomaly"]
        sensor_raises = [a for a in alerts if a["phase"] == "raise" and a["kind"] == "sensor"]
        check(sensor_raises, "the recording raises a sensor alarm")
        check(overall["anomaly_windows"] == 1 and overall["detected"] == 0,
              "a sensor alarm does not detect the NaN's window: %r" % overall)
        check(overall["raises"] == len(anomaly_raises) and overall["true_raises"] +
              overall["expected_raises"] + overall["false_alarms"] == len(anomaly_raises),
              "every anomaly alarm raise scored once, no other")
        sensor = scores["sensor_alarms"]
        check(sensor["raises"] == len(sensor_raises) and sensor["detected"] == 1,
              "the sensor alarms are scored apart and one falls in the window: %r" % sensor)
        check(sensor["windows"][0]["first_channel"] == "skid.flow", "first sensor raise's channel")
        check([c["channel"] for c in scores["channels"]] == CHANNELS, "a row per channel")
        rows = [d["detector"] for d in scores["detectors"]]
        check(rows == ["nightjar", "next = last", "static \u00b13\u03c3", "windowed gaussian"],
              "four detector rows: %r" % rows)
        for d in scores["detectors"]:
            points = d["points"]
            check(points is not None and points["points"] > 0 and
                  points["true_positives"] <= min(points["flagged"], points["positives"]),
                  "point-wise counts of %s: %r" % (d["detector"], points))
    check("0 of 1 anomaly windows detected by anomaly alarms" in stdout,
          "the table reports the label score")
    check("1 of 1 windows had one" in stdout, "the table reports the sensor alarms apart")
    check("point F1" in stdout and "windowed gaussian" in stdout, "point-wise columns, 4th row")
    code, _, _ = run(nightjar, "--input", day, "--out", out_labels, "--no-labels")
    check(summary_without_timing(out_labels)["scores"] is None, "--no-labels: no scores")
    os.remove(os.path.join(work, "day.labels.csv"))

    # Progress bar only on a terminal.
    code, _, tty_err = run(nightjar, "--input", day, "--out", os.path.join(work, "out_tty"),
                           stderr_tty=True)
    check(code == 0, "tty run exit %d" % code)
    check("replay [" in tty_err and "%" in tty_err, "progress bar on a terminal: %r" % tty_err)

    # A bad cell: exit 1 naming file, line and column; --skip-bad-rows counts it.
    rows = recording(rows=100, silent=(0, 0), nan_at=-1).splitlines()
    rows[4] = stamp(3) + ",abc,40.0"  # line 5, column 2
    bad = write(os.path.join(work, "bad.csv"), "\n".join(rows) + "\n")
    out_bad = os.path.join(work, "out_bad")
    code, _, stderr = run(nightjar, "--input", bad, "--out", out_bad)
    check(code == 1, "bad row exit %d" % code)
    check(bad + ":5:2: channel 'skid.flow'" in stderr, "bad row message: %r" % stderr)
    bad_summary = summary_without_timing(out_bad)
    check(bad_summary["ok"] is False and ":5:2:" in bad_summary["error"],
          "summary of a failed replay says so")
    code, stdout, stderr = run(nightjar, "--input", bad, "--out", out_bad, "--skip-bad-rows")
    check(code == 0, "--skip-bad-rows exit %d: %s" % (code, stderr))
    skipped = summary_without_timing(out_bad)
    check(skipped["skipped_rows"] == 1 and skipped["rows"] == 99, "skipped %r" % skipped)
    check(":5:2:" in (skipped["first_skip_reason"] or ""), "first skip reason kept")
    check("skipped 1 bad rows" in stdout, "the table reports skipped rows")

    # Time going backwards on line 7: exit 1 naming the line.
    rows = recording(rows=100, silent=(0, 0), nan_at=-1).splitlines()
    rows[6] = stamp(2) + ",50.0,40.0"
    backwards = write(os.path.join(work, "backwards.csv"), "\n".join(rows) + "\n")
    code, _, stderr = run(nightjar, "--input", backwards, "--out", os.path.join(work, "out_back"))
    check(code == 1, "out-of-order exit %d" % code)
    check(backwards + ":7:1:" in stderr and "earlier than" in stderr,
          "out-of-order message: %r" % stderr)

    # Two recordings with --jobs 2: each in its own folder, as when run one at a time.
    together = os.path.join(work, "together")
    code, stdout, stderr = run(nightjar, "--input", day, "--input", other, "--out", together,
                               "--jobs", "2", "--seed", "9")
    check(code == 0, "two jobs exit %d: %s" % (code, stderr))
    check("2 recordings on 2 threads" in stdout, "the run says how it ran: %r" % stdout[-200:])
    for name, path in (("day", day), ("other", other)):
        alone = os.path.join(work, "alone_" + name)
        code, _, _ = run(nightjar, "--input", path, "--out", alone, "--seed", "9")
        check(code == 0, "alone %s exit %d" % (name, code))
        check_outputs(os.path.join(together, name), 250, "jobs=2 " + name)
        check(read_bytes(os.path.join(together, name, "alerts.jsonl")) ==
              read_bytes(os.path.join(alone, "alerts.jsonl")),
              "%s: --jobs 2 alerts equal the lone run's" % name)
        check(summary_without_timing(os.path.join(together, name)) ==
              summary_without_timing(alone), "%s: --jobs 2 summary equals the lone run's" % name)
    # A failing recording among good ones: exit 1, the good one still written.
    mixed = os.path.join(work, "mixed")
    code, _, stderr = run(nightjar, "--input", day, "--input", bad, "--out", mixed)
    check(code == 1 and ":5:2:" in stderr, "one bad recording of two: exit %d" % code)
    check(summary_without_timing(os.path.join(mixed, "day"))["ok"] is True, "the good one ran")

    # --config: its options and seed reach the engine; --seed still wins; errors exit 1
    # naming file, line and column.
    fast = write(os.path.join(work, "fast.yaml"),
                 "engine:\n  seed: 4\ndefaults:\n  warmup_samples: 150\n"
                 "  scaler: { warmup_samples: 60 }\n  predictor: { hidden_size: 8, window: 8 }\n")
    out_cfg = os.path.join(work, "out_cfg")
    code, _, stderr = run(nightjar, "--input", day, "--out", out_cfg, "--config", fast)
    check(code == 0, "--config exit %d: %s" % (code, stderr))
    configured = summary_without_timing(out_cfg)
    check(configured["seed"] == 4, "the config's seed: %r" % configured["seed"])
    check([c["state"] for c in configured["channels"]] == ["armed", "armed"],
          "the config's short warm-up arms both channels: %r" % configured["channels"])
    check_outputs(out_cfg, 250, "--config run")
    code, _, _ = run(nightjar, "--input", day, "--out", out_cfg, "--config", fast, "--seed", "9")
    check(code == 0 and summary_without_timing(out_cfg)["seed"] == 9, "--seed over the config")
    broken = write(os.path.join(work, "broken.yaml"), "defaults:\n  warmup_samplez: 10\n")
    code, _, stderr = run(nightjar, "--input", day, "--out", out_cfg, "--config", broken)
    check(code == 1 and broken + ":2:3:" in stderr, "bad config: exit %d, %r" % (code, stderr))

    # Usage errors exit 2.
    for args in (["--input", day], ["--out", work], ["--input", day, "--out", work, "--jobs", "-1"],
                 ["--input", day, "--input", other, "--labels", day, "--out", work]):
        code, _, stderr = run(nightjar, *args)
        check(code == 2, "usage %r exit %d" % (args, code))
        check("nightjar replay:" in stderr, "usage %r says why: %r" % (args, stderr))

    if failures:
        print("%d check(s) failed" % len(failures), file=sys.stderr)
        return 1
    print("check_replay_output: all checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
