r"""A digest of a whole result file, kept in a short trailer after the HDF5 data.

Why: HDF5's own Fletcher-32 checksums cover the chunks of the arrays only — not the file's
metadata (attributes, dimension scales, object headers), which HDF5 parses with little
checking: a flipped byte there can change an attribute silently or make the library loop.
So toposweep appends, once the file is complete, ::

    \n%toposweep-digest sha256=<64 hex digits> length=<bytes before the trailer>\n

(a fixed 112-byte line) and :func:`verify` checks it before HDF5 sees the file. HDF5 (and so
netCDF-C, h5py, xarray) ignores bytes after the end of the file it recorded in its superblock,
so plain tools still read the file (xarray and netCDF-C alike; HDF5's signature stays at the
start, where xarray looks for it). A trailer with a few damaged bytes is still recognised, and
refused.

What it does not cover: a file without a trailer is not verified — a Dataset saved with
xarray's ``to_netcdf``, a copy made by another tool, or a toposweep file that an HDF5 tool
opened for writing (HDF5 then writes its own data where the trailer was). Such files are read
as HDF5 gives them, with the Fletcher-32 checksums of their arrays. A file cut short loses its
trailer too, but HDF5 finds the end of the file it recorded missing and refuses it.

Check a file by hand: ``python -m toposweep.file_digest map.nc``.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

__all__ = ["TRAILER_BYTES", "DigestError", "append_digest", "verify"]

PREFIX = b"\n%toposweep-digest sha256="
#: bytes of the trailer: prefix, 64 hex digits, " length=", 20 digits, newline
TRAILER_BYTES = len(PREFIX) + 64 + len(b" length=") + 20 + 1
#: read size while hashing
BLOCK = 1 << 20


class DigestError(Exception):
    """The file's digest is missing or does not match; the message says which."""


def _sha256(fh: object, length: int) -> str:
    h = hashlib.sha256()
    left = length
    while left > 0:
        block = fh.read(min(BLOCK, left))  # type: ignore[attr-defined]
        if not block:
            break
        h.update(block)
        left -= len(block)
    return h.hexdigest()


def _trailer(digest: str, length: int) -> bytes:
    text = PREFIX + digest.encode() + b" length=" + f"{length:020d}".encode() + b"\n"
    assert len(text) == TRAILER_BYTES
    return text


def append_digest(path: str | os.PathLike[str]) -> str:
    """Append the trailer with the SHA-256 of the whole file ``path``; returns the digest."""
    with open(path, "r+b") as fh:
        length = fh.seek(0, os.SEEK_END)
        fh.seek(0)
        digest = _sha256(fh, length)
        fh.seek(length)
        fh.write(_trailer(digest, length))
        fh.flush()
        os.fsync(fh.fileno())
    return digest


def _looks_like_trailer(tail: bytes) -> bool:
    """Whether ``tail`` is a trailer, perhaps with a few bytes damaged (most fixed bytes agree)."""
    expected = _trailer("0" * 64, 0)
    fixed = [i for i, b in enumerate(expected) if b != ord("0")]
    agree = sum(1 for i in fixed if i < len(tail) and tail[i] == expected[i])
    return agree >= len(fixed) // 2


def verify(path: str | os.PathLike[str]) -> str | None:
    """Check the trailer of ``path``: the digest, or None for a file without a trailer.

    Raises :class:`DigestError` when the file has a trailer (even a damaged one) that its
    content does not match.

    Examples
    --------
    >>> import tempfile
    >>> p = Path(tempfile.mkdtemp()) / "f.nc"
    >>> _ = p.write_bytes(b"some data"); _ = append_digest(p)
    >>> verify(p) == hashlib.sha256(b"some data").hexdigest()
    True
    >>> _ = p.write_bytes(b"s0me data" + p.read_bytes()[9:]); verify(p)
    Traceback (most recent call last):
    ...
    toposweep.file_digest.DigestError: its content does not match the digest written with it
    >>> _ = p.write_bytes(b"no trailer"); verify(p) is None
    True
    """
    with open(path, "rb") as fh:
        size = fh.seek(0, os.SEEK_END)
        if size < TRAILER_BYTES:
            return None
        fh.seek(size - TRAILER_BYTES)
        tail = fh.read(TRAILER_BYTES)
        if not tail.startswith(PREFIX):
            if _looks_like_trailer(tail):
                raise DigestError("its digest trailer is damaged")
            return None
        try:
            digest = tail[len(PREFIX) : len(PREFIX) + 64].decode("ascii")
            length = int(tail[len(PREFIX) + 64 + len(b" length=") : -1])
        except (UnicodeDecodeError, ValueError):
            raise DigestError("its digest trailer is damaged") from None
        if tail != _trailer(digest, length):  # (every byte of it, its newline included)
            raise DigestError("its digest trailer is damaged")
        if length != size - TRAILER_BYTES:
            raise DigestError(
                f"it is {size - TRAILER_BYTES} bytes long, its digest was made for {length} "
                "(truncated, or changed after it was written)"
            )
        fh.seek(0)
        if _sha256(fh, length) != digest:
            raise DigestError("its content does not match the digest written with it")
    return digest


if __name__ == "__main__":  # pragma: no cover
    import sys

    for name in sys.argv[1:]:
        try:
            found = verify(Path(name))
            print(f"{name}: " + (f"ok, sha256 {found}" if found else "no toposweep digest"))
        except (OSError, DigestError) as exc:
            print(f"{name}: {exc}")
