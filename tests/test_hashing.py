"""The compiled BLAKE2b equals hashlib's and the RFC's worked example, byte for byte."""

from __future__ import annotations

import hashlib
import random

import numpy as np
import pytest

from service.hashing import COMPILED_ROWS, blake2b_many, blake2b_texts

# RFC 7693, Appendix A: BLAKE2b-512("abc").
RFC_ABC = (
    "ba80a53f981c4d0d6a2797b69f12f6e94c212f14685ac4b74b12bb6fdbffa2d1"
    "7d87c5392aab792dc252d5de4533cc9518d38aa8dbf1925ab92386edd4009923"
)


def test_rfc_7693_appendix_a() -> None:
    assert blake2b_many(b"", [b"abc"], 64).tobytes().hex() == RFC_ABC
    assert blake2b_many(b"ab", [b"c"], 64).tobytes().hex() == RFC_ABC


@pytest.mark.parametrize("digest_size", [1, 8, 16, 33, 64])
def test_equals_hashlib_across_block_boundaries(digest_size: int) -> None:
    # Reference: Python's hashlib.blake2b. Lengths straddle the 128-byte block edges,
    # with the head alone, the part alone, and both crossing an edge.
    rng = random.Random(7)
    lengths = [0, 1, 7, 8, 127, 128, 129, 255, 256, 257, 300]
    for head in (b"", b"h" * 5, rng.randbytes(130)):
        parts = [rng.randbytes(rng.choice(lengths)) for _ in range(150)]
        got = blake2b_many(head, parts, digest_size)
        assert got.shape == (150, digest_size)
        want = [hashlib.blake2b(head + p, digest_size=digest_size).digest() for p in parts]
        assert [bytes(row) for row in got] == want


def test_texts_in_ascii_and_not() -> None:
    for texts in (
        [f'["camp",{i},"x"]' * (i % 9) for i in range(100)],
        [f"thé-{i}-\U0001f375" * (i % 5) for i in range(100)],
    ):
        want = [hashlib.blake2b(t.encode(), digest_size=16).digest() for t in texts]
        assert [bytes(r) for r in blake2b_texts(texts, 16)] == want
    assert blake2b_texts([], 16).shape == (0, 16)


def test_bad_digest_size_is_refused() -> None:
    with pytest.raises(ValueError, match="digest_size"):
        blake2b_many(b"", [b"x"], 65)


def test_callers_switch_at_compiled_rows_without_changing_a_draw_or_id() -> None:
    from service.policy import uniform_draw, uniform_draws

    ids = [f"LTC-{i:06d}" for i in range(COMPILED_ROWS - 1)] + ["théière", "7"]
    batch = uniform_draws("salt", "winter", ids)  # the compiled path
    for i, ident in enumerate(ids):  # one hashlib call each
        assert uniform_draw("salt", "winter", ident) == (
            batch.explore[i],
            batch.arm[i],
            batch.holdout[i],
        )
    np.testing.assert_array_equal(uniform_draws("salt", "winter", ids[:3]).arm, batch.arm[:3])
