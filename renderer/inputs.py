"""Reading user files defensively: one place for size, encoding, nesting and decoder checks.

Every file the tool reads on a user's behalf (study files, render configs, layouts,
radical-pair definitions, route and response CSVs, response tables, scene images)
goes through these functions, so that a hostile or damaged file -- empty, huge,
not UTF-8, nested thousands of levels deep, not a zip archive, a decompression
bomb -- ends in one :class:`~renderer.errors.MagretinaError` line that names the
file and what was expected, never in a traceback or a large allocation.  Limits are
checked before the decoder runs (file size before reading, bracket depth before
``tomllib`` recurses, the PNG/JPEG header before pixels are decoded).  This module
does not interpret the content (schemas live with their owners) and writes nothing.
"""

from __future__ import annotations

import csv
import io
import json
import os
import stat
import tomllib
import zipfile

import numpy as np
import png

from .errors import MagretinaError

#: Largest text file read (study files, configs, layouts, CSV tables), bytes.
MAX_TEXT_BYTES = 64 * 2**20
#: Largest binary table (.npz) read, bytes.
MAX_TABLE_BYTES = 2 * 2**30
#: Deepest nesting of tables/arrays accepted in a TOML file.  Real files use < 10;
#: ``tomllib`` recurses once per level and would hit Python's recursion limit.
MAX_TOML_DEPTH = 64
#: Most pixels of an image decoded (a 16384 x 8192 panorama has 2**27).
MAX_IMAGE_PIXELS = 2**28


def _where(what, path):
    return f"{what} {os.fspath(path)}"


def read_bytes(path, what="file", max_bytes=MAX_TEXT_BYTES) -> bytes:
    """The bytes of ``path``, refusing missing, non-regular or over-large files.

    Parameters
    ----------
    path : str or path-like
    what : str
        What the file is meant to be (``"study file"``), used in messages.
    max_bytes : int
        Largest size accepted; checked with ``os.stat`` before reading.

    Returns
    -------
    bytes
    """
    p = os.fspath(path)
    try:
        st = os.stat(p)
    except OSError as exc:
        raise MagretinaError(f"{_where(what, p)}: cannot read ({exc.strerror or exc})") from None
    if not stat.S_ISREG(st.st_mode):
        raise MagretinaError(f"{_where(what, p)}: not a regular file")
    if st.st_size > max_bytes:
        raise MagretinaError(f"{_where(what, p)}: {st.st_size} bytes; at most {max_bytes} "
                             f"bytes are read")
    try:
        with open(p, "rb") as fh:
            # read(n) allocates n bytes up front: ask for the stat size (plus one byte
            # to notice growth), not the limit, so a small file costs a small buffer.
            data = fh.read(min(st.st_size, max_bytes) + 1)
            if len(data) > st.st_size:  # grew since the stat: read on, up to the limit
                data += fh.read(max_bytes + 1 - len(data))
    except OSError as exc:
        raise MagretinaError(f"{_where(what, p)}: cannot read ({exc.strerror or exc})") from None
    if len(data) > max_bytes:  # grew while we looked
        raise MagretinaError(f"{_where(what, p)}: more than {max_bytes} bytes")
    return data


def decode_utf8(data: bytes, what, path) -> str:
    """``data`` as UTF-8 text (a leading BOM dropped); the error gives the first bad byte."""
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise MagretinaError(f"{_where(what, path)}: not UTF-8 text (byte {exc.start}: "
                             f"0x{data[exc.start]:02x})") from None
    if text.startswith("\ufeff"):
        text = text[1:]
    return text


def read_text_file(path, what="file", max_bytes=MAX_TEXT_BYTES) -> str:
    """A UTF-8 text file, size-checked; see :func:`read_bytes` and :func:`decode_utf8`."""
    return decode_utf8(read_bytes(path, what, max_bytes), what, path)


def toml_depth(text: str) -> int:
    """Deepest nesting of ``[``/``{`` in TOML text, outside strings and comments.

    A cheap linear scan, run before ``tomllib`` so that a file nested deeper than
    :data:`MAX_TOML_DEPTH` is refused without recursion.  Table headers
    (``[a.b]``) count one level, which over-estimates nothing that matters.
    """
    depth = best = 0
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        if c == "#":
            j = text.find("\n", i)
            i = n if j < 0 else j
            continue
        if c in "\"'":
            triple = text.startswith(c * 3, i)
            close = c * 3 if triple else c
            j = i + len(close)
            while j < n:
                if c == '"' and text[j] == "\\":
                    j += 2
                    continue
                if text.startswith(close, j):
                    break
                if not triple and text[j] == "\n":
                    break
                j += 1
            i = j + len(close)
            continue
        if c in "[{":
            depth += 1
            best = max(best, depth)
        elif c in "]}":
            depth = max(0, depth - 1)
        i += 1
    return best


def parse_toml(text: str, what, path) -> dict:
    """Parse TOML text, refusing deep nesting first; errors name the file."""
    d = toml_depth(text)
    if d > MAX_TOML_DEPTH:
        raise MagretinaError(f"{_where(what, path)}: tables/arrays nested {d} deep; at most "
                             f"{MAX_TOML_DEPTH} levels")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise MagretinaError(f"{_where(what, path)}: not valid TOML ({exc})") from None
    except RecursionError:
        raise MagretinaError(f"{_where(what, path)}: nested too deeply to parse") from None


def read_toml(path, what="TOML file", max_bytes=MAX_TEXT_BYTES) -> dict:
    """Read and parse a TOML file defensively (size, UTF-8, nesting, syntax).

    Returns
    -------
    dict
        The parsed document.
    """
    return parse_toml(read_text_file(path, what, max_bytes), what, path)


def read_toml_bytes(path, what="TOML file", max_bytes=MAX_TEXT_BYTES) -> tuple[bytes, dict]:
    """(raw bytes, parsed document) of a TOML file, for callers that hash the bytes."""
    data = read_bytes(path, what, max_bytes)
    return data, parse_toml(decode_utf8(data, what, path), what, path)


def read_csv_rows(path, what="CSV file", max_bytes=MAX_TEXT_BYTES) -> list[list[str]]:
    """Rows of a UTF-8 CSV file (``csv.reader``); blank rows kept as ``[]``.

    Returns
    -------
    list of list of str
    """
    text = read_text_file(path, what, max_bytes)
    if "\x00" in text:
        raise MagretinaError(f"{_where(what, path)}: holds a NUL byte (byte "
                             f"{text.index(chr(0))}); not a text CSV file")
    try:
        return list(csv.reader(io.StringIO(text, newline="")))
    except csv.Error as exc:
        raise MagretinaError(f"{_where(what, path)}: not a CSV table ({exc})") from None


def read_json(path, what="JSON file", max_bytes=MAX_TEXT_BYTES):
    """A JSON document from a UTF-8 file; errors name the file."""
    text = read_text_file(path, what, max_bytes)
    try:
        return json.loads(text)
    except (ValueError, RecursionError) as exc:
        raise MagretinaError(f"{_where(what, path)}: not valid JSON ({exc})") from None


def load_npz_checked(path, what="table", required=(), max_bytes=MAX_TABLE_BYTES) -> dict:
    """The arrays of an ``.npz`` file as a dict, checked without unpickling anything.

    Parameters
    ----------
    path : str or path-like
    what : str
        Used in messages (``"response table"``).
    required : sequence of str
        Array names that must be present.
    max_bytes : int
        Largest file accepted.

    Returns
    -------
    dict of str -> ndarray
    """
    p = os.fspath(path)
    data = read_bytes(p, what, max_bytes)
    if not data:
        raise MagretinaError(f"{_where(what, p)}: empty file (0 bytes); expected a NumPy .npz "
                             f"archive")
    if not zipfile.is_zipfile(io.BytesIO(data)):
        raise MagretinaError(f"{_where(what, p)}: not a NumPy .npz archive (not a zip file)")
    try:
        with np.load(io.BytesIO(data), allow_pickle=False) as z:
            arrays = {k: z[k] for k in z.files}
    except (ValueError, OSError, EOFError, KeyError, zipfile.BadZipFile) as exc:
        raise MagretinaError(f"{_where(what, p)}: damaged .npz archive ({type(exc).__name__}: "
                             f"{exc})") from None
    missing = [k for k in required if k not in arrays]
    if missing:
        raise MagretinaError(f"{_where(what, p)}: missing array(s) {', '.join(missing)}; "
                             f"holds {', '.join(sorted(arrays)) or 'none'}")
    return arrays


def image_size(path, what="image", max_pixels=MAX_IMAGE_PIXELS) -> tuple[int, int]:
    """(width, height) of an image from its header only; refuses more than ``max_pixels``.

    Pillow reads the header lazily, so nothing is decoded here; a decompression
    bomb (a small file declaring a huge image) is refused before any pixel buffer
    exists.
    """
    from PIL import Image  # deferred: Pillow loads only when an image is read

    p = os.fspath(path)
    if not os.path.isfile(p):
        raise MagretinaError(f"{_where(what, p)}: no such file")
    if os.path.getsize(p) == 0:
        raise MagretinaError(f"{_where(what, p)}: empty file (0 bytes); expected an image")
    old = Image.MAX_IMAGE_PIXELS
    try:
        # Our own limit is checked below; Pillow's warning/bomb error would otherwise
        # fire (as a warning or an exception) inside open() before we can word it.
        Image.MAX_IMAGE_PIXELS = None
        with Image.open(p) as im:
            w, h = im.size
    except (OSError, ValueError, SyntaxError, Image.DecompressionBombError):
        raise MagretinaError(f"{_where(what, p)}: not a readable image; expected a PNG (8-bit "
                             f"sRGB or 16-bit linear), JPEG or TIFF file") from None
    finally:
        Image.MAX_IMAGE_PIXELS = old
    if w <= 0 or h <= 0 or w * h > max_pixels:
        raise MagretinaError(f"{_where(what, p)}: {w} x {h} = {w * h} pixels; at most "
                             f"{max_pixels} pixels are decoded")
    return w, h


def read_png16(path):
    """Read a PNG with pypng if it is 16-bit (Pillow would reduce it to 8-bit); else None."""
    with open(path, "rb") as fh:
        head = fh.read(33)
    if head[:8] != b"\x89PNG\r\n\x1a\n" or head[24] != 16:
        return None
    W, H, rows, info = png.Reader(filename=path).read()
    planes = info["planes"]
    a = np.vstack([np.asarray(r, dtype=np.uint16) for r in rows]).reshape(H, W, planes)
    return a


def open_image_checked(path, what="image", max_pixels=MAX_IMAGE_PIXELS):
    """Decode an image after :func:`image_size` accepted its header.

    Returns
    -------
    ndarray
        (H, W[, C]) as stored (uint8, uint16 or float); 16-bit PNGs keep 16 bits.
    """
    p = os.fspath(path)
    image_size(p, what, max_pixels)
    try:
        img = read_png16(p)
        if img is None:
            from PIL import Image  # deferred: Pillow loads only when an image is read

            old = Image.MAX_IMAGE_PIXELS
            Image.MAX_IMAGE_PIXELS = max_pixels
            try:
                import imageio.v3 as iio  # deferred: imageio loads only when decoding

                img = iio.imread(p)
            finally:
                Image.MAX_IMAGE_PIXELS = old
    except MemoryError:
        raise MagretinaError(f"{_where(what, p)}: not enough memory to decode it") from None
    except Exception:  # decoders raise many types (some with install hints) for non-images
        raise MagretinaError(f"{_where(what, p)}: not a readable image; expected a PNG (8-bit "
                             f"sRGB or 16-bit linear), JPEG or TIFF file") from None
    return np.asarray(img)
