"""Mutation score per module from mutmut's records (mutants/**/*.py.meta), for `make mutation`.

score = (killed + timeout) / (killed + survived + no tests + timeout + suspicious); a mutant no
test reaches counts as a survivor, one that runs past mutmut's time limit as killed (a mutant
that makes a loop endless).  Prints one line per module group; the column "equiv." counts the
survivors listed as equivalent in tools/mutation_equivalent.txt (they still count against the
score).  With --survivors, the names of the surviving mutants, each marked "equivalent" or
"survived" (show one with `.venv/bin/mutmut show NAME`).
"""

from __future__ import annotations

import json
import sys
from collections import Counter
from pathlib import Path

GROUPS = {
    "judge": ("masterqc/judge/",),
    "judge (without sampling.py)": ("masterqc/judge/",),
    "judge/core.py": ("masterqc/judge/core.py",),
    "spec": ("masterqc/spec/",),
    "spec (without loader.py)": ("masterqc/spec/",),
    "timecode.py": ("masterqc/timecode.py",),
    "audio/isrc.py": ("masterqc/audio/isrc.py",),
    "measure/levels.py": ("masterqc/measure/levels.py",),
}
EXCLUDE = {"judge (without sampling.py)": "masterqc/judge/sampling.py",
           "spec (without loader.py)": "masterqc/spec/loader.py"}
STATUS = {1: "killed", 3: "killed", 0: "survived", 5: "no tests", 33: "no tests", 34: "skipped",
          36: "timeout", -24: "timeout", 24: "timeout", 152: "timeout", 255: "timeout", None: "not run"}


def equivalent_names(root: Path) -> set[str]:
    """Names listed in tools/mutation_equivalent.txt (first word of each line that is not a comment)."""
    path = root / "tools" / "mutation_equivalent.txt"
    if not path.exists():
        return set()
    return {line.split()[0] for line in path.read_text(encoding="utf-8").splitlines()
            if line.strip() and not line.lstrip().startswith("#")}


def records(root: Path):
    for meta in sorted((root / "mutants").rglob("*.py.meta")):
        rel = meta.relative_to(root / "mutants").as_posix()[: -len(".meta")]
        data = json.loads(meta.read_text())
        for name, code in data.get("exit_code_by_key", {}).items():
            yield rel, name, STATUS.get(code, "suspicious")


def main(argv: list[str]) -> int:
    root = Path.cwd()
    rows = list(records(root))
    equivalent = equivalent_names(root)
    if not rows:
        print("no mutmut records under mutants/: run `make mutation` first", file=sys.stderr)
        return 2
    if "--pending" not in argv:
        print(f"{'module':32s} {'mutants':>8s} {'killed':>7s} {'survived':>9s} {'equiv.':>7s} {'no test':>8s} "
              f"{'not run':>8s} {'score':>7s}")
    for group, prefixes in ([] if "--pending" in argv else GROUPS.items()):
        mine = [(n, st) for rel, n, st in rows if rel.startswith(prefixes) and rel != EXCLUDE.get(group)]
        c = Counter(st for _n, st in mine)
        n_equivalent = sum(1 for n, st in mine if st == "survived" and n in equivalent)
        judged = c["killed"] + c["survived"] + c["no tests"] + c["timeout"] + c["suspicious"]
        score = f"{100.0 * (c['killed'] + c['timeout']) / judged:6.1f}%" if judged else "    -"
        print(f"{group:32s} {sum(c.values()):8d} {c['killed']:7d} {c['survived']:9d} {n_equivalent:7d} {c['no tests']:8d} "
              f"{c['not run']:8d} {score}")
    if "--pending" in argv:
        # names of the mutants of one module prefix not (yet) killed, to re-run only those:
        # .venv/bin/mutmut run $(python tools/mutation_scores.py --pending masterqc.judge.core)
        prefix = argv[argv.index("--pending") + 1]
        print(" ".join(name for _rel, name, st in rows
                       if name.startswith(prefix + ".") and st != "killed"))
        return 0
    if "--survivors" in argv:
        for rel, name, st in rows:
            if st in ("survived", "no tests", "suspicious"):
                print(f"{'equivalent' if name in equivalent and st == 'survived' else st:10s} {name}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
