"""A quick mutation round over the engine's kernels: break each on purpose, check a test fails.

Run from the repository root:  .venv/bin/python tests/mutation.py  [name-filter]

Each mutation replaces one exact snippet in one file, runs the focused tests, restores the file
and reports whether the tests caught it.  A survivor is a kernel line no test pins: write the
test that would have caught it.  The files are always restored, even on Ctrl-C.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
TESTS = ["tests/test_engine_paths.py", "tests/test_engine.py", "tests/test_kernels.py", "tests/test_rolling.py",
         "tests/test_lag_time.py", "tests/test_all_transforms.py", "tests/test_carry_forward.py",
         "tests/test_cumulative.py", "tests/test_history.py", "tests/test_bad_inputs.py"]
TESTS += [t for t in ["tests/test_edges.py"] if (ROOT / t).exists()]

#: (name, file, exact snippet, replacement)
MUTATIONS = [
    ("shift ignores subject start", "panelfx/_kernels.py", "idx[s.starts if periods == 1 else s.ends - 1] = -1",
     "pass"),
    ("last_index_upto crosses subjects", "panelfx/_kernels.py", "return np.where(last >= s.first, last, -1)",
     "return last"),
    ("first_index off by one", "panelfx/_kernels.py", "cand = np.where(mask, np.arange(s.n), s.n)",
     "cand = np.where(mask, np.arange(s.n) + 1, s.n)"),
    ("running sums skip a position", "panelfx/_kernels.py",
     "np.add(flat[prev: prev + width], flat[cur: cur + width]", "np.add(flat[prev + 1: prev + width + 1], flat[cur: cur + width]"),
    ("long subjects' sums not sequential", "panelfx/_kernels.py", "np.cumsum(block, axis=1, out=block)",
     "block[:] = np.cumsum(block.ravel()).reshape(block.shape)"),
    ("scan layout: short subjects not longest first", "panelfx/_subjects.py",
     "rank_key = np.where(short, SCAN_SHORT - lengths, 255)", "rank_key = np.where(short, lengths, 255)"),
    ("overflow rescue off", "panelfx/_kernels.py", "    if s.n and not np.isfinite(out).all():\n        _rescue",
     "    if False:\n        _rescue"),
    ("offset key: past the end", "panelfx/_kernels.py",
     "np.minimum(rel.view(np.uint64), sk.width - 1, out=rel.view(np.uint64))",
     "np.minimum(rel.view(np.uint64), sk.width - 2, out=rel.view(np.uint64))"),
    ("packed lookup: keys not after equal queries", "panelfx/_kernels.py", "        both[m:] |= 1\n",
     "        both[:m] |= 1\n"),
    ("packed lookup counts the query itself", "panelfx/_kernels.py", "        return both[is_query]\n",
     "        return both[is_query] + 1\n"),
    ("merge lookup not stable", "panelfx/_kernels.py", 'order = np.argsort(np.concatenate([query, key]), kind="stable")',
     'order = np.argsort(np.concatenate([key, query]), kind="stable")'),
    ("identity check ignores time", "panelfx/_order.py", "    return not back.any()\n", "    return True\n"),
    ("packed sort drops row number", "panelfx/_order.py", "    key |= np.arange(len(codes))\n", "\n"),
    ("composite ids packed without renumbering", "panelfx/_order.py",
     "codes, _ = pd.factorize(codes * (len(uniq) + 1) + k, sort=False)", "codes = codes * (len(uniq) + 1) + k"),
    ("threshold floor and ceil swapped", "panelfx/_time.py",
     "m = s.numerator // s.denominator if not strict else -((-s.numerator) // s.denominator) - 1",
     "m = -((-s.numerator) // s.denominator) if not strict else s.numerator // s.denominator - 1"),
    ("TwoSum error ignored", "panelfx/_time.py", "bump = (e > 0) & (r < len(u))", "bump = (e > 1e300) & (r < len(u))"),
    ("no saturation", "panelfx/_time.py", "            return np.where(t < lim, INT_MIN, t - np.int64(min(m, INT_MAX)))",
     "            return t - np.int64(min(m, INT_MAX))"),
    ("decimal probe trusted", "panelfx/_time.py", "        if (np.rint(x * s) / s == x).all():", "        if True:"),
    ("window rounding bound ignored", "panelfx/_windows.py",
     "redo = np.flatnonzero(((bound > SUM_RTOL * np.abs(out)) | ~np.isfinite(out)) & (b.length > 0))",
     "redo = np.flatnonzero(~np.isfinite(out) & (b.length > 0))"),
    ("direct windows: blocks taken as starting at row 0", "panelfx/_windows.py",
     "k = min(max(s - a, 0), m)", "k = min(s, m)"),
    ("count slice off by one", "panelfx/_windows.py", "np.subtract(c[1 - b.end: mask.size + 1 - b.end], below, out=below)",
     "np.subtract(c[b.end: mask.size + b.end], below, out=below)"),
    ("blockwise risk test ignores the rounding bound", "panelfx/_windows.py",
     "            risk = bound > SUM_RTOL * np.abs(o)\n", "            risk = bound > np.inf\n"),
    ("window bottom not zero at the subject's start", "panelfx/_windows.py",
     "        bottom[b.lo == s.first] = 0.0\n", "\n"),
    ("padded width from the rows present", "panelfx/_windows.py", "width = 1 << int(bucket[group[0]])",
     "width = int(length[group].max())"),
    ("subject split ignores breaks", "panelfx/_subjects.py", "is_start = breaks.copy()",
     "is_start = np.zeros_like(breaks)"),
]


def main(pattern: str = "") -> int:
    survivors = []
    for name, rel, old, new in MUTATIONS:
        if pattern not in name:
            continue
        path = ROOT / rel
        text = path.read_text()
        if text.count(old) != 1:
            print(f"?? {name}: snippet not found once in {rel} (update this list)")
            survivors.append(name)
            continue
        try:
            path.write_text(text.replace(old, new))
            done = subprocess.run([sys.executable, "-m", "pytest", "-x", "-q", "-p", "no:cacheprovider",
                                   "--no-header", *TESTS], cwd=ROOT, capture_output=True, text=True)
        finally:
            path.write_text(text)
        caught = done.returncode != 0
        print(f"{'caught  ' if caught else 'SURVIVED'} {name}")
        if not caught:
            survivors.append(name)
    print(f"{len(survivors)} survivor(s)" + (f": {survivors}" if survivors else ""))
    return 1 if survivors else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1] if len(sys.argv) > 1 else ""))
