#!/usr/bin/env python3
"""Load on `watch --mqtt` through a real broker on loopback (a benchmark, not a test).

Starts Debian's mosquitto on a free loopback port and `steadycal watch --mqtt` on it, with
CSV payloads (`--payload csv --columns t,raw,ref`) published by `mosquitto_pub -q 1 -l`,
one publisher per channel, and events read by `mosquitto_sub`. Rows are gas-cell.csv's
raw and ref columns (cycled).

Probes: a pair of rows, the first with raw `NaN`, makes the monitor raise
`sample_rejected` when the second (good) row arrives; that event carries the good row's
`t`.

* throughput CHANNELS ROWS: every channel's ROWS rows published as fast as mosquitto_pub
  goes, the last two a probe; samples/s = CHANNELS x ROWS / (time from the first publish to
  the last channel's probe event).
* latency CHANNELS RATE SECONDS: RATE samples/s in all, spread over the channels, every
  10th sample of a channel a probe pair whose good row's `t` is the wall clock when it is
  written to mosquitto_pub; latency = arrival of the event at mosquitto_sub minus that `t`
  (publish, broker, steadycal, broker, subscriber). Median and 99th percentile.
* memory CHANNELS...: for each count, that many channels get 20 rows each; steadycal's
  peak RSS (VmHWM) then; the slope between counts is the memory per channel.

STEADYCAL_BIN names the binary (default target/release/steadycal). Saves go to a state
directory under $BENCH_DIR (default a new temporary directory); every
save syncs files, so the disk matters. Run on an otherwise idle machine.

Usage:
  host-cli/benches/mqtt-load.py throughput 1 20000
  host-cli/benches/mqtt-load.py throughput 100 200
  host-cli/benches/mqtt-load.py latency 1 200 20
  host-cli/benches/mqtt-load.py latency 100 200 20
  host-cli/benches/mqtt-load.py memory 1 100 256
"""

import json
import os
import shutil
import socket
import statistics
import subprocess
import sys
import tempfile
import threading
import time

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
BIN = os.environ.get("STEADYCAL_BIN", os.path.join(ROOT, "target", "release", "steadycal"))


def feed_rows():
    with open(os.path.join(ROOT, "simulated-feeds", "gas-cell.csv")) as f:
        next(f)
        return [line.rstrip("\n").split(",")[1:] for line in f if line.strip()]


ROWS = feed_rows()


def mosquitto():
    for place in os.environ.get("PATH", "").split(":") + ["/usr/sbin"]:
        path = os.path.join(place, "mosquitto")
        if os.path.isfile(path):
            return path
    sys.exit("mosquitto not found: apt-get install mosquitto mosquitto-clients")


class Rig:
    """mosquitto, steadycal watch --mqtt and mosquitto_sub on the events."""

    def __init__(self, max_channels):
        self.dir = tempfile.mkdtemp(dir=os.environ.get("BENCH_DIR"))
        with socket.socket() as s:
            s.bind(("127.0.0.1", 0))
            self.port = s.getsockname()[1]
        conf = os.path.join(self.dir, "mosquitto.conf")
        user = subprocess.run(["id", "-un"], capture_output=True, text=True).stdout.strip()
        with open(conf, "w") as f:
            f.write(f"listener {self.port} 127.0.0.1\nallow_anonymous true\n"
                    f"max_queued_messages 0\nuser {user}\n")
        self.log = open(os.path.join(self.dir, "broker.log"), "w")
        self.broker = subprocess.Popen([mosquitto(), "-c", conf], stdout=self.log, stderr=self.log)
        deadline = time.time() + 10
        while True:
            try:
                socket.create_connection(("127.0.0.1", self.port)).close()
                break
            except OSError:
                if time.time() > deadline:
                    sys.exit("mosquitto does not listen")
                time.sleep(0.02)
        self.events = []  # (arrival, channel, event)
        self.lock = threading.Lock()
        self.sub = subprocess.Popen(
            ["mosquitto_sub", "-h", "127.0.0.1", "-p", str(self.port), "-q", "1",
             "-t", "steadycal/+/events", "-v"],
            stdout=subprocess.PIPE, text=True)
        threading.Thread(target=self._read, daemon=True).start()
        self.watch = subprocess.Popen(
            [BIN, "watch", "--mqtt", f"mqtt://127.0.0.1:{self.port}", "--topic", "bench/+/feed",
             "--payload", "csv", "--columns", "t,raw,ref",
             "--state-dir", os.path.join(self.dir, "state"),
             "--max-channels", str(max_channels), "--status-seconds", "3600", "-q"],
            stderr=subprocess.DEVNULL)
        time.sleep(0.5)

    def _read(self):
        for line in self.sub.stdout:
            arrival = time.time()
            topic, _, payload = line.partition(" ")
            event = json.loads(payload)
            with self.lock:
                self.events.append((arrival, topic.split("/")[1], event))

    def probes(self):
        with self.lock:
            return [(a, c, e) for a, c, e in self.events if e["kind"] == "sample_rejected"]

    def publisher(self, channel):
        return subprocess.Popen(
            ["mosquitto_pub", "-h", "127.0.0.1", "-p", str(self.port), "-q", "1", "-l",
             "-t", f"bench/{channel}/feed"],
            stdin=subprocess.PIPE, text=True)

    def peak_rss_kib(self):
        with open(f"/proc/{self.watch.pid}/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
        return 0

    def close(self):
        for p in (self.watch, self.sub, self.broker):
            p.terminate()
            p.wait()
        self.log.close()
        shutil.rmtree(self.dir, ignore_errors=True)


def wait_for(rig, test, seconds):
    deadline = time.time() + seconds
    while not test():
        if time.time() > deadline:
            sys.exit("timed out waiting for steadycal's events")
        time.sleep(0.005)


def throughput(channels, rows):
    rig = Rig(channels)
    try:
        names = [f"ch{i}" for i in range(channels)]
        bodies = []
        for _ in names:
            lines = [f"{i},{ROWS[i % len(ROWS)][0]},{ROWS[i % len(ROWS)][1]}" for i in range(rows - 2)]
            lines.append(f"{rows - 2},NaN,")
            lines.append(f"{rows - 1},{ROWS[0][0]},{ROWS[0][1]}")
            bodies.append("\n".join(lines) + "\n")
        start = time.time()
        pubs = [rig.publisher(n) for n in names]
        for p, body in zip(pubs, bodies):
            threading.Thread(target=lambda p=p, b=body: (p.stdin.write(b), p.stdin.close()),
                             daemon=True).start()
        done = lambda: {c for _, c, e in rig.probes() if e["seq"] == rows - 2} >= set(names)
        wait_for(rig, done, 600)
        last = max(a for a, c, e in rig.probes() if e["seq"] == rows - 2)
        for p in pubs:
            p.wait()
        elapsed = last - start
        print(f"throughput: {channels} channel(s) x {rows} rows: {channels * rows} samples "
              f"in {elapsed:.2f} s = {channels * rows / elapsed:,.0f} samples/s; "
              f"peak RSS {rig.peak_rss_kib() / 1024:.1f} MiB")
    finally:
        rig.close()


def latency(channels, rate, seconds):
    rig = Rig(channels)
    try:
        names = [f"ch{i}" for i in range(channels)]
        pubs = [rig.publisher(n) for n in names]
        count = [0] * channels
        period = 1.0 / rate
        next_at = time.time()
        end = next_at + seconds
        i = 0
        while next_at < end:
            k = i % channels
            row = ROWS[count[k] % len(ROWS)]
            now = time.time()
            if count[k] % 10 == 9:
                pubs[k].stdin.write(f"{now:.6f},NaN,\n")
                now = time.time() + 1e-6
            pubs[k].stdin.write(f"{now:.6f},{row[0]},{row[1]}\n")
            pubs[k].stdin.flush()
            count[k] += 1
            i += 1
            next_at += period
            pause = next_at - time.time()
            if pause > 0:
                time.sleep(pause)
        expected = sum(c // 10 for c in count)
        wait_for(rig, lambda: len(rig.probes()) >= expected, 60)
        for p in pubs:
            p.stdin.close()
            p.wait()
        ms = sorted((a - e["t"]) * 1000 for a, c, e in rig.probes())
        p99 = ms[min(len(ms) - 1, int(round(0.99 * (len(ms) - 1))))]
        print(f"latency: {channels} channel(s), {rate} samples/s for {seconds} s: "
              f"{len(ms)} probes, median {statistics.median(ms):.2f} ms, "
              f"99th percentile {p99:.2f} ms, max {ms[-1]:.2f} ms")
    finally:
        rig.close()


def memory(counts):
    results = []
    for channels in counts:
        rig = Rig(max(channels, 1))
        try:
            names = [f"ch{i}" for i in range(channels)]
            pubs = [rig.publisher(n) for n in names]
            for p in pubs:
                lines = [f"{i},{ROWS[i][0]},{ROWS[i][1]}" for i in range(18)]
                p.stdin.write("\n".join(lines) + f"\n18,NaN,\n19,{ROWS[19][0]},{ROWS[19][1]}\n")
                p.stdin.close()
            wait_for(rig, lambda: len({c for _, c, e in rig.probes()}) >= channels, 120)
            for p in pubs:
                p.wait()
            kib = rig.peak_rss_kib()
            results.append((channels, kib))
            print(f"memory: {channels} channel(s): peak RSS {kib / 1024:.1f} MiB")
        finally:
            rig.close()
    for (c0, k0), (c1, k1) in zip(results, results[1:]):
        print(f"memory: {c0} -> {c1} channels: {(k1 - k0) / (c1 - c0):.1f} KiB per channel")


def main():
    if not os.path.isfile(BIN):
        sys.exit("build first: cargo build --release --bin steadycal")
    if len(sys.argv) < 2:
        sys.exit(__doc__)
    what, args = sys.argv[1], [int(a) for a in sys.argv[2:]]
    if what == "throughput":
        throughput(*args)
    elif what == "latency":
        latency(*args)
    elif what == "memory":
        memory(args)
    else:
        sys.exit(__doc__)


if __name__ == "__main__":
    main()
