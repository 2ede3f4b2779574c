"""A hypothesis strategy that damages a valid file the way crashes and bad exports do."""

from __future__ import annotations

from hypothesis import strategies as st

# insertions that tend to reach parser corner cases, besides random bytes
_TOKENS = [b"nan", b"inf", b"-1", b",", b"\n", b"\r", b'"', b"1e309", b"\x00"]


@st.composite
def mutated(draw, base: bytes):
    """``base`` with a few random edits: byte overwrites, a cut, an insertion, a truncation."""
    data = bytearray(base)
    for _ in range(draw(st.integers(1, 6))):
        if not data:
            break
        kind = draw(st.sampled_from(["set", "cut", "insert", "truncate"]))
        i = draw(st.integers(0, len(data) - 1))
        if kind == "set":
            data[i] = draw(st.integers(0, 255))
        elif kind == "cut":
            del data[i:i + draw(st.integers(1, 64))]
        elif kind == "insert":
            data[i:i] = draw(st.binary(min_size=1, max_size=16) | st.sampled_from(_TOKENS))
        else:
            del data[i:]
    return bytes(data)
