#!/usr/bin/env python3
"""Peak memory of `heldout run` per table row, cold and warm cache.

Writes an invented table (a sensor reading `x`, two unused numeric columns,
an id and a noisy linear target) of N rows into a scratch folder, a spec
with three polynomial degrees and 5-fold cross-validation on it, and runs
the release binary under `/usr/bin/time -v` twice (cold, then warm cache).
Prints the peak resident set size and bytes per row of each run.

Usage: python3 bench/memory_per_row.py [ROWS] [--binary target/release/heldout]
Needs only the Python standard library and GNU time (`apt-get install time`).
"""

import argparse
import pathlib
import random
import re
import subprocess
import tempfile

SPEC = """[experiment]
name = "memory"
seed = 1

[data]
table = "table.csv"
target = "y"
features = ["x"]

[split]
holdout = 0.2
folds = 5

[[candidate]]
family = "polynomial"
degree = [1, 2, 3]
"""


def write_table(path: pathlib.Path, rows: int) -> None:
    rng = random.Random(20261203)
    with path.open("w") as out:
        out.write("id,x,w,z,y\n")
        for i in range(rows):
            x = rng.uniform(-10, 10)
            out.write(
                f"{i},{x:.5f},{rng.random():.5f},{rng.random():.5f},"
                f"{2 * x + rng.gauss(0, 1):.5f}\n"
            )


def peak_kib(binary: str, folder: pathlib.Path) -> tuple[int, str]:
    done = subprocess.run(
        ["/usr/bin/time", "-v", binary, "run", "spec.toml", "--quiet",
         "--cache", "cache", "--out", "out"],
        cwd=folder, capture_output=True, text=True, check=False)
    if done.returncode != 0:
        raise SystemExit(f"heldout failed:\n{done.stderr}")
    kib = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", done.stderr)[1])
    wall = re.search(r"Elapsed \(wall clock\) time.*: (\S+)", done.stderr)[1]
    return kib, wall


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("rows", nargs="?", type=int, default=5_000_000)
    parser.add_argument("--binary", default=str(pathlib.Path("target/release/heldout").resolve()))
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as scratch:
        folder = pathlib.Path(scratch)
        (folder / ".git").mkdir()
        write_table(folder / "table.csv", args.rows)
        (folder / "spec.toml").write_text(SPEC)
        size = (folder / "table.csv").stat().st_size
        print(f"{args.rows} rows, table {size / 2**20:.0f} MiB ({size / args.rows:.0f} bytes/row)")
        for label in ("cold", "warm"):
            kib, wall = peak_kib(args.binary, folder)
            print(f"{label}: peak RSS {kib / 1024:.0f} MiB = {kib * 1024 / args.rows:.0f} "
                  f"bytes/row, wall {wall}")


if __name__ == "__main__":
    main()
