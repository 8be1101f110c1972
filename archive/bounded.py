"""zarr's compressors with the decoded size of every chunk bounded before allocating.

zarr-python hands a chunk to numcodecs, which allocates what the compressed bytes say:
a 32 KB chunk can claim 1 GiB. The classes below are zarr's ``blosc``, ``zstd`` and
``gzip`` codecs with one addition: before decoding, the size the chunk will decode to is
compared with what the chunk can hold (its shape times its item size, plus a little slack
for a compressor stacked under another). Blosc and zstd frames state their decoded size
in their header (the Blosc 1 header, bytes 4-8: nbytes; the zstd frame header's
Frame_Content_Size, RFC 8878 section 3.1.1.1; both from their format specifications, from
memory); deflate does not, so gzip is stream-decoded with a cap (``zlib.decompressobj``
with ``max_length``). A chunk over the bound raises ``ValueError``, which the readers turn
into a corrupt chunk naming it. Encoding is unchanged.

:func:`install` makes zarr use these classes for the three names (zarr's codec registry
and its ``codecs`` configuration); :mod:`massarc.archive` calls it on import.
"""

from __future__ import annotations

import math
import zlib
from typing import Any

import zarr
from zarr.codecs import BloscCodec, GzipCodec, ZstdCodec
from zarr.core.array_spec import ArraySpec
from zarr.core.buffer import Buffer

__all__ = ["BoundedBlosc", "BoundedGzip", "BoundedZstd", "decoded_bound", "install"]

_ZSTD_MAGIC = 0xFD2FB528


def decoded_bound(spec: ArraySpec) -> int:
    """Most bytes a bytes-to-bytes stage of a chunk of ``spec`` may decode to: the chunk's
    own size, plus 1/64 and 4 KiB for a compressed stream stacked under another codec."""
    size = math.prod(spec.shape) * spec.dtype.to_native_dtype().itemsize
    return size + size // 64 + 4096


def _too_big(codec: str, claimed: int, bound: int) -> ValueError:
    return ValueError(
        f"{codec}: the chunk says it decodes to {claimed} bytes; expected at most {bound}"
    )


def zstd_content_size(data: bytes) -> int | None:
    """Frame_Content_Size of the zstd frame at the start of ``data``; None when the frame
    does not state it (or ``data`` is not a zstd frame)."""
    if len(data) < 5 or int.from_bytes(data[:4], "little") != _ZSTD_MAGIC:
        return None
    fhd = data[4]
    fcs_flag, single = fhd >> 6, (fhd >> 5) & 1
    size = (1 if single else 0, 2, 4, 8)[fcs_flag]
    if size == 0:
        return None
    at = 5 + (0 if single else 1) + (0, 1, 2, 4)[fhd & 3]
    if len(data) < at + size:
        return None
    value = int.from_bytes(data[at : at + size], "little")
    return value + 256 if size == 2 else value


class BoundedBlosc(BloscCodec):
    """zarr's ``blosc`` codec; the header's decoded size is checked first."""

    def _decode_sync(self, chunk_bytes: Buffer, chunk_spec: ArraySpec) -> Buffer:
        raw = chunk_bytes.as_numpy_array()
        bound = decoded_bound(chunk_spec)
        if raw.size < 16:
            raise ValueError(f"blosc: {raw.size} bytes, shorter than the Blosc header")
        claimed = int.from_bytes(raw[4:8].tobytes(), "little")
        if claimed > bound:
            raise _too_big("blosc", claimed, bound)
        return super()._decode_sync(chunk_bytes, chunk_spec)


class BoundedZstd(ZstdCodec):
    """zarr's ``zstd`` codec; a frame must state its decoded size, within the bound."""

    def _decode_sync(self, chunk_bytes: Buffer, chunk_spec: ArraySpec) -> Buffer:
        raw = chunk_bytes.as_numpy_array()
        bound = decoded_bound(chunk_spec)
        claimed = zstd_content_size(raw[:18].tobytes())
        if claimed is None:
            raise ValueError("zstd: the frame does not state its decoded size")
        if claimed > bound:
            raise _too_big("zstd", claimed, bound)
        return super()._decode_sync(chunk_bytes, chunk_spec)


class BoundedGzip(GzipCodec):
    """zarr's ``gzip`` codec, decoded as a stream that stops at the bound (every member
    of a multi-member stream counts)."""

    def _decode_sync(self, chunk_bytes: Buffer, chunk_spec: ArraySpec) -> Buffer:
        data = chunk_bytes.as_numpy_array().tobytes()
        bound = decoded_bound(chunk_spec)
        parts: list[bytes] = []
        size = 0
        while data:
            d = zlib.decompressobj(zlib.MAX_WBITS | 16)
            try:
                part = d.decompress(data, bound - size + 1)
            except zlib.error as exc:
                raise ValueError(f"gzip: {exc}") from None
            size += len(part)
            if size > bound or d.unconsumed_tail:
                raise ValueError(f"gzip: the chunk decodes to more than {bound} bytes")
            parts.append(part)
            if not d.eof:
                raise ValueError("gzip: the stream is truncated")
            data = d.unused_data
        return chunk_spec.prototype.buffer.from_bytes(b"".join(parts))


_BOUNDED: dict[str, Any] = {"blosc": BoundedBlosc, "zstd": BoundedZstd, "gzip": BoundedGzip}


def install() -> None:
    """Make zarr read ``blosc``, ``zstd`` and ``gzip`` chunks with the bounded classes."""
    for name, cls in _BOUNDED.items():
        zarr.registry.register_codec(name, cls)
    zarr.config.set(
        {f"codecs.{name}": f"{cls.__module__}.{cls.__qualname__}" for name, cls in _BOUNDED.items()}
    )
