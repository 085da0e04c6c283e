"""Corrupted Gerber input never escapes the reader as anything but one
FabError (project rule: bad input gives one clear error naming the file,
never a traceback).

Small valid Gerber files written for this test are damaged in ways files
get damaged (bytes changed, inserted or removed; truncation; lines deleted,
duplicated or swapped; stray Gerber commands spliced in; absurd numbers) by
a seeded random generator, so every run tries the same inputs. Each input
must either read or raise FabError whose message names the file and is not
the reader's internal-error fallback (which would mean an unexpected
exception was caught). A SIGALRM guard turns a hang into a failure; it is a
hang guard, far above the time any input needs, not a speed test.
``scripts/fuzz_gerber.py`` runs the same generator for longer.
"""

from __future__ import annotations

import contextlib
import io
import random
import signal

import pytest

from checker.errors import FabError
from checker.readers.fab.gerber import read_gerber

#: Valid little files covering the reader's constructs.
SEEDS: list[bytes] = [s.encode() for s in (
    # traces, nets, modal coordinates, flash, clear flash
    """%TF.FileFunction,Copper,L1,Top*%
%FSLAX46Y46*%
%MOMM*%
%TA.AperFunction,Conductor*%
%ADD10C,0.2*%
%TA.AperFunction,ViaPad*%
%ADD11C,0.6X0.3*%
%ADD12R,1X0.5*%
%ADD13O,1.2X0.4*%
%ADD14P,1X5X10*%
%TD*%
G01*
D10*
%TO.N,GND*%
X0Y0D02*
X1000000Y0D01*
Y1000000D01*
X2000000Y1000000*
%TO.N,VCC*%
D11*
X5000000Y5000000D03*
D12*
%LPC*%
X1000000Y500000D03*
%LPD*%
D13*
X3000000Y3000000D03*
D14*
X4000000Y0D03*
M02*
""",
    # arcs: G75 full circle, G74 quarters, arcs in a region with a cut-in
    """%FSLAX46Y46*%
%MOMM*%
%ADD10C,0.1*%
D10*
X0Y6000000D02*
G75*
G02*
X0Y6000000I5000000J0D01*
G74*
G03*
X11000000Y6000000D02*
X7000000Y10000000I4000000J0D01*
X3000000Y6000000I0J4000000D01*
G75*
G36*
G01*
X2000000Y10000000D02*
X12000000D01*
Y2000000D01*
X2000000D01*
Y6000000D01*
X5000000D01*
G03*
X5000000Y6000000I3000000J0D01*
G01*
X2000000D01*
Y10000000D01*
G37*
M02*
""",
    # macros with expressions, exposure off, all primitive codes
    """%FSLAX46Y46*%
%MOMM*%
%AMDONUT*
1,1,$1,$2,$3*
$4=$1x0.75*
1,0,$4,$2,$3*%
%AMBOX*
0 a box with rounded corners*
21,1,$1,$2-$3-$3,0,0,$4*
21,1,$1-$3-$3,$2,0,0,$4*
$5=$1/2*
$6=$2/2*
$7=2x$3*
1,1,$7,$5-$3,$6-$3,$4*
1,1,$7,-$5+$3,$6-$3,$4*%
%AMSHAPES*
20,1,0.2,0,0,1,1,15*
22,1,0.5,0.3,-1,-1,0*
4,1,3,0,0,1,0,0,1,0,0,30*
5,1,6,0,0,1,0*
6,0,0,1,0.1,0.1,3,0.05,1.2,0*
7,0,0,0.8,0.5,0.1,45*%
%ADD20DONUT,1X0X0*%
%ADD21BOX,2X1X0.2X30*%
%ADD22SHAPES*%
D20*
X0Y0D03*
D21*
%LR45*%
%LMXY*%
%LS0.5*%
X3000000Y0D03*
D22*
X6000000Y0D03*
M02*
""",
    # step and repeat and nested blocks, toggled polarity
    """%FSLAX46Y46*%
%MOMM*%
%ADD10C,0.5*%
%ADD11R,2X2*%
%ABD100*%
D10*
X0Y0D02*
X1000000Y0D01*
%LPC*%
D11*
X0Y0D03*
%LPD*%
%AB*%
%ABD101*%
D100*
X0Y0D03*
X5000000Y0D03*
%AB*%
%SRX2Y3I10.0J5.0*%
D101*
X0Y0D03*
%LPC*%
X1000000Y1000000D03*
%LPD*%
%SR*%
M02*
""",
    # inch, trailing zeros, deprecated codes, old attribute comments, split lines
    """G04 #@! TF.FileFunction,Copper,L2,Inr,Plane*
%FSTAX24Y24*%
%MOIN*%
%IPPOS*%
%ADD10C,0.01*%
G54D10*
G90*
X0Y0D02*
G01X1Y1D01*
X2\nY0D01*
%TO.N,A\\u002CB*%
G55D03*
G70*
M02*
""",
    # a negative plane with anti-pads and a region pour
    """%TF.FileFunction,Copper,L3,Inr,Plane*%
%TF.FilePolarity,Negative*%
%FSLAX46Y46*%
%MOMM*%
%TA.AperFunction,AntiPad*%
%ADD10C,1.2*%
%TA.AperFunction,Conductor*%
%TO.N,GND*%
G36*
X0Y0D02*
G01*
X20000000Y0D01*
Y20000000D01*
X0D01*
Y0D01*
X5000000Y5000000D02*
X6000000Y5000000D01*
X6000000Y6000000D01*
X5000000Y5000000D01*
G37*
%TD*%
%LPC*%
D10*
X10000000Y10000000D03*
X12000000Y10000000D03*
%LPD*%
M02*
""",
)]

#: Fragments spliced into files: valid commands in the wrong place, and nonsense.
FRAGMENTS = [
    b"%LPC*%", b"%LPD*%", b"G36*", b"G37*", b"D03*", b"D02*", b"D01*", b"M02*", b"%AB*%", b"%ABD99*%", b"%SR*%",
    b"%SRX100000Y100000I1J1*%", b"%SRX3Y2I1J1*%", b"G75*", b"G74*", b"G02*", b"G03*", b"G01*", b"G91*",
    b"X99999999999999999999Y0D01*", b"X-0Y+0I0J0D01*", b"%ADD10C,0*%", b"%ADD77R,0X1*%", b"%ADD78P,1X99*%",
    b"%AM*%", b"%AMX*1,1,(((((1*%", b"%ADD79X,1*%", b"%TO.N*%", b"%TD*%", b"%TF*%", b"%LS0*%", b"%LR1e400*%",
    b"%LMQ*%", b"%FSLAX99Y99*%", b"%MOFT*%", b"%", b"*", b"\x00", b"\xff\xfe", b"\r", b"D10*", b"D9999*",
    b"%IPNEG*%", b"%OFA1B0*%", b"G04 #@! TO.N,\xe9*", b"%TA.AperFunction,NonConductor*%", b"X1Y1*",
    b"%AMM*4,1,99999,0,0*%", b"%AMN*7,0,0,1,2,3,0*%", b"%AMO*$1=$1/0*1,1,$1,0,0*%", b"%ADD80O,1X1X2*%",
    b"%SRX0Y1I0J0*%", b"G36*X0Y0D02*X1Y0D01*G37*", b"I1J1D01*", b"%LR90*%", b"%LMXY*%",
    b"%ADD81C,99999999999999999999*%", b"%ADD82R,99999X1*%", b"%LS1000000*%", b"%LS0.000001*%",
    b"%AMH*1,1,$1x$1x$1,0,0*%%ADD83H,99999*%D83*X0Y0D03*",
]


def mutate(data: bytes, rng: random.Random) -> bytes:
    """One damaged copy of ``data`` (one to three damages)."""
    for _ in range(rng.randint(1, 3)):
        kind = rng.randrange(9)
        n = len(data)
        if n == 0:
            return rng.choice(FRAGMENTS)
        at = rng.randrange(n)
        if kind == 0:  # change a byte
            data = data[:at] + bytes([rng.randrange(256)]) + data[at + 1:]
        elif kind == 1:  # change a byte to a Gerber-meaningful one
            data = data[:at] + bytes([rng.choice(b"0123456789XYIJDGM%*,.-+$x/()\n")]) + data[at + 1:]
        elif kind == 2:  # remove bytes
            data = data[:at] + data[at + rng.randint(1, 8):]
        elif kind == 3:  # insert random bytes
            data = data[:at] + bytes(rng.randrange(256) for _ in range(rng.randint(1, 6))) + data[at:]
        elif kind == 4:  # truncate
            data = data[:at]
        elif kind in (5, 6, 7):  # line edits
            lines = data.split(b"\n")
            i = rng.randrange(len(lines))
            if kind == 5:
                del lines[i]
            elif kind == 6:
                lines.insert(i, lines[rng.randrange(len(lines))])
            else:
                j = rng.randrange(len(lines))
                lines[i], lines[j] = lines[j], lines[i]
            data = b"\n".join(lines)
        else:  # splice a fragment in at a line start
            lines = data.split(b"\n")
            lines.insert(rng.randrange(len(lines) + 1), rng.choice(FRAGMENTS))
            data = b"\n".join(lines)
    return data


def corpus(count: int, seed: int):
    """``count`` damaged inputs, the same ones for the same seed."""
    rng = random.Random(seed)
    for k in range(count):
        yield k, mutate(SEEDS[k % len(SEEDS)], rng)


class Hang(Exception):
    pass


@contextlib.contextmanager
def hang_guard(seconds: int):
    """Raise Hang if the block runs for ``seconds`` (POSIX only; elsewhere no guard)."""
    if not hasattr(signal, "SIGALRM"):
        yield
        return

    def alarm(signum, frame):
        raise Hang()

    previous = signal.signal(signal.SIGALRM, alarm)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)


def check_one(data: bytes, name: str = "fuzz.gbr") -> str:
    """Read one input; return 'read' or 'error'. Raise AssertionError for
    anything that breaks the rule."""
    try:
        read_gerber(io.BytesIO(data), name)
    except FabError as err:
        text = str(err)
        assert text.startswith(f"{name}: "), text
        assert "internal error" not in text, text
        assert "\n" not in text, text
        return "error"
    return "read"


@pytest.mark.parametrize("seed", range(len(SEEDS)))
def test_seed_files_are_valid(seed):
    assert check_one(SEEDS[seed]) == "read"


def test_damaged_files_raise_only_fab_error():
    outcomes = {"read": 0, "error": 0}
    for k, data in corpus(2400, seed=20240517):
        try:
            with hang_guard(20):
                outcomes[check_one(data)] += 1
        except Hang:
            raise AssertionError(f"input {k} ({data[:200]!r}...) did not finish in 20 s: a hang") from None
        except BaseException as exc:  # noqa: BLE001 - report which input broke the rule
            raise AssertionError(f"input {k} ({data[:200]!r}...) raised {type(exc).__name__}: {exc}") from exc
    # both outcomes occur: the damage is neither always harmless nor always fatal
    assert outcomes["read"] > 100 and outcomes["error"] > 100, outcomes
