#!/usr/bin/python3
"""MQTT ingest and publish-to-alert bench for `nightjar run` (run by hand, not part of ctest).

Everything runs on this machine: a mosquitto broker on a free 127.0.0.1 port, the real
nightjar binary with daemon.metrics_listen on, mosquitto_sub as the baseline consumer and
python3-paho-mqtt (Debian's MQTT client, independent of nightjar's) as the publisher and
latency witness. For each channel count:

Throughput (a consumer's drain rate, independent of how fast Python can publish): the
consumer is primed (one message per channel, so channels exist and the first-sample work
is not timed), then stopped with SIGSTOP; the burst of --messages QoS 0 messages (channels
in turn) is published and confirmed in the broker by a QoS 1 marker; SIGCONT starts the
clock. mosquitto_sub's time is until it exits after the last message (-C). nightjar's time
is until its metrics endpoint counts every burst sample as processed, dropped or rejected
(polled every 20 ms, so up to ~20 ms late). Samples are JSON {"t": s, "value": x}; the
daemon runs 2 workers; queue_capacity is set to the burst size, so a drop means a lost
sample, not a burst larger than the queue (the dropped figure comes from the endpoint).

Modes: last_value (forecaster last_value: no model at all); lstm_infer (forecaster lstm
with predictor.train_every: 1000000000, so every sample runs the LSTM forward pass and the
charts but no training step: "inference only"); lstm_train (the shipped defaults: one
training step, truncated BPTT over a 32-sample window, on every sample).

Latency: --latency-channels extra channels are warmed past warmup_samples (armed), then
one by one a +20 sigma step sample is published and the time to the alert raise on the
alert topic is taken on the same clock; the witness also subscribes to the sample topic,
so the broker's own publish-to-delivery time of the same message is the baseline. If a
raise needs more than one step sample (the detector's own delay), the next is sent after
--step-wait-ms and the latency is counted from the sample that raised it; the sample count
is reported separately. The other channels stay idle meanwhile. Caveat: a raise that comes
later than --step-wait-ms after its sample is attributed to the next step sample, so the
alert latency figures are cut off at that window; raise it to see slower raises whole.
"beyond broker" is, per trial, the alert latency minus the broker's own delivery time of
the same sample: what nightjar adds on top of one broker round trip.

TCP_NODELAY: nightjar's client always sets it; the bench's broker gets `set_tcp_nodelay
true` and the paho witness sets it on its socket, so Nagle's algorithm (which holds a small
write until the peer's delayed ACK, 40 ms on Linux) is off on every hop. --nagle leaves it
on in the broker and the witness, to show what it costs.

State: the daemon runs with daemon.state_dir "" (no checkpoints), so no run sees another's
channels.

CPU per message: wall-clock rates on a shared 2-core machine follow the load more than the
code (the scheduler shares CPU per thread, so a consumer with three busy threads gets more of
a loaded machine than mosquitto_sub with one, and its "ratio" rises with the load). So each
drain also takes the consumer's own CPU time (user + system, all threads, from
/proc/PID/stat and wait4) per message; that ratio does not depend on who else is running.
nightjar's figure includes its metrics endpoint answering the 20 ms polls.

Repetitions: the machine is shared, so one run says little. Each of --repeat rounds
measures the mosquitto_sub baseline and then every mode, after one discarded warm-up drain
(the broker's first burst allocates its queues). Each mode's ratio is taken against the
baseline of its own round; the report gives the median ratio and its range over the
rounds, the median rates, and the load average when each round started. Latency trials of
all rounds are pooled for p50/p99.

Usage:
  /usr/bin/python3 tests/bench/mqtt_ingest_bench.py --binary build/daemon/nightjar \
      [--channels 100 10000] [--messages 200000] [--modes last_value lstm_infer lstm_train]
      [--latency-channels 200] [--repeat 3] [--nagle] [--json out.json]
"""
import argparse
import json
import os
import random
import re
import shutil
import signal
import socket
import statistics
import subprocess
import sys
import tempfile
import threading
import time
import urllib.request

import paho.mqtt.client as mqtt

T0 = 1_780_000_000  # sample time base (epoch s)
DATA_PREFIX = "benchdata"
ALERT_PREFIX = "bench/alert"


def free_port():
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def wait_until(condition, timeout_s, what):
    deadline = time.monotonic() + timeout_s
    while not condition():
        if time.monotonic() > deadline:
            raise RuntimeError(f"timed out after {timeout_s} s waiting for {what}")
        time.sleep(0.02)


def accepts(port):
    try:
        with socket.create_connection(("127.0.0.1", port), timeout=0.5):
            return True
    except OSError:
        return False


class Broker:
    def __init__(self, workdir, nodelay=True):
        self.port = free_port()
        conf = os.path.join(workdir, "mosquitto.conf")
        with open(conf, "w") as f:
            f.write(f"listener {self.port} 127.0.0.1\nallow_anonymous true\n"
                    "persistence false\nmax_queued_messages 0\n"
                    f"set_tcp_nodelay {'true' if nodelay else 'false'}\n"
                    f"log_dest file {workdir}/broker.log\n")
        binary = shutil.which("mosquitto") or "/usr/sbin/mosquitto"
        self.process = subprocess.Popen([binary, "-c", conf], stdout=subprocess.DEVNULL,
                                        stderr=subprocess.DEVNULL)
        wait_until(lambda: accepts(self.port) or self.process.poll() is not None, 10,
                   "the broker")
        if self.process.poll() is not None:
            raise RuntimeError("mosquitto did not start")

    def stop(self):
        self.process.terminate()
        self.process.wait(timeout=10)


class Witness:
    """A paho client: publishes samples and takes the arrival time of every message on the
    topics it subscribes to (perf_counter, the same clock as the publish times)."""

    NODELAY = True  # set from --nagle in main()

    def __init__(self, port, client_id):
        self.client = mqtt.Client(client_id=client_id, clean_session=True)
        self.lock = threading.Lock()
        self.arrivals = {}  # topic -> [perf_counter times]
        self.subscribed = threading.Event()
        self.client.on_message = self._on_message
        self.client.on_subscribe = lambda *a: self.subscribed.set()
        self.client.max_queued_messages_set(0)
        self.client.connect("127.0.0.1", port, keepalive=120)
        if Witness.NODELAY:  # paho 1.6 leaves Nagle on
            self.client.socket().setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        self.client.loop_start()

    def _on_message(self, client, userdata, message):
        now = time.perf_counter()
        with self.lock:
            self.arrivals.setdefault(message.topic, []).append(now)

    def subscribe(self, topic):
        self.subscribed.clear()
        self.client.subscribe(topic, qos=1)
        if not self.subscribed.wait(10):
            raise RuntimeError(f"no SUBACK for {topic}")

    def first_after(self, topic, since):
        with self.lock:
            for t in self.arrivals.get(topic, []):
                if t >= since:
                    return t
        return None

    def publish_all(self, messages):
        """QoS 0 messages, then a QoS 1 marker whose PUBACK says the broker has them all
        (the broker handles one connection's packets in order)."""
        for topic, payload in messages:
            while True:
                info = self.client.publish(topic, payload, qos=0)
                if info.rc == mqtt.MQTT_ERR_SUCCESS:
                    break
                time.sleep(0.001)
        marker = self.client.publish("benchmark/marker", b"", qos=1)
        marker.wait_for_publish(timeout=120)
        if not marker.is_published():
            raise RuntimeError("the broker did not acknowledge the marker")

    def stop(self):
        self.client.loop_stop()
        self.client.disconnect()


def channel_topic(name):
    return f"{DATA_PREFIX}/{name}/flow"


def sample(k, value):
    return json.dumps({"t": T0 + k, "value": round(value, 4)})


def noise(i, k):
    # N(0, 0.5) noise, fixed per (channel, sample) so every consumer sees the same data.
    return random.Random(i * 1_000_003 + k).gauss(0.0, 0.5)


def burst(names, per_channel, first_k):
    out = []
    for k in range(first_k, first_k + per_channel):
        for i, name in enumerate(names):
            out.append((channel_topic(name), sample(k, 50.0 + noise(i, k))))
    return out


def nightjar_config(mode, queue_capacity, metrics_port, workers):
    forecaster = "last_value" if mode == "last_value" else "lstm"
    predictor = "  predictor: { train_every: 1000000000 }\n" if mode == "lstm_infer" else ""
    return (
        "defaults:\n"
        f"  forecaster: {forecaster}\n"
        "  warmup_samples: 200\n"
        "  sample_period_s: 1\n"
        # The scaler's warm-up at its minimum, so the predictor runs from the third sample
        # of a channel on (with 10 000 channels a burst holds only ~10 samples of each).
        "  scaler: { warmup_samples: 2 }\n"
        "  sensor: { flatline_samples: 0, gap_periods: 100000 }\n"
        f"{predictor}"
        "channels: []\n"
        "mqtt:\n"
        "  client_id: nightjar-bench\n"
        "  keepalive_s: 120\n"
        f"  alert_prefix: {ALERT_PREFIX}\n"
        "  state_prefix: bench/state\n"
        "  status_topic: bench/status\n"
        "  command_topic: bench/command\n"
        "  reply_topic: bench/reply\n"
        "  subscriptions:\n"
        f"    - topic: \"{DATA_PREFIX}/{{asset}}/{{signal}}\"\n"
        "      channel: \"cw2.{asset}.{signal}\"\n"
        "      payload: json\n"
        "      time_field: t\n"
        "      time_unit: epoch_s\n"
        "daemon:\n"
        f"  workers: {workers}\n"
        f"  queue_capacity: {queue_capacity}\n"
        f"  metrics_listen: \"127.0.0.1:{metrics_port}\"\n"
        # No checkpoints: with the default state_dir every run loaded the previous run's
        # channels (whose sample times are ahead of this run's, so every sample was dropped
        # as out of order) and wrote them all back on stop.
        "  state_dir: \"\"\n"
        "  publish_interval_s: 5\n")


SAMPLE_LINE = re.compile(r"^(\S+) (\S+)$")


def scrape(port):
    with urllib.request.urlopen(f"http://127.0.0.1:{port}/metrics", timeout=5) as r:
        text = r.read().decode()
    values = {}
    for line in text.splitlines():
        if line.startswith("#"):
            continue
        m = SAMPLE_LINE.match(line)
        if m:
            values[m.group(1)] = float(m.group(2))
    return values


def settled(m):
    return (m.get("nightjar_samples_processed_total", 0) + m.get("nightjar_samples_dropped_total", 0)
            + m.get("nightjar_samples_rejected_total", 0))


def cpu_seconds(pid):
    """user + system CPU time of a running process so far (all its threads)."""
    with open(f"/proc/{pid}/stat") as f:
        fields = f.read().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def baseline_drain(broker, names, per_channel, workdir):
    """mosquitto_sub's drain of the burst: (messages/s, CPU microseconds per message)."""
    n = len(names) * per_channel
    out_path = os.path.join(workdir, "sub.out")
    pub = Witness(broker.port, "bench-pub-baseline")
    # A retained marker the subscriber gets at once tells us it is subscribed.
    pub.client.publish("benchready", b"ready", qos=1, retain=True).wait_for_publish(10)
    with open(out_path, "w") as out:
        sub = subprocess.Popen(["mosquitto_sub", "-h", "127.0.0.1", "-p", str(broker.port),
                                "-i", "bench-sub", "-q", "1", "-k", "120", "-t",
                                f"{DATA_PREFIX}/#", "-t", "benchready", "-C", str(n + 1)],
                               stdout=out, stderr=subprocess.STDOUT)
    wait_until(lambda: "ready" in open(out_path).read(), 10, "mosquitto_sub to subscribe")
    sub.send_signal(signal.SIGSTOP)
    pub.publish_all(burst(names, per_channel, 1))
    cpu_before = cpu_seconds(sub.pid)
    start = time.perf_counter()
    sub.send_signal(signal.SIGCONT)
    _, _, usage = os.wait4(sub.pid, 0)  # its CPU time, which a wait() would not give
    elapsed = time.perf_counter() - start
    sub.returncode = 0
    cpu = usage.ru_utime + usage.ru_stime - cpu_before
    pub.stop()
    with open(out_path) as f:
        received = sum(1 for line in f if line.startswith("{"))
    if received != n:
        raise RuntimeError(f"mosquitto_sub received {received} of {n}")
    return n / elapsed, 1e6 * cpu / n


def run_daemon(binary, broker, mode, names, per_channel, workers, latency_channels,
               step_wait_ms, workdir):
    n = len(names) * per_channel
    metrics_port = free_port()
    config = os.path.join(workdir, f"nightjar-{mode}-{len(names)}.yaml")
    with open(config, "w") as f:
        f.write(nightjar_config(mode, max(n, 8192), metrics_port, workers))
    log = open(os.path.join(workdir, f"nightjar-{mode}-{len(names)}.log"), "w")
    daemon = subprocess.Popen([binary, "run", "--config", config, "--broker",
                               f"127.0.0.1:{broker.port}"], stdout=log, stderr=subprocess.STDOUT)
    result = {}
    pub = Witness(broker.port, f"bench-pub-{mode}-{len(names)}")
    try:
        wait_until(lambda: "ready: connected and subscribed" in
                   open(log.name).read() or daemon.poll() is not None, 20, "nightjar ready")
        if daemon.poll() is not None:
            raise RuntimeError("nightjar exited: " + open(log.name).read())
        # Prime: one sample per channel creates every channel.
        pub.publish_all(burst(names, 1, 0))
        wait_until(lambda: settled(scrape(metrics_port)) >= len(names), 300, "priming")
        daemon.send_signal(signal.SIGSTOP)
        pub.publish_all(burst(names, per_channel, 1))
        cpu_before = cpu_seconds(daemon.pid)
        start = time.perf_counter()
        daemon.send_signal(signal.SIGCONT)
        total = len(names) + n
        wait_until(lambda: settled(scrape(metrics_port)) >= total, 600, "the burst")
        elapsed = time.perf_counter() - start
        result["cpu_us_per_msg"] = 1e6 * (cpu_seconds(daemon.pid) - cpu_before) / n
        m = scrape(metrics_port)
        result["ingest_per_s"] = n / elapsed
        result["received"] = m["nightjar_samples_received_total"]
        result["processed"] = m["nightjar_samples_processed_total"]
        result["dropped"] = m["nightjar_samples_dropped_total"]
        result["rejected"] = m["nightjar_samples_rejected_total"]
        result["bad_payloads"] = m["nightjar_payloads_bad_total"]
        if latency_channels > 0:
            result.update(latency(pub, metrics_port, latency_channels, step_wait_ms, total))
    finally:
        pub.stop()
        daemon.send_signal(signal.SIGTERM)
        try:
            daemon.wait(timeout=60)
        except subprocess.TimeoutExpired:
            daemon.kill()
            daemon.wait()
        log.close()
    return result


def percentile(values, q):
    s = sorted(values)
    return s[min(len(s) - 1, int(round(q * (len(s) - 1))))]


def latency(pub, metrics_port, count, step_wait_ms, settled_before):
    names = [f"lat{i:05d}" for i in range(count)]
    warm = 260  # > warmup_samples (200): armed
    pub.publish_all(burst(names, warm, 0))
    wait_until(lambda: settled(scrape(metrics_port)) >= settled_before + count * warm, 600,
               "the latency channels' warm-up")
    pub.subscribe(f"{ALERT_PREFIX}/#")
    pub.subscribe(f"{DATA_PREFIX}/+/flow")
    alert_latency, broker_latency, beyond, samples_needed, missed = [], [], [], [], 0
    for i, name in enumerate(names):
        alert_topic = f"{ALERT_PREFIX}/cw2/{name}/flow"
        raised = None
        for extra in range(20):
            k = warm + extra
            sent = time.perf_counter()
            pub.client.publish(channel_topic(name), sample(k, 60.0 + noise(i, k)), qos=0)
            deadline = sent + step_wait_ms / 1000.0
            while time.perf_counter() < deadline:
                raised = pub.first_after(alert_topic, sent)
                if raised is not None:
                    break
                time.sleep(0.0002)
            if raised is not None:
                delivered = pub.first_after(channel_topic(name), sent)
                alert_latency.append(raised - sent)
                if delivered is not None:
                    broker_latency.append(delivered - sent)
                    beyond.append(raised - delivered)
                samples_needed.append(extra + 1)
                break
        if raised is None:
            missed += 1
    return {"latency_trials": count, "latency_missed": missed,
            "alert_s": alert_latency, "broker_s": broker_latency, "beyond_s": beyond,
            "step_samples": samples_needed}


def latency_summary(trials):
    """p50/p99 in ms over the pooled trials of every round."""
    alert = [t for r in trials for t in r["alert_s"]]
    broker = [t for r in trials for t in r["broker_s"]]
    beyond = [t for r in trials for t in r["beyond_s"]]
    steps = [s for r in trials for s in r["step_samples"]]
    out = {"latency_trials": sum(r["latency_trials"] for r in trials),
           "latency_missed": sum(r["latency_missed"] for r in trials)}
    if alert:
        out.update({
            "alert_p50_ms": 1e3 * percentile(alert, 0.5),
            "alert_p99_ms": 1e3 * percentile(alert, 0.99),
            "broker_p50_ms": 1e3 * percentile(broker, 0.5),
            "broker_p99_ms": 1e3 * percentile(broker, 0.99),
            "beyond_broker_p50_ms": 1e3 * percentile(beyond, 0.5),
            "beyond_broker_p99_ms": 1e3 * percentile(beyond, 0.99),
            "step_samples_median": statistics.median(steps),
            "step_samples_max": max(steps),
        })
    return out


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--binary", default="build/daemon/nightjar")
    parser.add_argument("--channels", type=int, nargs="+", default=[100, 10000])
    parser.add_argument("--messages", type=int, default=200000,
                        help="burst size per measurement (rounded to whole rounds of channels)")
    parser.add_argument("--modes", nargs="+", default=["last_value", "lstm_infer", "lstm_train"],
                        choices=["last_value", "lstm_infer", "lstm_train"])
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--latency-channels", type=int, default=200)
    parser.add_argument("--step-wait-ms", type=float, default=50.0)
    parser.add_argument("--repeat", type=int, default=3,
                        help="rounds of baseline + every mode; medians and ranges reported")
    parser.add_argument("--nagle", action="store_true",
                        help="leave Nagle's algorithm on in the broker and the witness")
    parser.add_argument("--json", help="also write the results here")
    args = parser.parse_args()
    Witness.NODELAY = not args.nagle

    results = []
    with tempfile.TemporaryDirectory(prefix="nightjar-bench-") as workdir:
        broker = Broker(workdir, nodelay=not args.nagle)
        try:
            for channels in args.channels:
                names = [f"c{i:05d}" for i in range(channels)]
                per_channel = max(1, args.messages // channels)
                baseline_drain(broker, names, per_channel, workdir)  # warm-up, discarded
                bases, base_cpus, loads = [], [], []
                runs = {mode: [] for mode in args.modes}
                for rnd in range(args.repeat):
                    loads.append(os.getloadavg()[0])
                    base, base_cpu = baseline_drain(broker, names, per_channel, workdir)
                    bases.append(base)
                    base_cpus.append(base_cpu)
                    line = (f"{channels} channels round {rnd + 1}/{args.repeat} (load "
                            f"{loads[-1]:.2f}): mosquitto_sub {base:,.0f} msg/s")
                    for mode in args.modes:
                        r = run_daemon(args.binary, broker, mode, names, per_channel,
                                       args.workers,
                                       args.latency_channels if mode != "lstm_train" else 0,
                                       args.step_wait_ms, workdir)
                        r["ratio"] = r["ingest_per_s"] / base
                        r["cpu_ratio"] = r["cpu_us_per_msg"] / base_cpu
                        runs[mode].append(r)
                        line += (f"; {mode} {r['ratio']:.2f}x, CPU/msg {r['cpu_ratio']:.2f}x "
                                 f"(dropped {r['dropped']:.0f})")
                    print(line, flush=True)
                print(f"{channels} channels, {channels * per_channel} messages: mosquitto_sub "
                      f"median {statistics.median(bases):,.0f} msg/s (range "
                      f"{min(bases):,.0f}..{max(bases):,.0f}), CPU "
                      f"{statistics.median(base_cpus):.2f} us/msg (range "
                      f"{min(base_cpus):.2f}..{max(base_cpus):.2f})", flush=True)
                for mode in args.modes:
                    rs = runs[mode]
                    ratios = [r["ratio"] for r in rs]
                    summary = {
                        "channels": channels, "messages": channels * per_channel, "mode": mode,
                        "rounds": len(rs), "load_avg": loads, "nagle": args.nagle,
                        "baseline_per_s": bases,
                        "baseline_median_per_s": statistics.median(bases),
                        "ingest_per_s": [r["ingest_per_s"] for r in rs],
                        "ingest_median_per_s": statistics.median(r["ingest_per_s"] for r in rs),
                        "ingest_ratio": ratios,
                        "ingest_ratio_median": statistics.median(ratios),
                        "ingest_ratio_min": min(ratios), "ingest_ratio_max": max(ratios),
                        "baseline_cpu_us_per_msg": base_cpus,
                        "cpu_us_per_msg": [r["cpu_us_per_msg"] for r in rs],
                        "cpu_ratio": [r["cpu_ratio"] for r in rs],
                        "cpu_ratio_median": statistics.median(r["cpu_ratio"] for r in rs),
                        "cpu_ratio_min": min(r["cpu_ratio"] for r in rs),
                        "cpu_ratio_max": max(r["cpu_ratio"] for r in rs),
                        "dropped": sum(r["dropped"] for r in rs),
                        "rejected": sum(r["rejected"] for r in rs),
                    }
                    line = (f"  {mode:10s} median {summary['ingest_median_per_s']:,.0f} msg/s; "
                            f"ratio to mosquitto_sub median {summary['ingest_ratio_median']:.2f} "
                            f"(range {summary['ingest_ratio_min']:.2f}.."
                            f"{summary['ingest_ratio_max']:.2f}); CPU per message "
                            f"{summary['cpu_ratio_median']:.2f} x mosquitto_sub's (range "
                            f"{summary['cpu_ratio_min']:.2f}..{summary['cpu_ratio_max']:.2f}); "
                            f"dropped "
                            f"{summary['dropped']:.0f}, rejected {summary['rejected']:.0f}")
                    trials = [r for r in rs if "alert_s" in r]
                    if trials:
                        lat = latency_summary(trials)
                        summary.update(lat)
                        line += (f"; latency trials {lat['latency_trials']}, missed "
                                 f"{lat['latency_missed']}")
                        if "alert_p50_ms" in lat:
                            line += (f"; publish->alert p50 {lat['alert_p50_ms']:.2f} ms, p99 "
                                     f"{lat['alert_p99_ms']:.2f} ms; broker alone p50 "
                                     f"{lat['broker_p50_ms']:.2f}, p99 {lat['broker_p99_ms']:.2f}; "
                                     f"beyond broker p50 {lat['beyond_broker_p50_ms']:.2f}, p99 "
                                     f"{lat['beyond_broker_p99_ms']:.2f} (step samples median "
                                     f"{lat['step_samples_median']}, max "
                                     f"{lat['step_samples_max']})")
                    print(line, flush=True)
                    results.append(summary)
        finally:
            broker.stop()
    if args.json:
        with open(args.json, "w") as f:
            json.dump(results, f, indent=2)
    return 0


if __name__ == "__main__":
    sys.exit(main())
