"""Reading and writing files safely: atomic writes, PNG/JSON encoders, image decoding.

Every output goes to a temporary name in the target folder and is renamed into
place (``os.replace``), so an interrupted run never leaves a partial file visible:
:func:`atomic_write_bytes` (and its text/JSON forms) for bytes in memory,
:func:`atomic_path` for writers that need a file name (video encoders, matplotlib).
This is the package's only atomic writer.
Images are decoded here and turned into linear light by :mod:`renderer.composite`.
This module does not decide *where* outputs go (see the study runner and CLI).
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import os
import struct
import tempfile

import numpy as np
import png

from . import pngmeta
from .composite import from_uint8_srgb, to_uint8_srgb, to_uint16_linear
from .errors import MagretinaError
from .inputs import open_image_checked


def _read_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


# mkstemp creates files 0600; outputs get the usual 0666 & ~umask.  Read once at import,
# because os.umask is process-wide and briefly changing it is not thread-safe.
_FILE_MODE = 0o666 & ~_read_umask()


def fsync_folder(folder) -> None:
    """Flush a folder's entries to disk, so a file just renamed into it survives a power loss.

    Common practice in databases and package managers: the rename is durable only
    once the directory itself is synced.  Silently skipped where folders cannot be
    opened (Windows) or synced (some network file systems).
    """
    try:
        fd = os.open(os.fspath(folder), os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


@contextlib.contextmanager
def atomic_path(path, suffix=""):
    """A temporary file name beside ``path``, renamed onto ``path`` when the block ends.

    For writers that need a file name rather than bytes.  If the block raises, the
    temporary file is removed and ``path`` is untouched.

    Parameters
    ----------
    path : path-like
        Final name (its folder is created).
    suffix : str
        Appended to the temporary name after ``.tmp`` (e.g. ``".mp4"``, so an encoder
        that picks its format by extension sees the right one).

    Yields
    ------
    str
        The temporary path to write.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix="." + os.path.basename(path) + ".", suffix=".tmp" + suffix,
                               dir=folder)
    os.close(fd)
    try:
        yield tmp
        os.chmod(tmp, _FILE_MODE)
        os.replace(tmp, path)
        fsync_folder(folder)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def atomic_write_bytes(path, data: bytes) -> str:
    """Write ``data`` to ``path`` atomically (flushed to disk first); returns the path."""
    path = os.fspath(path)
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
    return path


def atomic_write_text(path, text: str) -> str:
    return atomic_write_bytes(path, text.encode("utf-8"))


def atomic_write_json(path, obj) -> str:
    return atomic_write_text(path, json.dumps(obj, indent=2, sort_keys=True, default=_jsonable) + "\n")


def _jsonable(o):
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, (np.floating, np.integer)):
        return o.item()
    return str(o)


# Lossless PNG encoder presets, chosen from bench/encoders.py on rendered 1024x512 frames
# (2 busy cores): every preset decodes to the same samples, only time and size differ.
#   "fast":  8-bit RGB(A) through fpng (~6 ms, ~2.1x the level-6 size), everything else
#            through libpng (imagecodecs) at zlib level 1 with the sub filter (8-bit ~22 ms,
#            1.6x; 16-bit ~80 ms, 1.4x the level-6 size)
#   "small": libpng (imagecodecs) at zlib level 6 with adaptive filters (8-bit ~150 ms,
#            16-bit ~520 ms and 40 % of pypng's unfiltered size)
# Without imagecodecs/fpng installed the presets fall back to Pillow (8-bit) and pypng
# (16-bit) at zlib level 1 or 6.
PNG_ENCODERS = ("fast", "small")
DEFAULT_PNG_ENCODER = "fast"


def check_png_encoder(name, where="output.png_encoder"):
    """Return ``name`` if it is a PNG encoder preset, else raise a MagretinaError naming
    ``where``, the value and the allowed presets."""
    if name not in PNG_ENCODERS:
        raise MagretinaError(f"{where} = {name!r}: allowed {', '.join(map(repr, PNG_ENCODERS))}")
    return name


def _drop_chunks(png: bytes, kinds) -> bytes:
    """The PNG stream without the chunks of the given types."""
    out, i = [png[:8]], 8
    while i < len(png):
        n = struct.unpack(">I", png[i:i + 4])[0]
        if png[i + 4:i + 8] not in kinds:
            out.append(png[i:i + 12 + n])
        i += 12 + n
    return b"".join(out)


def _encode_library(a, fast):
    """PNG bytes from fpng/imagecodecs, or None when they are not installed."""
    a = np.ascontiguousarray(a)
    if fast and a.dtype == np.uint8 and a.ndim == 3 and a.shape[2] in (3, 4):
        try:
            import fpng  # deferred: optional fast encoder, loaded on first use
        except ImportError:
            fpng = None
        if fpng is not None:
            H, W, C = a.shape
            # fpng adds a private marker chunk for its own decoder; other readers ignore
            # it, but the file should carry only chunks magretina means
            return _drop_chunks(fpng.from_bytes(a.tobytes(), W, H, C), (b"fdEC",))
    try:
        import imagecodecs  # deferred: large codec library, loaded on first use
    except ImportError:
        return None
    if fast:
        return bytes(imagecodecs.png_encode(a, level=1, filter=imagecodecs.PNG.FILTER.SUB))
    return bytes(imagecodecs.png_encode(a, level=6, filter=imagecodecs.PNG.FILTER.ALL))


def png_bytes(array, chunks=(), encoder=None) -> bytes:
    """Encode a uint8 or uint16 (H, W[, C]) array as PNG bytes.

    ``encoder`` is a preset of :data:`PNG_ENCODERS` (None: :data:`DEFAULT_PNG_ENCODER`);
    every preset is lossless, so the decoded samples are the same.  ``chunks``
    (ready-made ancillary chunks, see :mod:`renderer.pngmeta`) are inserted after IHDR
    whatever the encoder (the encoders write no ancillary chunks of their own); without
    them the file carries no colour chunk.
    """
    a = np.asarray(array)
    if a.dtype not in (np.uint8, np.uint16):
        raise TypeError(f"png_bytes needs uint8 or uint16, got {a.dtype}")
    enc = check_png_encoder(DEFAULT_PNG_ENCODER if encoder is None else encoder, "png encoder")
    data = _encode_library(a, enc == "fast")
    if data is None:
        level = 1 if enc == "fast" else 6
        buf = io.BytesIO()
        if a.dtype == np.uint16:  # Pillow cannot write (or read back) 16-bit RGB
            H, W = a.shape[:2]
            C = 1 if a.ndim == 2 else a.shape[2]
            png.Writer(W, H, greyscale=(C == 1), alpha=(C in (2, 4)), bitdepth=16,
                       compression=level).write(buf, a.reshape(H, W * C))
        else:
            import imageio.v3 as iio  # deferred: imageio and its plugins load only when encoding

            iio.imwrite(buf, a, extension=".png", compress_level=level)
        data = buf.getvalue()
    if chunks:
        data = pngmeta.insert_chunks(data, list(chunks))
    return data


def codes_to_samples(codes, bits) -> np.ndarray:
    """Display codes -> PNG samples: 8 and 16 bits as they are; 10-bit codes in 16-bit
    samples by left bit replication (c << 6 | c >> 4, the PNG specification's
    recommended scaling, so c = sample >> 6 recovers them; declared by sBIT)."""
    c = np.asarray(codes)
    if bits == 10:
        c = c.astype(np.uint16)
        return (c << 6) | (c >> 4)
    return c


def display_png_bytes(codes, display, labels=(), encoder=None) -> bytes:
    """PNG bytes of display codes with the chunks that declare their encoding.

    Parameters
    ----------
    codes : (H, W, 3) integer codes of ``display`` (from :func:`renderer.dither.quantise`)
    display : renderer.display.Display (sRGB: sRGB/gAMA/cHRM chunks; gamma: gAMA;
        a measured table: no colour chunk, the codes belong to that display only)
    labels : text chunks (:func:`renderer.pngmeta.label_chunks`)
    encoder : PNG encoder preset (:data:`PNG_ENCODERS`; None: the default)
    """
    colour = []
    if display.kind == "srgb":
        colour = pngmeta.srgb_chunks()
    elif display.kind == "gamma":
        colour = pngmeta.gamma_chunks(display.gamma)
    if display.bits == 10:
        colour.append(pngmeta.sbit_chunk(10))
    samples = codes_to_samples(codes, display.bits)
    dtype = np.uint8 if display.bits == 8 else np.uint16
    return png_bytes(np.asarray(samples, dtype), colour + list(labels), encoder)


def linear16_png_bytes(lin, labels=(), encoder=None) -> bytes:
    """16-bit linear-light PNG bytes (code / 65535 = relative linear light), declared
    linear by gAMA 1.0 and cICP."""
    return png_bytes(to_uint16_linear(lin), pngmeta.linear_chunks() + list(labels), encoder)


def write_png8_srgb(path, lin, labels=()) -> str:
    """Write a linear float image as an 8-bit sRGB PNG (sRGB chunk), atomically."""
    return atomic_write_bytes(path, png_bytes(to_uint8_srgb(lin),
                                              pngmeta.srgb_chunks() + list(labels)))


def write_srgb8_codes(path, u8, labels=()) -> str:
    """Write an 8-bit sRGB-coded image (already quantised) with the sRGB chunk, atomically."""
    return atomic_write_bytes(path, png_bytes(np.asarray(u8, np.uint8),
                                              pngmeta.srgb_chunks() + list(labels)))


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def write_png16_linear(path, lin, labels=()) -> str:
    """Write a linear float image as a 16-bit linear PNG (gAMA 1.0, cICP), atomically."""
    return atomic_write_bytes(path, linear16_png_bytes(lin, labels))


def read_image_linear(path) -> np.ndarray:
    """Read an image file into linear light, float32 (H, W, 3) in [0, 1].

    8-bit images are taken as sRGB-encoded; 16-bit images as linear values (the
    convention of magretina's own 16-bit outputs).  Alpha is dropped.
    """
    p = os.fspath(path)
    img = open_image_checked(p, "image")
    img = np.asarray(img)
    if img.ndim == 2:
        img = np.repeat(img[..., None], 3, axis=-1)
    if img.ndim != 3 or img.shape[2] not in (1, 3, 4):
        raise MagretinaError(f"image {p}: unsupported shape {img.shape}; need H x W x 1, 3 or 4")
    if img.shape[2] == 1:
        img = np.repeat(img, 3, axis=-1)
    img = img[..., :3]
    if img.dtype == np.uint8:
        return from_uint8_srgb(img)
    if img.dtype == np.uint16:
        return (img.astype(np.float32) / 65535.0)
    if np.issubdtype(img.dtype, np.floating):
        return np.clip(img.astype(np.float32), 0.0, 1.0)
    raise MagretinaError(f"image {p}: unsupported sample type {img.dtype}")
