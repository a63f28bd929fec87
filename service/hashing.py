"""BLAKE2b of many short messages at once, compiled (numba), equal to :mod:`hashlib`'s.

The decision path hashes every customer four times (three uniform draws and the
decision id). One ``hashlib.blake2b`` call per message costs about a microsecond, almost
all of it Python's call overhead, and holds the interpreter lock; for a 100,000-row
batch that was the largest single share of the lock's time. Here one call hashes a
whole column of messages, each ``head + parts[i]``, in compiled code that releases the
lock. The digests are byte for byte those of ``hashlib.blake2b(head + part,
digest_size=d)`` (unkeyed, no salt or personalisation); the tests compare them on
random messages of every length class and on RFC 7693's worked example.

References
----------
Saarinen, M.-J. & Aumasson, J.-P. (2015). RFC 7693: The BLAKE2 Cryptographic Hash and
Message Authentication Code (MAC). Sections 2.7 (G), 3.2 (F), 3.3 (padding and
parameter block) and Appendix A (the "abc" example).
"""

from __future__ import annotations

import sys
from collections.abc import Sequence

import numba
import numpy as np
import numpy.typing as npt

__all__ = ["COMPILED_ROWS", "blake2b_many", "blake2b_texts", "warm_up"]

# Below this many messages a loop of hashlib calls is cheaper than one compiled call
# (about 10 µs to enter numba's dispatcher); callers switch at this size.
COMPILED_ROWS = 32

_IV = np.array(
    [
        0x6A09E667F3BCC908, 0xBB67AE8584CAA73B, 0x3C6EF372FE94F82B, 0xA54FF53A5F1D36F1,
        0x510E527FADE682D1, 0x9B05688C2B3E6C1F, 0x1F83D9ABFB41BD6B, 0x5BE0CD19137E2179,
    ],
    dtype=np.uint64,
)  # fmt: skip
_SIGMA = np.array(
    [
        [0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15],
        [14, 10, 4, 8, 9, 15, 13, 6, 1, 12, 0, 2, 11, 7, 5, 3],
        [11, 8, 12, 0, 5, 2, 15, 13, 10, 14, 3, 6, 7, 1, 9, 4],
        [7, 9, 3, 1, 13, 12, 11, 14, 2, 6, 5, 10, 4, 0, 15, 8],
        [9, 0, 5, 7, 2, 4, 10, 15, 14, 1, 11, 12, 6, 8, 3, 13],
        [2, 12, 6, 10, 0, 11, 8, 3, 4, 13, 7, 5, 15, 14, 1, 9],
        [12, 5, 1, 15, 14, 13, 4, 10, 0, 7, 6, 3, 9, 2, 8, 11],
        [13, 11, 7, 14, 12, 1, 3, 9, 5, 0, 15, 4, 8, 6, 2, 10],
        [6, 15, 14, 9, 11, 3, 0, 8, 12, 2, 13, 7, 1, 4, 10, 5],
        [10, 2, 8, 4, 7, 6, 1, 5, 15, 11, 9, 14, 3, 12, 13, 0],
    ],
    dtype=np.int64,
)
_BLOCK = 128


@numba.njit(cache=True, nogil=True, inline="always")
def _g(
    a: np.uint64, b: np.uint64, c: np.uint64, d: np.uint64, x: np.uint64, y: np.uint64
) -> tuple[np.uint64, np.uint64, np.uint64, np.uint64]:
    """RFC 7693 section 3.1, G, with the rotations 32, 24, 16 and 63."""
    a = a + b + x
    d ^= a
    d = (d >> np.uint64(32)) | (d << np.uint64(32))
    c = c + d
    b ^= c
    b = (b >> np.uint64(24)) | (b << np.uint64(40))
    a = a + b + y
    d ^= a
    d = (d >> np.uint64(16)) | (d << np.uint64(48))
    c = c + d
    b ^= c
    b = (b >> np.uint64(63)) | (b << np.uint64(1))
    return a, b, c, d


@numba.njit(cache=True, nogil=True)
def _compress(
    h: np.ndarray, m: np.ndarray, t: int, last: bool, iv: np.ndarray, sigma: np.ndarray
) -> None:
    """RFC 7693 section 3.2, F: mix one 128-byte block ``m`` into the state ``h``."""
    v0, v1, v2, v3, v4, v5, v6, v7 = h[0], h[1], h[2], h[3], h[4], h[5], h[6], h[7]
    v8, v9, v10, v11 = iv[0], iv[1], iv[2], iv[3]
    v12 = iv[4] ^ np.uint64(t)  # messages here are far below 2**64 bytes: high word 0
    v13, v14, v15 = iv[5], iv[6], iv[7]
    if last:
        v14 = ~v14
    for rnd in range(12):
        s = sigma[rnd % 10]
        v0, v4, v8, v12 = _g(v0, v4, v8, v12, m[s[0]], m[s[1]])
        v1, v5, v9, v13 = _g(v1, v5, v9, v13, m[s[2]], m[s[3]])
        v2, v6, v10, v14 = _g(v2, v6, v10, v14, m[s[4]], m[s[5]])
        v3, v7, v11, v15 = _g(v3, v7, v11, v15, m[s[6]], m[s[7]])
        v0, v5, v10, v15 = _g(v0, v5, v10, v15, m[s[8]], m[s[9]])
        v1, v6, v11, v12 = _g(v1, v6, v11, v12, m[s[10]], m[s[11]])
        v2, v7, v8, v13 = _g(v2, v7, v8, v13, m[s[12]], m[s[13]])
        v3, v4, v9, v14 = _g(v3, v4, v9, v14, m[s[14]], m[s[15]])
    h[0] ^= v0 ^ v8
    h[1] ^= v1 ^ v9
    h[2] ^= v2 ^ v10
    h[3] ^= v3 ^ v11
    h[4] ^= v4 ^ v12
    h[5] ^= v5 ^ v13
    h[6] ^= v6 ^ v14
    h[7] ^= v7 ^ v15


@numba.njit(cache=True, nogil=True)
def _hash_rows(
    head: np.ndarray, buf: np.ndarray, offsets: np.ndarray, digest_size: int, iv: np.ndarray,
    sigma: np.ndarray, out: np.ndarray,
) -> None:  # fmt: skip
    """``out[i] = blake2b(head + buf[offsets[i]:offsets[i + 1]])[:digest_size]``."""
    n_head = head.shape[0]
    h = np.empty(8, dtype=np.uint64)
    block = np.empty(_BLOCK, dtype=np.uint8)
    # The words of a block, little-endian (RFC 7693 section 2.4), read on this machine's
    # byte order; blake2b_many refuses to run on a big-endian one.
    m = block.view(np.uint64)
    for i in range(offsets.shape[0] - 1):
        start = offsets[i]
        length = n_head + offsets[i + 1] - start
        for k in range(8):
            h[k] = iv[k]
        # Parameter block (section 2.5): digest length, no key, fanout 1, depth 1.
        h[0] ^= np.uint64(0x01010000) ^ np.uint64(digest_size)
        n_blocks = max(1, (length + _BLOCK - 1) // _BLOCK)
        for b in range(n_blocks):
            base = b * _BLOCK
            stop = min(base + _BLOCK, length)
            k = 0
            for p in range(base, min(stop, n_head)):
                block[k] = head[p]
                k += 1
            for p in range(max(base, n_head), stop):
                block[k] = buf[start + p - n_head]
                k += 1
            block[k:] = 0  # the last block is padded with zeros
            last = b == n_blocks - 1
            _compress(h, m, length if last else base + _BLOCK, last, iv, sigma)
        for k in range(digest_size):  # little-endian output
            out[i, k] = np.uint8((h[k // 8] >> np.uint64(8 * (k % 8))) & np.uint64(0xFF))


def blake2b_many(head: bytes, parts: Sequence[bytes], digest_size: int) -> npt.NDArray[np.uint8]:
    """``hashlib.blake2b(head + part, digest_size=digest_size).digest()`` of every part,
    as the rows of an ``(n, digest_size)`` byte array."""
    return _run(head, b"".join(parts), _offsets(parts), digest_size)


def blake2b_texts(texts: Sequence[str], digest_size: int) -> npt.NDArray[np.uint8]:
    """:func:`blake2b_many` of each text's UTF-8 bytes (no common head)."""
    joined = "".join(texts)
    if not joined.isascii():
        return blake2b_many(b"", [t.encode("utf-8") for t in texts], digest_size)
    # ASCII: one character is one byte, so the text lengths are the byte lengths.
    return _run(b"", joined.encode("ascii"), _offsets(texts), digest_size)


def _offsets(items: Sequence[bytes] | Sequence[str]) -> npt.NDArray[np.int64]:
    offsets = np.zeros(len(items) + 1, dtype=np.int64)
    np.cumsum(np.fromiter(map(len, items), dtype=np.int64, count=len(items)), out=offsets[1:])
    return offsets


def _run(
    head: bytes, buf: bytes, offsets: npt.NDArray[np.int64], digest_size: int
) -> npt.NDArray[np.uint8]:
    if sys.byteorder != "little":
        raise RuntimeError("blake2b_many reads message words in little-endian byte order")
    if not 1 <= digest_size <= 64:
        raise ValueError(f"digest_size must be in [1, 64], got {digest_size}")
    out = np.empty((len(offsets) - 1, digest_size), dtype=np.uint8)
    _hash_rows(
        np.frombuffer(head, dtype=np.uint8), np.frombuffer(buf, dtype=np.uint8), offsets,
        digest_size, _IV, _SIGMA, out,
    )  # fmt: skip
    return out


def warm_up() -> None:
    """Compile (or load from numba's cache) the kernel now rather than in a request."""
    blake2b_many(b"", [b""], 8)
