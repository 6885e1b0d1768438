#!/usr/bin/python3
"""Runs the same online LSTM update in nightjar-bench and in torch, in one run, and
prints nightjar's throughput as a ratio of torch's.

The torch side mirrors one nightjar training step per sample: an LSTMCell (input 3,
hidden H) plus a linear head, unrolled over the last W = 32 samples from the stored
state, mean squared one-step error, backward, gradient-norm clipping at 1.0, one Adam
step, then one forward step for the next prediction. Batch 1, one thread (Debian's
python3-torch), as an edge box would run it.

Usage: tests/bench/torch_ratio.py BUILD_DIR/tests/bench/nightjar-bench [--hidden 32]
"""
import argparse
import json
import subprocess
import sys
import time


def nightjar_samples_per_s(bench, name):
    out = subprocess.run(
        [bench, f"--benchmark_filter=^{name}$", "--benchmark_format=json",
         "--benchmark_min_time=1"],
        check=True, capture_output=True, text=True).stdout
    runs = [b for b in json.loads(out)["benchmarks"] if b["name"] == name]
    if not runs:
        sys.exit(f"torch_ratio: {bench} has no benchmark named {name}")
    return runs[0]["items_per_second"]


def torch_samples_per_s(hidden, window, seconds):
    import torch
    torch.set_num_threads(1)
    torch.manual_seed(1)
    cell = torch.nn.LSTMCell(3, hidden)
    head = torch.nn.Linear(hidden, 1)
    params = list(cell.parameters()) + list(head.parameters())
    opt = torch.optim.Adam(params, lr=1e-3)
    inputs = torch.randn(window, 1, 3)
    targets = torch.randn(window, 1, 1)
    h0 = torch.zeros(1, hidden)
    c0 = torch.zeros(1, hidden)

    def step():
        h, c = h0, c0
        loss = 0.0
        for t in range(window):
            h, c = cell(inputs[t], (h, c))
            loss = loss + (head(h) - targets[t]).pow(2).mean()
        loss = loss / window
        opt.zero_grad()
        loss.backward()
        torch.nn.utils.clip_grad_norm_(params, 1.0)
        opt.step()
        with torch.no_grad():
            cell(inputs[-1], (h0, c0))

    for _ in range(20):  # warm-up
        step()
    n = 0
    start = time.perf_counter()
    while time.perf_counter() - start < seconds:
        step()
        n += 1
    return n / (time.perf_counter() - start)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("bench", help="path to nightjar-bench")
    parser.add_argument("--hidden", type=int, default=32)
    parser.add_argument("--seconds", type=float, default=3.0)
    args = parser.parse_args()
    ours = nightjar_samples_per_s(args.bench, f"BM_LstmTrain/{args.hidden}")
    theirs = torch_samples_per_s(args.hidden, 32, args.seconds)
    print(f"online update, H={args.hidden}, W=32, S=1, one core")
    print(f"  nightjar : {ours:12.0f} samples/s")
    print(f"  torch    : {theirs:12.0f} samples/s")
    print(f"  ratio    : {ours / theirs:12.1f} x")


if __name__ == "__main__":
    main()
