"""PNG ancillary chunks: what a file says about itself (labels and colour encoding).

Chunks follow the W3C PNG specification (3rd edition, 2025): text chunks with its
predefined keywords (Software, Description, Source, Disclaimer, Warning, Creation
Time) plus one ``magretina parameters`` chunk holding a compact JSON of what made
the image; colour chunks declaring the encoding: ``sRGB`` (with the ``gAMA`` and
``cHRM`` the specification recommends beside it for older decoders) for sRGB
files, ``gAMA`` = 100000 (linear) and ``cICP`` (ITU-T H.273 code points: BT.709
primaries 1, linear transfer 8, RGB matrix 0, full range) for linear-light files,
``gAMA`` = 100000/γ for a power-law display, ``sBIT`` for 10-bit codes stored in
16-bit samples.  The chunks are inserted after ``IHDR`` of bytes produced by the
usual encoders, so pixel data (``IDAT``) are byte-for-byte what they were.  This
module does not decide what the parameters are (the callers do) and does not
quantise.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import struct
import zlib

import numpy as np

from .version import __version__

SIGNATURE = b"\x89PNG\r\n\x1a\n"
PARAMS_KEYWORD = "magretina parameters"
#: Chromaticities of sRGB (IEC 61966-2-1) as cHRM stores them (×100000): white x, y,
#: red x, y, green x, y, blue x, y.
SRGB_CHRM = (31270, 32900, 64000, 33000, 30000, 60000, 15000, 6000)


def chunk(kind: bytes, data: bytes) -> bytes:
    """One chunk: length, type, data, CRC-32 of type and data (PNG spec §5.3)."""
    return struct.pack(">I", len(data)) + kind + data + struct.pack(
        ">I", zlib.crc32(kind + data) & 0xFFFFFFFF)


def _check_keyword(keyword):
    if not (1 <= len(keyword) <= 79) or keyword != keyword.strip() or "  " in keyword:
        raise ValueError(f"PNG text keyword {keyword!r}: 1-79 characters, no leading, trailing "
                         f"or double spaces")
    keyword.encode("latin-1")


def text_chunk(keyword: str, text: str) -> bytes:
    """tEXt if the text is Latin-1, else uncompressed iTXt (UTF-8)."""
    _check_keyword(keyword)
    k = keyword.encode("latin-1")
    try:
        return chunk(b"tEXt", k + b"\0" + text.encode("latin-1"))
    except UnicodeEncodeError:
        return chunk(b"iTXt", k + b"\0\0\0" + b"\0" + b"\0" + text.encode("utf-8"))


def srgb_chunks() -> list[bytes]:
    """sRGB (rendering intent 0, perceptual) with the recommended gAMA 45455 and cHRM."""
    return [chunk(b"sRGB", b"\0"), chunk(b"gAMA", struct.pack(">I", 45455)),
            chunk(b"cHRM", struct.pack(">8I", *SRGB_CHRM))]


def linear_chunks() -> list[bytes]:
    """Linear light: gAMA 100000 and cICP (1, 8, 0, 1), with the sRGB primaries' cHRM."""
    return [chunk(b"cICP", bytes([1, 8, 0, 1])), chunk(b"gAMA", struct.pack(">I", 100000)),
            chunk(b"cHRM", struct.pack(">8I", *SRGB_CHRM))]


def gamma_chunks(gamma: float) -> list[bytes]:
    """A power-law display of exponent ``gamma``: gAMA = round(100000/gamma)."""
    return [chunk(b"gAMA", struct.pack(">I", int(round(100000.0 / gamma))))]


def sbit_chunk(bits: int, channels: int = 3) -> bytes:
    """Significant bits per channel (e.g. 10-bit codes in 16-bit samples)."""
    return chunk(b"sBIT", bytes([bits] * channels))


def creation_time(now=None) -> str:
    """UTC time in RFC 3339 form; ``SOURCE_DATE_EPOCH`` (reproducible-builds convention)
    overrides the clock."""
    if now is None:
        sde = os.environ.get("SOURCE_DATE_EPOCH")
        now = (_dt.datetime.fromtimestamp(int(sde), _dt.timezone.utc) if sde and sde.isdigit()
               else _dt.datetime.now(_dt.timezone.utc))
    return now.astimezone(_dt.timezone.utc).replace(microsecond=0).strftime("%Y-%m-%dT%H:%M:%SZ")


def compact_json(obj) -> str:
    def conv(o):
        if isinstance(o, np.ndarray):
            return o.tolist()
        if isinstance(o, (np.floating, np.integer)):
            return o.item()
        return str(o)

    return json.dumps(obj, sort_keys=True, separators=(",", ":"), default=conv,
                      ensure_ascii=False)


def label_chunks(description, caution, params=None, source=None, warning=None,
                 created=True) -> list[bytes]:
    """Text chunks with the specification's keywords and the parameters JSON.

    Parameters
    ----------
    description : str, what the image shows
    caution : str, the model-prediction caution (``Disclaimer``)
    params : dict or None, written as compact JSON under ``magretina parameters``
    source : str or None (``Source``: what made the image)
    warning : str or None (``Warning``, e.g. "figure, not a stimulus")
    created : True for the current time, a string to use as is, False to leave it out
        (study frames: a rerun must give the same bytes)
    """
    out = [text_chunk("Software", f"magretina {__version__}"),
           text_chunk("Description", description),
           text_chunk("Source", source or "computed by magretina (a model, no camera or "
                                          "measurement)"),
           text_chunk("Disclaimer", caution)]
    if warning:
        out.append(text_chunk("Warning", warning))
    if created:
        out.append(text_chunk("Creation Time", creation_time() if created is True else created))
    if params is not None:
        out.append(text_chunk(PARAMS_KEYWORD, compact_json(params)))
    return out


def insert_chunks(png: bytes, chunks) -> bytes:
    """Insert chunks right after IHDR (colour chunks must precede PLTE and IDAT)."""
    if png[:8] != SIGNATURE or png[12:16] != b"IHDR":
        raise ValueError("not a PNG stream starting with IHDR")
    end = 8 + 8 + struct.unpack(">I", png[8:12])[0] + 4
    return png[:end] + b"".join(chunks) + png[end:]
