"""Longer fuzz run of the Gerber reader: the damaged-file generator of
tests/test_gerber_fuzz.py over many more inputs and seeds.

Every input must either read or raise one FabError that names the file and
is not the reader's internal-error fallback. Prints how many inputs were
tried, how many read and how many were refused, the most common refusal
messages, and every failure (the input is saved under --save-dir).

    python scripts/fuzz_gerber.py                 # 50 000 inputs, seed 1
    python scripts/fuzz_gerber.py -n 500000 --seed 7
"""

from __future__ import annotations

import argparse
import collections
import importlib.util
import pathlib
import re
import sys
import time

ROOT = pathlib.Path(__file__).resolve().parents[1]


def _fuzz_module():
    spec = importlib.util.spec_from_file_location("gerber_fuzz_corpus", ROOT / "tests" / "test_gerber_fuzz.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("-n", "--count", type=int, default=50_000, help="inputs to try (default 50000)")
    parser.add_argument("--seed", type=int, default=1, help="generator seed (default 1)")
    parser.add_argument("--hang", type=int, default=30, help="seconds after which one input counts as a hang")
    parser.add_argument("--save-dir", type=pathlib.Path, default=pathlib.Path("fuzz-failures"),
                        help="where failing inputs are written")
    args = parser.parse_args(argv)
    fuzz = _fuzz_module()
    outcomes: collections.Counter[str] = collections.Counter()
    messages: collections.Counter[str] = collections.Counter()
    failures = []
    slowest = (0.0, -1)
    start = time.perf_counter()
    for k, data in fuzz.corpus(args.count, args.seed):
        t0 = time.perf_counter()
        try:
            with fuzz.hang_guard(args.hang):
                outcome = fuzz.check_one(data)
        except fuzz.Hang:
            failures.append((k, data, f"no result after {args.hang} s (hang)"))
            continue
        except BaseException as exc:  # noqa: BLE001 - every other outcome is a failure to report
            failures.append((k, data, f"{type(exc).__name__}: {exc}"))
            continue
        elapsed = time.perf_counter() - t0
        slowest = max(slowest, (elapsed, k))
        outcomes[outcome] += 1
        if outcome == "error":
            try:
                fuzz.read_gerber(__import__("io").BytesIO(data), "fuzz.gbr")
            except fuzz.FabError as err:
                messages[re.sub(r"'[^']*'|[-+]?\d+(?:\.\d+)?(?:e[-+]?\d+)?", "#", err.message)[:70]] += 1
    total = time.perf_counter() - start
    print(f"inputs tried: {args.count} (seed {args.seed}) in {total:.1f} s")
    print(f"read: {outcomes['read']}, refused with FabError: {outcomes['error']}, failures: {len(failures)}")
    print(f"slowest input: #{slowest[1]} in {slowest[0] * 1000:.1f} ms")
    print("most common refusals:")
    for text, n in messages.most_common(12):
        print(f"  {n:6d}  {text}")
    if failures:
        args.save_dir.mkdir(parents=True, exist_ok=True)
        for k, data, why in failures:
            path = args.save_dir / f"input-{args.seed}-{k}.gbr"
            path.write_bytes(data)
            print(f"FAILURE input {k}: {why} (saved to {path})")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
