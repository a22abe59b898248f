"""A million-row garbage field sheet: time, peak memory and lines printed, this code beside an older one.

Writes a CSV of the demo's 2024 header with ``--rows`` rows of garbage (unknown stations, 'x' in every
value cell: five problems a row), sets up the invented demo programme in a fresh SQLite database for each
code version, and runs ``python -m monitor records import`` on it in a child process per version, one after
the other in the same run.  Peak memory is the child's ``ru_maxrss``; CPU time is given beside the
wall-clock time because a shared machine stretches the latter.  ``--old REV`` names a git revision
to compare against (checked out into a temporary worktree); without it only this code is measured.

    PYTHONPATH=. python tests/benchmarks/bench_garbage.py --rows 1000000 --old edaf773
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
SEASON = ROOT / "demo_programme" / "records" / "season_2024.csv"


def write_garbage(path: Path, rows: int) -> None:
    header = SEASON.read_text(encoding="utf-8").splitlines()[0]
    width = header.count(",") + 1
    with open(path, "w", encoding="utf-8") as handle:
        handle.write(header + "\n")
        tail = ",".join(["x"] * (width - 7))
        for i in range(rows):
            handle.write(f"NO-{i % 997},2024-06-15,OBS01,done,no,P2,,{tail}\n")


def run(code_root: Path, workdir: Path, garbage: Path) -> dict:
    env = {**os.environ, "PYTHONPATH": str(code_root), "OPENBLAS_NUM_THREADS": "1"}
    db = workdir / "bench.sqlite"
    for args in (["init"], ["setup", "all", str(code_root / "demo_programme")]):
        subprocess.run([sys.executable, "-m", "monitor", "--db", str(db), *args], env=env, check=True,
                       capture_output=True, cwd=workdir)
    script = ("import resource, subprocess, sys, time\n"
              "t = time.perf_counter()\n"
              "p = subprocess.run(sys.argv[1:], capture_output=True)\n"
              "wall = time.perf_counter() - t\n"
              "usage = resource.getrusage(resource.RUSAGE_CHILDREN)\n"
              "print(p.returncode, wall, usage.ru_maxrss, p.stderr.count(b'\\n'), len(p.stderr),\n"
              "      usage.ru_utime + usage.ru_stime)\n")
    out = subprocess.run([sys.executable, "-c", script, sys.executable, "-m", "monitor", "--db", str(db),
                          "records", "import", str(garbage)], env=env, check=True, capture_output=True, text=True,
                         cwd=workdir)
    code, wall, peak, lines, size, cpu = out.stdout.split()
    return {"exit": int(code), "seconds": float(wall), "cpu": float(cpu), "peak_mb": int(peak) / 1024,
            "stderr_lines": int(lines), "stderr_bytes": int(size)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--old", default=None, help="git revision to measure beside this code")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        garbage = tmp / "garbage.csv"
        write_garbage(garbage, args.rows)
        print(f"garbage file: {args.rows:,} rows, {garbage.stat().st_size / 1e6:.0f} MB")
        versions = [("this code", ROOT)]
        if args.old:
            old_root = tmp / "old"
            subprocess.run(["git", "-C", str(ROOT), "worktree", "add", "--detach", str(old_root), args.old],
                           check=True, capture_output=True)
            versions.insert(0, (f"revision {args.old}", old_root))
        try:
            results = {}
            for name, root in versions:
                work = tmp / name.replace(" ", "_")
                work.mkdir()
                results[name] = run(root, work, garbage)
                r = results[name]
                print(f"{name:>20}: exit {r['exit']}, {r['seconds']:.1f} s ({r['cpu']:.1f} s CPU), peak {r['peak_mb']:.0f} MB, "
                      f"{r['stderr_lines']:,} lines ({r['stderr_bytes'] / 1e6:.1f} MB) on stderr")
            if len(results) == 2:
                old, new = results.values()
                print(f"ratios old/new: time {old['seconds'] / new['seconds']:.1f}x, CPU {old['cpu'] / new['cpu']:.1f}x, "
                      f"memory {old['peak_mb'] / new['peak_mb']:.1f}x, lines {old['stderr_lines'] / new['stderr_lines']:.0f}x")
        finally:
            if args.old:
                subprocess.run(["git", "-C", str(ROOT), "worktree", "remove", "--force", str(tmp / "old")],
                               capture_output=True)


if __name__ == "__main__":
    main()
