"""Property-based fuzzing of the curve parser: every input gives a Curve or an
InputFileError, never another exception (no traceback for a malformed file)."""
from __future__ import annotations

import warnings
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from scan.curves import Curve, CurveWarning, parse_bytes
from scan.errors import InputFileError

DEMO = sorted((Path(__file__).resolve().parents[1] / "constraints" / "demo").glob("*.csv"))
SEEDS = [p.read_bytes() for p in DEMO]
FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _outcome(data: bytes) -> str:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CurveWarning)
        try:
            result = parse_bytes(data, "fuzz.csv")
        except InputFileError as err:
            assert str(err).startswith("fuzz.csv")
            return "error"
    assert isinstance(result, Curve)
    return "curve"


@FUZZ
@given(st.binary(max_size=400))
def test_random_bytes(data):
    _outcome(data)


@st.composite
def mutated(draw):
    """A shipped demo file with a few line- or byte-level edits."""
    lines = draw(st.sampled_from(SEEDS)).split(b"\n")
    for _ in range(draw(st.integers(1, 4))):
        i = draw(st.integers(0, len(lines) - 1))
        action = draw(st.sampled_from(["drop", "dup", "swap", "replace", "bytes", "cell"]))
        if action == "drop" and len(lines) > 1:
            del lines[i]
        elif action == "dup":
            lines.insert(i, lines[i])
        elif action == "swap":
            j = draw(st.integers(0, len(lines) - 1))
            lines[i], lines[j] = lines[j], lines[i]
        elif action == "replace":
            lines[i] = draw(st.binary(max_size=40))
        elif action == "bytes" and lines[i]:
            k = draw(st.integers(0, len(lines[i]) - 1))
            lines[i] = lines[i][:k] + draw(st.binary(min_size=1, max_size=3)) + lines[i][k + 1:]
        elif action == "cell":
            token = draw(st.sampled_from([b"nan", b"inf", b"-1", b"0", b"1e400", b"95",
                                          b"log10", b"", b"=", b",", b"#:", b"1e-400"]))
            parts = lines[i].split(b",")
            parts[draw(st.integers(0, len(parts) - 1))] = token
            lines[i] = b",".join(parts)
    return b"\n".join(lines)


@FUZZ
@given(mutated())
def test_mutated_valid_files(data):
    _outcome(data)


@st.composite
def meta_edits(draw):
    """A demo file with one metadata value replaced by a random short text."""
    text = draw(st.sampled_from(SEEDS)).decode()
    lines = text.split("\n")
    meta = [i for i, line in enumerate(lines) if line.startswith("#:")]
    i = draw(st.sampled_from(meta))
    key = lines[i].split("=", 1)[0]
    value = draw(st.text(max_size=12))
    lines[i] = f"{key}= {value}"
    return "\n".join(lines).encode("utf-8", errors="surrogatepass")


@FUZZ
@given(meta_edits())
def test_random_metadata_values(data):
    _outcome(data)
