#!/usr/bin/env python3
"""heldout against the Python peer workloads W1-W6, side by side.

Generates the workload tables with the peer folder's gen_data.py, then runs
each peer script and heldout (cold: empty cache; warm: the same run again)
interleaved, round after round, and prints per workload the median wall
time of each, the ratio peer / heldout cold, warm / cold, and the peak
resident memory of each process (GNU time's %M, the child's getrusage).
It prints the load average before and after, since the machine may be
shared. Optionally (--scaling) it times heldout cold on W1 and W2 at n, 4n
and 16n rows and fits the exponent b of time ~ n^b by least squares on the
logarithms; and (--floor) runs the peer folder's lower_bound.py.

The peer folder is not part of this repository: pass it with --peer-dir or
HELDOUT_PEER_DIR (default ../shared/perf, relative to the repository root).
Nothing in the tests depends on it. Needs python3 with numpy, scipy,
scikit-learn and pandas (what the peer scripts import).

With --baseline BIN a second heldout binary (say, the build before a
change) runs cold right after heldout in every round, and its median time
and memory are printed beside.

Usage: python3 bench/run.py [--rounds 3] [--workloads w1,w2,w3,w4,w5,w6]
                            [--peer-dir DIR] [--heldout BIN] [--baseline BIN] [--scaling]
                            [--scaling-only] [--floor] [--jobs N]
"""

import argparse
import importlib.util
import math
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
DATA = Path("/tmp/heldout-perf-data")
# GNU time, for the peak resident memory of each run.
TIME = "/usr/bin/time"
# A peer slower than this (first round) is run once only.
PEER_ONCE_ABOVE_S = 60.0

W5_TRUTH = "2 + 0.8*x - 0.12*x^2 + 1.5*sin(1.3*x)"

SPECS = {
    "w1": """
[data]
table = "{data}/w1_poly.csv"
target = "y"
features = ["x"]

[split]
holdout = 0
folds = 10

[[candidate]]
family = "polynomial"
degree = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12]
""",
    "w2": """
[data]
table = "{data}/w2_knn.csv"
target = "y"
features = ["x1", "x2"]

[split]
holdout = 0
folds = 10

[[candidate]]
family = "nearest-neighbors"
k = [1, 2, 3, 5, 8, 13, 21, 34, 55, 89]
""",
    "w3": """
[data]
table = "{data}/w3_spline.csv"
target = "y"
features = ["x"]

[split]
holdout = 0
folds = 10

[[candidate]]
family = "smoothing-spline"
penalty = [{w3_penalties}]
""",
    "w4": """
[data]
table = "{data}/w4_ridge.csv"
target = "y"
features = [{w4_features}]

[split]
holdout = 0
folds = 10

[[candidate]]
family = "ridge"
penalty = [{w4_penalties}]
""",
    "w5": """
[simulate]
truth = "{w5_truth}"
target = "y"
inputs = {{ x = {{ uniform = [0, 10] }} }}
noise_sd = 0.5
train_size = 100
replicates = 1000
test_grid = 500
design = "random"

[split]
holdout = 0
folds = 10

[[candidate]]
family = "polynomial"
degree = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10]

[[candidate]]
family = "nearest-neighbors"
k = [1, 3, 5, 9, 15, 25, 50]
""",
    "w6": """
[data]
table = "{data}/w6_logit.csv"
target = "y"
task = "classification"
features = [{w6_features}]

[split]
holdout = 0
folds = 10

[[candidate]]
family = "logistic"
""",
    # The peer's second half: k-NN classes on the first 20 000 rows, x1 and x2.
    "w6-knn": """
[data]
table = "{data}/w6_knn.csv"
target = "y"
task = "classification"
features = ["x1", "x2"]

[split]
holdout = 0
folds = 10

[[candidate]]
family = "nearest-neighbors"
k = [1, 5, 15, 45, 135]
""",
}

# Workloads whose heldout side is several specs run by one `heldout run`.
EXTRA_SPECS = {"w6": ["w6-knn"]}

TABLES = {"w1": "w1_poly", "w2": "w2_knn", "w3": "w3_spline", "w4": "w4_ridge", "w6": "w6_logit"}


def logspace(lo, hi, count):
    return [10 ** (lo + (hi - lo) * i / (count - 1)) for i in range(count)]


def spec_text(name, data_dir):
    body = SPECS[name].format(
        data=data_dir,
        w3_penalties=", ".join(repr(v) for v in logspace(-4, 2, 20)),
        w4_features=", ".join(f'"x{j}"' for j in range(1, 51)),
        w4_penalties=", ".join(repr(v) for v in logspace(-3, 3, 50)),
        w5_truth=W5_TRUTH,
        w6_features=", ".join(f'"x{j}"' for j in range(1, 11)),
    )
    head = f'[experiment]\nname = "bench-{name}"\nseed = 1\n'
    # W6 scores classes by log-loss, as its peer reports it; the others mse.
    metric = "log-loss" if name.startswith("w6") else "mse"
    tail = f'\n[choose]\nmetric = "{metric}"\nrule = "lowest"\n\n[report]\nformats = ["markdown"]\n'
    return head + body + tail


def measure(argv, cwd=None):
    """Wall seconds and peak RSS (MiB) of one child process; fails loudly.

    The peak RSS comes from GNU time (`/usr/bin/time -f %M`), not from this
    process's wait4: a child forked from Python and then exec'd inherits
    Python's own high-water mark (Linux keeps the larger of the two), which
    would hide a small child's peak behind the parent's.
    """
    with tempfile.NamedTemporaryFile("r", suffix=".rss") as rss:
        start = time.perf_counter()
        child = subprocess.run(
            [TIME, "-f", "%M", "-o", rss.name, *map(str, argv)],
            cwd=cwd,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.PIPE,
        )
        seconds = time.perf_counter() - start
        if child.returncode != 0:
            sys.exit(f"failed ({child.returncode}): {' '.join(map(str, argv))}\n{child.stderr.decode()}")
        kib = int(rss.read().split()[-1])
    return seconds, kib / 1024


def has_family(heldout, family):
    schema = subprocess.run([heldout, "schema"], capture_output=True, text=True, check=True)
    return f'"{family}"' in schema.stdout


def run_heldout(heldout, spec, work, jobs):
    """(cold s, cold MiB, warm s, warm MiB) with a fresh cache and output folder.
    `spec` is one spec file or a list of them, run by one process."""
    cache, out = work / "cache", work / "out"
    shutil.rmtree(cache, ignore_errors=True)
    shutil.rmtree(out, ignore_errors=True)
    specs = spec if isinstance(spec, list) else [spec]
    argv = [heldout, "run", *specs, "--cache", cache, "--out", out, "--quiet", "--allow-outside"]
    if jobs:
        argv += ["--jobs", str(jobs)]
    cold = measure(argv)
    warm = measure(argv)
    return cold + warm


def load_generator(peer_dir):
    spec = importlib.util.spec_from_file_location("gen_data", peer_dir / "gen_data.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def scaling(heldout, peer_dir, work, jobs):
    import numpy as np  # the peer's own dependency, needed by its generator

    gen = load_generator(peer_dir)
    print("\nscaling of heldout cold runs (1 run each)")
    print(f"{'workload':>8} {'rows':>9} {'seconds':>9} {'MiB':>7}")
    for name, table, base, seed in [("w1", "w1_poly", 200_000, 101), ("w2", "w2_knn", 20_000, 102)]:
        make = getattr(gen, table)
        points = []
        for factor in (1, 4, 16):
            n = base * factor
            folder = work / f"scaling-{name}-{n}"
            folder.mkdir(exist_ok=True)
            make(np.random.default_rng(seed), n).to_csv(folder / f"{table}.csv", index=False)
            spec = folder / f"{name}.toml"
            spec.write_text(spec_text(name, folder))
            seconds, mib, _, _ = run_heldout(heldout, spec, folder, jobs)
            points.append((n, seconds))
            print(f"{name:>8} {n:>9} {seconds:>9.2f} {mib:>7.0f}", flush=True)
            (folder / f"{table}.csv").unlink()
        xs = [math.log(n) for n, _ in points]
        ys = [math.log(s) for _, s in points]
        mx, my = statistics.fmean(xs), statistics.fmean(ys)
        slope = sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)
        print(f"{name:>8} fitted exponent (time ~ n^b): b = {slope:.2f}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--peer-dir", default=os.environ.get("HELDOUT_PEER_DIR", REPO.parent / "shared" / "perf"))
    parser.add_argument("--heldout", help="heldout binary (default: cargo build --release, target/release/heldout)")
    parser.add_argument("--baseline", help="another heldout binary (say, before a change) run beside it")
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--no-peer", default="", help="workloads whose peer is not run (e.g. w4)")
    parser.add_argument("--workloads", default="w1,w2,w3,w4,w5,w6")
    parser.add_argument("--jobs", type=int, help="heldout --jobs (default: one per core)")
    parser.add_argument("--scaling", action="store_true", help="also time W1 and W2 at n, 4n, 16n")
    parser.add_argument("--scaling-only", action="store_true", help="only the scaling table")
    parser.add_argument("--floor", action="store_true", help="also run the peer folder's lower_bound.py")
    parser.add_argument("--regenerate", action="store_true", help="rewrite the workload tables")
    args = parser.parse_args()
    peer_dir = Path(args.peer_dir).resolve()
    if not (peer_dir / "gen_data.py").exists():
        sys.exit(f"no gen_data.py in the peer folder {peer_dir}: pass --peer-dir or HELDOUT_PEER_DIR")
    if args.heldout:
        heldout = Path(args.heldout).resolve()
    else:
        subprocess.run(["cargo", "build", "--release", "--quiet"], cwd=REPO, check=True)
        target = Path(os.environ.get("CARGO_TARGET_DIR", REPO / "target"))
        heldout = (target / "release" / "heldout").resolve()

    print(f"heldout {heldout}; peers {peer_dir}; {os.cpu_count()} cores")
    print("load average before: %.2f %.2f %.2f" % os.getloadavg())
    work = Path(tempfile.mkdtemp(prefix="heldout-bench-"))
    try:
        if not args.scaling_only:
            compare(args, heldout, peer_dir, work)
        if args.scaling or args.scaling_only:
            scaling(heldout, peer_dir, work, args.jobs)
        if args.floor:
            print("\nfloor proxies (lower_bound.py)")
            subprocess.run([sys.executable, peer_dir / "lower_bound.py"], check=True)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    print("load average after: %.2f %.2f %.2f" % os.getloadavg())


def compare(args, heldout, peer_dir, work):
    names = [w.strip() for w in args.workloads.split(",") if w.strip()]
    if "w6" in names and not has_family(heldout, "logistic"):
        print("w6 skipped: this heldout has no `logistic` family (classification is not built yet)")
        names.remove("w6")
    missing = [TABLES[n] for n in names if n in TABLES and not (DATA / f"{TABLES[n]}.csv").exists()]
    if missing or args.regenerate:
        print(f"generating the workload tables in {DATA} ...", flush=True)
        subprocess.run([sys.executable, peer_dir / "gen_data.py"], check=True, stdout=subprocess.DEVNULL)
    if "w6" in names:
        # The k-NN half of W6 reads the first 20 000 rows, as its peer does.
        with open(DATA / "w6_logit.csv") as full, open(DATA / "w6_knn.csv", "w") as part:
            for _, line in zip(range(20_001), full):
                part.write(line)
    specs = {}
    for name in names:
        folder = work / name
        folder.mkdir()
        specs[name] = []
        for part in [name, *EXTRA_SPECS.get(name, [])]:
            path = folder / f"{part}.toml"
            path.write_text(spec_text(part, DATA))
            specs[name].append(path)
    keys = ["peer", "cold", "warm", "peer_mib", "cold_mib", "warm_mib", "base", "base_mib"]
    times = {n: {k: [] for k in keys} for n in names}
    for round_ in range(args.rounds):
        for name in names:
            t = times[name]
            if name in args.no_peer.split(","):
                pass
            elif round_ == 0 or t["peer"][0] <= PEER_ONCE_ABOVE_S:
                seconds, mib = measure([sys.executable, peer_dir / f"peer_{name}.py"], cwd=peer_dir)
                t["peer"].append(seconds)
                t["peer_mib"].append(mib)
            cold, cold_mib, warm, warm_mib = run_heldout(heldout, specs[name], work / name, args.jobs)
            t["cold"].append(cold)
            t["warm"].append(warm)
            t["cold_mib"].append(cold_mib)
            t["warm_mib"].append(warm_mib)
            peer = f"{t['peer'][-1]:.2f} s" if t["peer"] else "not run"
            line = f"round {round_ + 1} {name}: peer {peer}, heldout cold {cold:.2f} s, warm {warm:.2f} s"
            if args.baseline:
                base, base_mib, _, _ = run_heldout(Path(args.baseline).resolve(), specs[name], work / name, args.jobs)
                t["base"].append(base)
                t["base_mib"].append(base_mib)
                line += f", baseline cold {base:.2f} s"
            print(line, flush=True)
    print(f"\nmedians over {args.rounds} round(s) (peers over {PEER_ONCE_ABOVE_S:.0f} s: one run)")
    print(f"{'workload':>8} {'peer s':>8} {'cold s':>8} {'warm s':>8} {'peer/cold':>10} {'warm/cold':>10}"
          f" {'peer MiB':>9} {'cold MiB':>9} {'warm MiB':>9}" + ("  baseline cold s, MiB" if args.baseline else ""))
    for name in names:
        t = {k: statistics.median(v) if v else math.nan for k, v in times[name].items()}
        line = (f"{name:>8} {t['peer']:>8.2f} {t['cold']:>8.2f} {t['warm']:>8.3f} {t['peer'] / t['cold']:>9.1f}x"
                f" {100 * t['warm'] / t['cold']:>9.1f}% {t['peer_mib']:>9.0f} {t['cold_mib']:>9.0f}"
                f" {t['warm_mib']:>9.0f}")
        if args.baseline:
            line += f"  {t['base']:>8.2f} {t['base_mib']:>6.0f}"
        print(line)


if __name__ == "__main__":
    main()
