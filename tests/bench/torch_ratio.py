#!/usr/bin/python3
"""Runs the same online LSTM update in nightjar-bench and in torch, in one run, and
prints nightjar's throughput as a ratio of torch's.

The torch side mirrors one nightjar training step per sample: an LSTMCell (I inputs,
hidden H) plus a linear head, unrolled over the last W = 32 samples from the stored
state, mean squared one-step error, backward, gradient-norm clipping at 1.0, one Adam
step, then one forward step of cell and head for the next prediction. Batch 1, one
thread (Debian's python3-torch), as an edge box would run it. (torch's LSTMCell has two
bias vectors where nightjar has one: 4H more parameters, under 2% at H = 32.)

Both sides are timed in CPU time of the working thread (Google Benchmark's
items_per_second is per CPU second; torch runs on the calling thread), so other work on
a shared machine does not tilt the ratio; wall-clock rates are printed alongside.

BM_LstmTrain/H (the predictor alone, I = 3) is always compared. With --engine,
BM_EngineTrain/H is compared too: the whole Engine::Process step (health checks,
scaling, the same training step with the engine's I = 4, the charts and the alarms)
against the same torch step with I = 4, which does none of that other work, so the
engine ratio is the harsher of the two.

Usage: tests/bench/torch_ratio.py BUILD_DIR/tests/bench/nightjar-bench [--hidden 32]
           [--engine] [--seconds 3] [--repeat 1]
"""
import argparse
import json
import subprocess
import sys
import time

WINDOW = 32


def nightjar_samples_per_s(bench, names, repeat):
    """(per CPU second, per wall second) of each named benchmark, best of `repeat` runs."""
    pattern = "|".join(names)
    try:
        out = subprocess.run(
            [bench, f"--benchmark_filter=^({pattern})$", "--benchmark_format=json",
             "--benchmark_min_time=1", f"--benchmark_repetitions={repeat}"],
            check=True, capture_output=True, text=True).stdout
    except (OSError, subprocess.CalledProcessError) as error:
        sys.exit(f"torch_ratio: running {bench} failed: {error}")
    rates = {}
    for run in json.loads(out)["benchmarks"]:
        if run.get("run_type", "iteration") != "iteration" or "error_message" in run:
            continue
        name = run.get("run_name", run["name"])
        assert run["time_unit"] == "ns", run["time_unit"]
        cpu, wall = rates.get(name, (0.0, 0.0))
        rates[name] = (max(cpu, run["items_per_second"]), max(wall, 1e9 / run["real_time"]))
    missing = [n for n in names if n not in rates]
    if missing:
        sys.exit(f"torch_ratio: {bench} has no (working) benchmark named {', '.join(missing)}")
    return rates


def torch_samples_per_s(inputs, hidden, window, seconds):
    import torch
    torch.set_num_threads(1)
    torch.manual_seed(1)
    cell = torch.nn.LSTMCell(inputs, hidden)
    head = torch.nn.Linear(hidden, 1)
    params = list(cell.parameters()) + list(head.parameters())
    opt = torch.optim.Adam(params, lr=1e-3)
    xs = torch.randn(window, 1, inputs)
    targets = torch.randn(window, 1, 1)
    h0 = torch.zeros(1, hidden)
    c0 = torch.zeros(1, hidden)

    def step():
        h, c = h0, c0
        loss = 0.0
        for t in range(window):
            h, c = cell(xs[t], (h, c))
            loss = loss + (head(h) - targets[t]).pow(2).mean()
        loss = loss / window
        opt.zero_grad()
        loss.backward()
        torch.nn.utils.clip_grad_norm_(params, 1.0)
        opt.step()
        with torch.no_grad():  # the next prediction: one cell step and the head
            h_next, _ = cell(xs[-1], (h0, c0))
            head(h_next)

    for _ in range(20):  # warm-up
        step()
    n = 0
    start = time.perf_counter()
    start_cpu = time.thread_time()
    while time.perf_counter() - start < seconds:
        step()
        n += 1
    return n / (time.thread_time() - start_cpu), n / (time.perf_counter() - start)


def best_torch(inputs, hidden, seconds, repeat):
    """(per CPU second, per wall second), best of `repeat` runs."""
    runs = [torch_samples_per_s(inputs, hidden, WINDOW, seconds) for _ in range(repeat)]
    return max(r[0] for r in runs), max(r[1] for r in runs)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("bench", help="path to nightjar-bench")
    parser.add_argument("--hidden", type=int, default=32)
    parser.add_argument("--engine", action="store_true",
                        help="also compare BM_EngineTrain/HIDDEN (the whole engine step)")
    parser.add_argument("--seconds", type=float, default=3.0,
                        help="seconds per torch measurement")
    parser.add_argument("--repeat", type=int, default=1,
                        help="measure each side this many times and keep the best "
                             "(the cores may be shared)")
    args = parser.parse_args()

    lstm_name = f"BM_LstmTrain/{args.hidden}"
    engine_name = f"BM_EngineTrain/{args.hidden}"
    names = [lstm_name] + ([engine_name] if args.engine else [])
    ours = nightjar_samples_per_s(args.bench, names, args.repeat)

    print(f"online update, H={args.hidden}, W={WINDOW}, S=1, one core")
    rows = [("predictor", lstm_name, 3)]
    if args.engine:
        rows.append(("engine", engine_name, 4))
    for label, name, inputs in rows:
        theirs = best_torch(inputs, args.hidden, args.seconds, args.repeat)
        (ours_cpu, ours_wall), (theirs_cpu, theirs_wall) = ours[name], theirs
        print(f"  {label} ({name} vs torch, I={inputs})")
        print(f"    nightjar : {ours_cpu:12.0f} samples/CPU s  ({ours_wall:.0f} per wall s)")
        print(f"    torch    : {theirs_cpu:12.0f} samples/CPU s  ({theirs_wall:.0f} per wall s)")
        print(f"    ratio    : {ours_cpu / theirs_cpu:12.1f} x")


if __name__ == "__main__":
    main()
