"""One table for every benchmark: figure, target, measured, met / not met.

Each benchmark script calls `emit(rows)`: the rows are printed and, when the environment variable
BENCH_ROWS names a file, appended to it as JSON lines; `make bench` then prints them all as one
Markdown table with `python analysis/bench_table.py FILE` (the README's performance section).
"""

import json
import os
import sys


def row(figure, target, measured, met):
    """One line of the table; `met` is True, False or None (no target)."""
    return {"figure": figure, "target": target, "measured": measured,
            "met": "—" if met is None else ("met" if met else "**not met**")}


def table(rows):
    lines = ["| figure | target | measured | met? |", "|---|---|---|---|"]
    lines += [f"| {r['figure']} | {r['target']} | {r['measured']} | {r['met']} |" for r in rows]
    return "\n".join(lines)


def emit(rows):
    print(table(rows), flush=True)
    path = os.environ.get("BENCH_ROWS")
    if path:
        with open(path, "a") as handle:
            for item in rows:
                handle.write(json.dumps(item) + "\n")


if __name__ == "__main__":
    with open(sys.argv[1]) as handle:
        print(table([json.loads(line) for line in handle if line.strip()]))
