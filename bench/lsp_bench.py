#!/usr/bin/env python3
"""Diagnostics latency of `ratewright lsp` per change, on generated
mechanisms (bench/gen_mechanism.py) of 1,000 and 10,000 steps.

Usage: bench/lsp_bench.py [--binary PATH] [--changes N] [STEPS...]

Speaks the protocol directly (standard library only, so the client adds
nothing measurable): initialize, open the file, then N changes of one
character each, cycling through three kinds a user makes while typing — a
param's value edited, a species name in a step mistyped (an unknown name
with a did-you-mean suggestion), and the typo fixed. The latency of a
change is from writing its didChange to reading the publishDiagnostics
that names its version. For scale, `ratewright check --format json` of the
same file is timed as a whole process with the same binary.
"""

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))


class Server:
    def __init__(self, binary):
        self.process = subprocess.Popen(
            [binary, "lsp"], stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL
        )
        self.next_id = 1

    def send(self, message):
        body = json.dumps(message).encode()
        self.process.stdin.write(b"Content-Length: %d\r\n\r\n" % len(body) + body)
        self.process.stdin.flush()

    def read(self):
        length = None
        while True:
            line = self.process.stdout.readline()
            if line in (b"\r\n", b""):
                break
            if line.lower().startswith(b"content-length:"):
                length = int(line.split(b":")[1])
        return json.loads(self.process.stdout.read(length))

    def request(self, method, params):
        self.next_id += 1
        self.send({"jsonrpc": "2.0", "id": self.next_id, "method": method, "params": params})
        while True:
            m = self.read()
            if m.get("id") == self.next_id:
                return m

    def notify(self, method, params):
        self.send({"jsonrpc": "2.0", "method": method, "params": params})

    def diagnostics_of(self, version):
        while True:
            m = self.read()
            if m.get("method") == "textDocument/publishDiagnostics" and m["params"].get("version") == version:
                return m["params"]["diagnostics"]


def position_of(text, needle):
    at = text.index(needle)
    line = text.count("\n", 0, at)
    return line, at - (text.rfind("\n", 0, at) + 1)


def bench(binary, steps, changes):
    folder = tempfile.mkdtemp()
    path = os.path.join(folder, f"gen{steps}.mech")
    text = subprocess.run(
        [sys.executable, os.path.join(HERE, "gen_mechanism.py"), str(steps)], check=True, capture_output=True, text=True
    ).stdout
    with open(path, "w") as f:
        f.write(text)
    # `check` of the same file, whole process, best of 3.
    check = []
    for _ in range(3):
        t = time.perf_counter()
        subprocess.run([binary, "check", "--format", "json", path], capture_output=True)
        check.append(time.perf_counter() - t)

    server = Server(binary)
    uri = "file://" + path
    server.request("initialize", {"processId": None, "rootUri": None, "capabilities": {}})
    server.notify("initialized", {})
    t = time.perf_counter()
    server.notify(
        "textDocument/didOpen", {"textDocument": {"uri": uri, "languageId": "mech", "version": 1, "text": text}}
    )
    server.diagnostics_of(1)
    opened = time.perf_counter() - t

    # The edits: in the middle of the file, so neither end is favoured.
    middle = f"step r{steps // 2} "
    line, column = position_of(text, middle)
    name_at = column + len(middle)  # the X of the step's first species
    value_line, value_column = position_of(text, "param k1 = 1.5")
    value_column += len("param k1 = 1.")
    kinds = [
        ("value", value_line, value_column, ["6", "5"]),
        ("typo", line, name_at, ["Y"]),
        ("fix", line, name_at, ["X"]),
    ]
    latencies = {"value": [], "typo": [], "fix": []}
    counts = {}
    version = 1
    value_turn = 0
    for n in range(changes):
        kind, l, c, texts = kinds[n % 3]
        new = texts[value_turn % len(texts)] if kind == "value" else texts[0]
        if kind == "value":
            value_turn += 1
        version += 1
        change = {
            "range": {"start": {"line": l, "character": c}, "end": {"line": l, "character": c + 1}},
            "text": new,
        }
        t = time.perf_counter()
        server.notify(
            "textDocument/didChange",
            {"textDocument": {"uri": uri, "version": version}, "contentChanges": [change]},
        )
        diagnostics = server.diagnostics_of(version)
        latencies[kind].append(time.perf_counter() - t)
        counts[kind] = len(diagnostics)
    # A burst: ten changes written at once, as fast typing or a paste of
    # several edits sends them; timed to the last one's diagnostics, and
    # counting how many loads the server ran for them.
    burst_start = time.perf_counter()
    first = version + 1
    for n in range(10):
        version += 1
        new = "6" if n % 2 == 0 else "5"
        change = {
            "range": {"start": {"line": value_line, "character": value_column}, "end": {"line": value_line, "character": value_column + 1}},
            "text": new,
        }
        server.notify(
            "textDocument/didChange",
            {"textDocument": {"uri": uri, "version": version}, "contentChanges": [change]},
        )
    published = 0
    while True:
        m = server.read()
        if m.get("method") == "textDocument/publishDiagnostics":
            published += 1
            if m["params"].get("version") == version:
                break
    burst = time.perf_counter() - burst_start
    server.request("shutdown", None)
    server.notify("exit", None)
    server.process.wait(timeout=30)
    all_latencies = [x for v in latencies.values() for x in v]
    return {
        "steps": steps,
        "lines": text.count("\n"),
        "check_s": min(check),
        "open_s": opened,
        "median_s": statistics.median(all_latencies),
        "max_s": max(all_latencies),
        "by_kind_median_s": {k: statistics.median(v) for k, v in latencies.items()},
        "diagnostics_after": counts,
        "burst_s": burst,
        "burst_loads": published,
    }


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--binary", default=os.path.join(HERE, "..", "target", "debug", "ratewright"))
    parser.add_argument("--changes", type=int, default=30)
    parser.add_argument("steps", nargs="*", type=int, default=[1000, 10000])
    args = parser.parse_args()
    results = [bench(args.binary, s, args.changes) for s in args.steps]
    print("| steps (lines) | `check` (process) | open | per change, median | per change, max | value / typo / fix (median) | burst of 10: time, loads |")
    print("|---|---|---|---|---|---|---|")
    ms = lambda s: f"{s * 1000:.0f} ms"
    for r in results:
        k = r["by_kind_median_s"]
        print(
            f"| {r['steps']:,} ({r['lines']:,}) | {ms(r['check_s'])} | {ms(r['open_s'])} | {ms(r['median_s'])} "
            f"| {ms(r['max_s'])} | {ms(k['value'])} / {ms(k['typo'])} / {ms(k['fix'])} "
            f"| {ms(r['burst_s'])}, {r['burst_loads']} |"
        )
    if len(results) == 2:
        a, b = results
        print()
        print(
            f"ratios {b['steps']:,} / {a['steps']:,} steps: per change {b['median_s'] / a['median_s']:.1f}x, "
            f"check {b['check_s'] / a['check_s']:.1f}x; per change / check: "
            f"{a['median_s'] / a['check_s']:.2f} at {a['steps']:,}, {b['median_s'] / b['check_s']:.2f} at {b['steps']:,}"
        )
    print()
    print("raw:", json.dumps(results))


if __name__ == "__main__":
    main()
