#!/usr/bin/python3
"""Writes tests/replay/data/windowed_gaussian_reference.csv: the outside check for
lib/replay/windowed_gaussian_baseline (windowed_gaussian_baseline_test.cc).

The reference is computed with numpy (Debian python3-numpy), independently of the C++
code: for each sample x[t] with t >= W, mean and sample standard deviation (ddof=1) of
x[t-W:t], ratio = |x[t] - mean| / (K * sd); the alarm is the plain hysteresis the
baseline's core::Alarm gives with no delays: it becomes active when ratio >= 1 and
inactive when ratio < 1 - DEADBAND. Values are rounded to 6 decimals before anything
is computed, so the C++ test reads exactly the numbers numpy used.

The series (seeded, so the file is the same on every run): 400 samples of normal noise
(sd 1) around 10, a +8 step from sample 150 to 199, a single +12 spike at 260, and a
slow ramp of +0.02 per sample from 300 on (which a moving window follows). Ratios within
1e-6 of a decision level would make the flags depend on rounding: the script refuses
such a series.

Run: /usr/bin/python3 tests/replay/make_windowed_gaussian_reference.py [--out FILE]
(the ctest replay_windowed_gaussian_reference writes it to the build tree and checks it
is byte for byte the checked-in file, so the file cannot drift from what numpy gives).
"""
import argparse
import pathlib

import numpy as np

W = 20
K = 3.0
DEADBAND = 0.1
SEED = 20261202
N = 400


def main() -> None:
    rng = np.random.default_rng(SEED)
    x = 10.0 + rng.normal(0.0, 1.0, N)
    x[150:200] += 8.0
    x[260] += 12.0
    x[300:] += 0.02 * np.arange(N - 300)
    x = np.round(x, 6)

    rows = []
    active = False
    for t in range(N):
        if t < W:
            rows.append((t, x[t], "", "", "", 0))
            continue
        window = x[t - W:t]
        mean = window.mean()
        sd = window.std(ddof=1)
        ratio = abs(x[t] - mean) / (K * sd)
        for level in (1.0, 1.0 - DEADBAND):
            if abs(ratio - level) < 1e-6:
                raise SystemExit(f"sample {t}: ratio {ratio} too close to {level}")
        if not active and ratio >= 1.0:
            active = True
        elif active and ratio < 1.0 - DEADBAND:
            active = False
        rows.append((t, x[t], repr(float(mean)), repr(float(sd)), repr(float(ratio)),
                     int(active)))

    parser = argparse.ArgumentParser()
    parser.add_argument("--out", default=str(pathlib.Path(__file__).resolve().parent / "data" /
                                             "windowed_gaussian_reference.csv"))
    out = pathlib.Path(parser.parse_args().out)
    out.parent.mkdir(parents=True, exist_ok=True)
    with out.open("w") as f:
        f.write(f"# numpy {np.__version__}: window {W}, k {K}, deadband {DEADBAND}, "
                f"seed {SEED}; see make_windowed_gaussian_reference.py\n")
        f.write("index,value,mean,sd,ratio,active\n")
        for t, value, mean, sd, ratio, flag in rows:
            f.write(f"{t},{value:.6f},{mean},{sd},{ratio},{flag}\n")
    print(f"wrote {out}: {N} samples, {sum(r[5] for r in rows)} flagged")


if __name__ == "__main__":
    main()
