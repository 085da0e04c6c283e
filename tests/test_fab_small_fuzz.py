"""Corrupted input to the small fabrication readers (Excellon, IPC-D-356,
Gerber job file, stackup YAML) never escapes as anything but FabError.

The project rule under test: a reader answers any input bytes with a
result or exactly one FabError naming the file. Each reader gets 1500
mutations (truncations, deleted and inserted bytes, flipped bytes,
swapped or repeated lines, digit runs made huge) of the valid invented
samples of its own test module, from a fixed seed so a failure repeats.
"""

from __future__ import annotations

import io
import json
import random
import traceback
from typing import Callable

import pytest
from test_excellon import METRIC_DECIMAL, ROUTED
from test_ipc356 import SAMPLE_MM
from test_jobfile import JOB
from test_stackup_yaml import SAMPLE as STACKUP_YAML

from checker.errors import FabError
from checker.readers.fab.excellon import read_excellon
from checker.readers.fab.ipc356 import read_ipc356
from checker.readers.fab.jobfile import read_job
from checker.readers.fab.stackup_yaml import read_stackup_yaml

PER_READER = 1500

INCH_SLOTS = """\
M48
; #@! TF.FileFunction,NonPlated,1,2,NPTH
INCH,LZ,00.0000
; #@! TA.AperFunction,NonPlated,NPTH,MechanicalDrill
T1C0.0400
%
T1
X015Y025
X0.Y0.G85X5.Y0.
R2X01Y01
G00X1.Y1.
M15
G01X2.Y2.
M16
G05
M30
"""

TOKENS = [
    b"\xff", b"\xc3", b"\x00", b"\n", b"\r", b"\t", b" ", b"%", b"M30", b"M48", b"M95", b"M15", b"G85", b"G01",
    b"G00", b"G02", b"R99999", b"T0", b"T99", b"C", b"X", b"Y", b"-", b"+", b".", b",", b";", b"; #@! ",
    b"99999999999999999999", b"1e999", b"NaN", b"Infinity", b"{", b"}", b"[", b"]", b'"', b":", b"&a ", b"*a",
    b"!!binary ", b"NNAME1", b"A99", b"D", b"999", b"317", b"P  UNITS CUST 1", b"N/C", b"null", b"true",
    b"- ", b"  ", b"\xef\xbb\xbf", "\u2028".encode(), b"9" * 5000,
]


def mutate(data: bytes, rng: random.Random) -> bytes:
    kind = rng.randrange(8)
    n = len(data)
    if kind == 0:  # truncate
        return data[: rng.randrange(n + 1)]
    if kind == 1:  # delete a stretch
        a = rng.randrange(n)
        return data[:a] + data[a + rng.randrange(1, 40):]
    if kind == 2:  # insert a token
        a = rng.randrange(n + 1)
        return data[:a] + rng.choice(TOKENS) + data[a:]
    if kind == 3:  # flip bytes
        out = bytearray(data)
        for _ in range(rng.randrange(1, 6)):
            out[rng.randrange(n)] = rng.randrange(256)
        return bytes(out)
    lines = data.split(b"\n")
    if kind == 4:  # swap two lines
        i, j = rng.randrange(len(lines)), rng.randrange(len(lines))
        lines[i], lines[j] = lines[j], lines[i]
    elif kind == 5:  # repeat a line
        i = rng.randrange(len(lines))
        lines.insert(rng.randrange(len(lines) + 1), lines[i])
    elif kind == 6:  # drop a line
        lines.pop(rng.randrange(len(lines)))
    else:  # a digit made into a huge or odd number
        i = rng.randrange(len(lines))
        digits = [k for k, c in enumerate(lines[i]) if 48 <= c <= 57]
        if digits:
            k = rng.choice(digits)
            lines[i] = lines[i][:k] + rng.choice([b"9" * 30, b"0", b"-0", b"1e400", b".", b"00000000"]) + lines[i][k:]
    return b"\n".join(lines)


READERS: dict[str, tuple[Callable, list[bytes]]] = {
    "excellon": (read_excellon, [METRIC_DECIMAL.encode(), ROUTED.encode(), INCH_SLOTS.encode()]),
    "ipc356": (read_ipc356, [SAMPLE_MM.encode()]),
    "jobfile": (read_job, [json.dumps(JOB, indent=1).encode(), json.dumps(JOB).encode()]),
    "stackup_yaml": (read_stackup_yaml, [STACKUP_YAML.encode()]),
}


@pytest.mark.parametrize("reader", sorted(READERS))
def test_corrupted_input_raises_only_fab_error(reader: str) -> None:
    read, samples = READERS[reader]
    rng = random.Random(f"couplint-fab-fuzz-{reader}")
    for sample in samples:  # the unmutated samples are valid
        read(io.BytesIO(sample), "sample")
    errors = results = 0
    for k in range(PER_READER):
        data = rng.choice(samples)
        for _ in range(rng.randrange(1, 4)):
            data = mutate(data, rng) if data else data
        try:
            read(io.BytesIO(data), "fuzz")
            results += 1
        except FabError as exc:
            assert str(exc).startswith("fuzz"), f"case {k}: message does not name the file: {exc}"
            errors += 1
        except Exception:  # noqa: BLE001 - the point of the test
            pytest.fail(f"{reader} case {k}: input {data[:400]!r}\n{traceback.format_exc()}")
    assert errors + results == PER_READER
    assert errors > PER_READER // 10  # the mutations do break files
