"""Type check of physics/ against its recorded baseline: fail when a file gains type errors.

The baseline (.ci/mypy-baseline.txt) lists, per file, the number of errors mypy reported when type
checking was introduced. A change may lower a count (then lower it in the file too) but not raise it.
Run: python .ci/mypy_baseline.py [--write]
"""
import collections
import re
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
BASELINE = HERE / "mypy-baseline.txt"


def counts() -> dict[str, int]:
    proc = subprocess.run([sys.executable, "-m", "mypy", "--no-error-summary"], cwd=HERE.parent,
                          capture_output=True, text=True)
    if proc.returncode not in (0, 1):
        sys.exit(f"mypy failed to run:\n{proc.stdout}{proc.stderr}")
    c: collections.Counter = collections.Counter()
    for line in proc.stdout.splitlines():
        m = re.match(r"^([^:]+\.py):\d+: error:", line)
        if m:
            c[m.group(1)] += 1
    return dict(c)


def main() -> int:
    now = counts()
    if "--write" in sys.argv:
        BASELINE.write_text("".join(f"{f} {n}\n" for f, n in sorted(now.items())))
        print(f"wrote {BASELINE.name}: {sum(now.values())} errors in {len(now)} files")
        return 0
    base = {}
    for line in BASELINE.read_text().splitlines():
        if line.strip():
            f, n = line.rsplit(" ", 1)
            base[f] = int(n)
    worse = {f: (base.get(f, 0), n) for f, n in now.items() if n > base.get(f, 0)}
    better = {f: (n, now.get(f, 0)) for f, n in base.items() if now.get(f, 0) < n}
    for f, (b, n) in sorted(worse.items()):
        print(f"{f}: {n} type errors, baseline {b}")
    for f, (b, n) in sorted(better.items()):
        print(f"{f}: {n} type errors, below the baseline {b}: lower it (python .ci/mypy_baseline.py --write)")
    print(f"mypy: {sum(now.values())} errors (baseline {sum(base.values())})")
    return 1 if worse else 0


if __name__ == "__main__":
    sys.exit(main())
