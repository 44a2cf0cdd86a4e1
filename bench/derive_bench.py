"""Benchmark: `ratewright derive` against SymPy on the same linear
steady-state systems.

For each mechanism (steady-state random-order bi-bi, ordered ter-bi,
ordered ter-ter) this writes a .mech file and a SymPy spec, then measures
  - ratewright, whole process: wall time of `derive FILE --format json`
    (median of N runs);
  - ratewright, in process: the derive time it reports with --timing
    (median of N runs);
  - SymPy, Cramer's rule with Berkowitz determinants then cancel, and
    SymPy's linsolve then cancel (tests/python/derive_sympy.py, which also
    checks that both agree with the derived rate).
A random-order ter-ter mechanism with dead-end complexes shows the size
limit and the progress line.

Usage (from the repository root, after `cargo build --release`):
    python3 bench/derive_bench.py [--runs 20] [--no-linsolve] [--large]
"""

import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.path.join(ROOT, "target", "release", "ratewright")
SYMPY = os.path.join(ROOT, "tests", "python", "derive_sympy.py")


def mechanism(name, forms, steps, substrates, products, first_form="E"):
    """steps: (name, reactants, products, reversible) with sides as lists."""
    species = substrates + products + forms
    lines = [f"mechanism {name}", "units concentration uM, time s"]
    for s in species:
        value = " = 1 uM" if s in substrates or s == first_form else (" = 0.1 uM" if s in products else "")
        lines.append(f"species {s}{value}")
    spec_steps = []
    for k, (sname, lhs, rhs, rev) in enumerate(steps, start=1):
        order_f, order_r = len(lhs), len(rhs)
        unit_f = "/uM/s" if order_f == 2 else "/s"
        unit_r = "/uM/s" if order_r == 2 else "/s"
        lines.append(f"param kf{k} = {k} {unit_f}")
        if rev:
            lines.append(f"param kr{k} = {k + 0.5} {unit_r}")
        arrow = "<=>" if rev else "->"
        with_ = f"kf{k}, kr{k}" if rev else f"kf{k}"
        lines.append(f"step {sname} {' + '.join(lhs)} {arrow} {' + '.join(rhs)} with {with_}")
        spec_steps.append({
            "name": sname,
            "reactants": {s: lhs.count(s) for s in lhs},
            "products": {s: rhs.count(s) for s in rhs},
            "kf": f"kf{k}",
            "kr": f"kr{k}" if rev else None,
        })
    lines.append(f"total Et = {' + '.join(forms)}")
    lines.append(f"assume steady {', '.join(forms)}")
    spec = {"forms": forms, "total": "Et", "steps": spec_steps, "fast": [], "rate_species": products[0], "nu": 1}
    return "\n".join(lines) + "\n", spec


def random_bi_bi():
    forms = ["E", "EA", "EB", "EAB", "EP", "EQ"]
    steps = [
        ("a1", ["E", "A"], ["EA"], True),
        ("b1", ["E", "B"], ["EB"], True),
        ("b2", ["EA", "B"], ["EAB"], True),
        ("a2", ["EB", "A"], ["EAB"], True),
        ("p1", ["EAB"], ["EQ", "P"], True),
        ("q1", ["EAB"], ["EP", "Q"], True),
        ("q2", ["EQ"], ["E", "Q"], True),
        ("p2", ["EP"], ["E", "P"], True),
    ]
    return mechanism("random_bi_bi_steady", forms, steps, ["A", "B"], ["P", "Q"])


def ordered_ter_bi():
    forms = ["E", "EA", "EAB", "EABC", "EQ"]
    steps = [
        ("s1", ["E", "A"], ["EA"], True),
        ("s2", ["EA", "B"], ["EAB"], True),
        ("s3", ["EAB", "C"], ["EABC"], True),
        ("s4", ["EABC"], ["EQ", "P"], True),
        ("s5", ["EQ"], ["E", "Q"], True),
    ]
    return mechanism("ordered_ter_bi", forms, steps, ["A", "B", "C"], ["P", "Q"])


def ordered_ter_ter():
    forms = ["E", "EA", "EAB", "EABC", "EQR", "ER"]
    steps = [
        ("s1", ["E", "A"], ["EA"], True),
        ("s2", ["EA", "B"], ["EAB"], True),
        ("s3", ["EAB", "C"], ["EABC"], True),
        ("s4", ["EABC"], ["EQR", "P"], True),
        ("s5", ["EQR"], ["ER", "Q"], True),
        ("s6", ["ER"], ["E", "R"], True),
    ]
    return mechanism("ordered_ter_ter", forms, steps, ["A", "B", "C"], ["P", "Q", "R"])


def random_ter_ter_dead_end():
    """Random binding of A, B, C and random release of P, Q, R around one
    central complex, plus dead-end complexes of free enzyme with products
    binding the wrong substrate (EAR, EBQ, ECP)."""
    subs = ["A", "B", "C"]
    prods = ["P", "Q", "R"]
    import itertools

    def name(prefix, members):
        return "E" + "".join(members) if members else "E"

    forms = []
    steps = []
    for r in range(0, 4):
        for comb in itertools.combinations(subs, r):
            f = name("E", comb)
            if f not in forms:
                forms.append(f)
    for r in range(1, 3):
        for comb in itertools.combinations(prods, r):
            forms.append(name("E", comb))
    # substrate binding: every subset to subset + one
    for r in range(0, 3):
        for comb in itertools.combinations(subs, r):
            for s in subs:
                if s in comb:
                    continue
                after = tuple(sorted(comb + (s,), key=subs.index))
                steps.append((f"bind_{s}_{''.join(comb) or 'E'}", [name('E', comb), s], [name('E', after)], True))
    # central complex releases products randomly (EABC is the central form)
    for r in range(3, 0, -1):
        for comb in itertools.combinations(prods, r):
            for p in comb:
                rest = tuple(x for x in comb if x != p)
                src = "EABC" if r == 3 else name("E", comb)
                steps.append((f"rel_{p}_{''.join(comb)}", [src], [name('E', rest), p], True))
    for dead, (a, b) in {"EAR": ("R", "A"), "EBQ": ("Q", "B"), "ECP": ("P", "C")}.items():
        forms.append(dead)
        steps.append((f"dead_{dead}", [name("E", (a,)), b], [dead], True))
    return mechanism("random_ter_ter_dead_end", forms, steps, subs, prods)


def median_time(cmd, runs):
    times = []
    inproc = []
    for _ in range(runs):
        t0 = time.perf_counter()
        out = subprocess.run(cmd, capture_output=True, text=True)
        times.append(time.perf_counter() - t0)
        if out.returncode != 0:
            raise SystemExit(f"failed: {' '.join(cmd)}\n{out.stderr}")
        for line in out.stderr.splitlines():
            if line.startswith("timing:"):
                inproc.append(float(line.split("derive ")[1].split(" ms")[0]) / 1e3)
    return statistics.median(times), statistics.median(inproc) if inproc else float("nan"), out


def main():
    runs = int(sys.argv[sys.argv.index("--runs") + 1]) if "--runs" in sys.argv else 20
    with_linsolve = "--no-linsolve" not in sys.argv
    if not os.path.exists(BIN):
        raise SystemExit("build first: cargo build --release")
    tmp = tempfile.mkdtemp(prefix="derive-bench-")
    rows = []
    for label, make in [
        ("random-order bi-bi, steady state (6 forms)", random_bi_bi),
        ("ordered ter-bi (5 forms)", ordered_ter_bi),
        ("ordered ter-ter (6 forms)", ordered_ter_ter),
    ]:
        text, spec = make()
        path = os.path.join(tmp, make.__name__ + ".mech")
        with open(path, "w") as f:
            f.write(text)
        whole, inproc, out = median_time([BIN, "derive", path, "--format", "json", "--timing"], runs)
        derived = json.loads(out.stdout)
        spec["derived"] = derived["rate"]
        spec_path = path + ".json"
        with open(spec_path, "w") as f:
            json.dump(spec, f)
        method = "both" if with_linsolve else "cramer"
        s = subprocess.run([sys.executable, SYMPY, spec_path, "--method", method], capture_output=True, text=True)
        if s.returncode != 0:
            raise SystemExit(s.stderr)
        sres = json.loads(s.stdout)
        rows.append((label, whole, inproc, sres["seconds"].get("cramer"), sres["seconds"].get("linsolve"), sres["ok"],
                     derived["spanning_tree_terms"]))
    print("| mechanism | trees | ratewright whole process | ratewright in process | SymPy Cramer+Berkowitz | SymPy linsolve | agree | speed-up (Cramer / in process) | speed-up (Cramer / whole) |")
    print("|---|---|---|---|---|---|---|---|---|")
    for label, whole, inproc, cramer, lins, ok, trees in rows:
        fmt = lambda x: "n/a" if x is None else (f"{x * 1e3:.2f} ms" if x < 1 else f"{x:.2f} s")
        print(f"| {label} | {trees} | {fmt(whole)} | {fmt(inproc)} | {fmt(cramer)} | {fmt(lins)} | {ok} | {cramer / inproc:.0f}x | {cramer / whole:.0f}x |")

    # Large mechanism: the limit, then a raised limit with progress on stderr.
    text, spec = random_ter_ter_dead_end()
    path = os.path.join(tmp, "random_ter_ter_dead_end.mech")
    with open(path, "w") as f:
        f.write(text)
    out = subprocess.run([BIN, "derive", path, "--format", "json"], capture_output=True, text=True)
    print(f"\nrandom-order ter-ter with dead-end complexes ({len(spec['forms'])} forms), default limit: exit {out.returncode}")
    print(out.stdout.strip() or out.stderr.strip())
    if "--large" in sys.argv:
        # Raised limit: wall time and peak memory (GNU time), progress on stderr.
        cmd = ["/usr/bin/time", "-v", BIN, "derive", path, "--format", "json", "--timing", "--max-terms", "5000000"]
        t0 = time.perf_counter()
        out = subprocess.run(cmd, capture_output=True, text=True)
        wall = time.perf_counter() - t0
        rss = [l for l in out.stderr.splitlines() if "Maximum resident" in l]
        timing = [l for l in out.stderr.replace("\r", "\n").splitlines() if l.startswith("timing:")]
        print(f"raised limit: exit {out.returncode}, wall {wall:.1f} s, {rss[0].strip() if rss else ''}, {timing[0] if timing else ''}, output {len(out.stdout) / 1e6:.0f} MB")


if __name__ == "__main__":
    main()
