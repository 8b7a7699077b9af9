"""The built-in demo study: one invented site, several headings, a lateral-eyed layout.

``run_demo`` renders world panoramas composited onto the procedural dusk scene at
eight headings, both eyes' discs, the head-frame panorama and the pattern alone on
grey, plus a contact sheet, into one folder with a marker file listing what it
wrote.  A second run recognises its own marker and replaces those files; a folder
with other content is left alone unless forced.  The response and gain are
illustrative (the gain is exaggerated so the pattern is visible); the images are
model predictions, not observations of what any animal perceives.
"""

from __future__ import annotations

import json
import os
import time

import numpy as np
from PIL import Image, ImageDraw
from tqdm import tqdm

from . import pipeline
from .composite import pattern_grey, to_uint8_srgb
from .defaults import DEFAULT_GAIN
from .display import SRGB8
from .dither import frame_seed, quantise
from .errors import MagretinaError
from .eye import load_layout
from .field import igrf
from .io import (atomic_write_bytes, atomic_write_json, atomic_write_text, display_png_bytes,
                 png_bytes, write_srgb8_codes)
from .pngmeta import label_chunks
from .pose import Pose
from .provenance import frame_params
from .response import Legendre
from .scene import dusk
from .version import __version__
from .views import EyeDisc, HeadPanorama, WorldPanorama

MARKER = ".magretina-demo.json"

#: The invented demo scenario: a moored platform in the open North Pacific, about
#: 1800 km from the nearest land (the Hawaiian islands), where no research site exists;
#: the name is coined.
SITE = {"name": "Ostravane Shoal buoy station (invented)", "lat_deg": 36.75, "lon_deg": -152.25,
        "alt_km": 0.01, "date": "2026-09-15"}
HEADINGS_DEG = (0, 45, 90, 135, 180, 225, 270, 315)
LEGENDRE = (0.70, 0.0, 0.10)
GAIN = DEFAULT_GAIN

CAUTION = ("These images are predictions of a model (a hypothetical receptor response and "
           "alignment), for research. They are not observations of animal perception.")


def _prepare_folder(out_dir, force):
    os.makedirs(out_dir, exist_ok=True)
    marker = os.path.join(out_dir, MARKER)
    entries = [e for e in os.listdir(out_dir) if e != MARKER]
    if os.path.isfile(marker):
        try:
            with open(marker, encoding="utf-8") as fh:
                old = json.load(fh).get("files", [])
        except (OSError, ValueError):
            old = []
        for rel in old:
            p = os.path.join(out_dir, rel)
            if os.path.isfile(p) and os.path.abspath(p).startswith(os.path.abspath(out_dir)):
                os.remove(p)
    elif entries and not force:
        raise MagretinaError(f"{out_dir} is not empty and holds no earlier demo output "
                             f"(no {MARKER}); choose another --out or pass --force")


def _label(img_u8, text):
    im = Image.fromarray(img_u8)
    d = ImageDraw.Draw(im)
    d.rectangle([0, 0, 8 + 7 * len(text), 16], fill=(0, 0, 0))
    d.text((4, 3), text, fill=(255, 255, 255))
    return np.asarray(im)


def run_demo(out_dir="outputs/demo", width=1024, force=False, progress=True, display=None,
             dither="none", dither_seed=0):
    """Render the demo into ``out_dir``; returns the list of written paths.

    ``display`` (a :class:`renderer.display.Display`, default 8-bit sRGB), ``dither`` and
    ``dither_seed`` choose the stimulus encoding (see :mod:`renderer.dither`); every PNG
    carries text chunks describing what made it.
    """
    t0 = time.time()
    _prepare_folder(out_dir, force)
    field = igrf(SITE["lat_deg"], SITE["lon_deg"], SITE["alt_km"], SITE["date"])
    layout = load_layout("lateral")
    response = Legendre(LEGENDRE)
    scene = dusk(width)
    display = display or SRGB8
    files = []

    def save(rel, lin, view, pose, what):
        params = frame_params(field, pose, layout, response, view, GAIN, "singlet", display,
                              dither, dither_seed if dither != "none" else None, temporal=None,
                              scenario="invented demo site", file=rel)
        codes = quantise(display, lin, dither, frame_seed(dither_seed, len(files)))
        labels = label_chunks(f"demo: {what}; codes for display {display.kind} "
                              f"{display.bits}-bit", CAUTION, params)
        atomic_write_bytes(os.path.join(out_dir, rel), display_png_bytes(codes, display, labels))
        files.append(rel)
        return to_uint8_srgb(lin)

    world = WorldPanorama(width)
    thumbs = []
    for yaw in tqdm(HEADINGS_DEG, desc="demo headings", disable=not progress, unit="frame"):
        pose = Pose(yaw_deg=yaw)
        tag = f"heading{yaw:03d}"
        img = pipeline.render(field, pose, layout, response, world, scene=scene, gain=GAIN)
        u8 = save(f"world_{tag}.png", img, world, pose,
                  f"world panorama at heading {yaw} deg on the dusk scene")
        thumbs.append(_label(u8[::4, ::4].copy(), f"heading {yaw} deg"))
        sig, mean = pipeline.render_signal(field, pose, layout, response, world)
        save(f"pattern_{tag}.png", pattern_grey(sig, mean, GAIN), world, pose,
             f"the modulation alone on uniform grey, heading {yaw} deg")
        for eye in ("left", "right"):
            dview = EyeDisc(eye, size=width // 3)
            disc = pipeline.render(field, pose, layout, response, dview, scene=scene, gain=GAIN)
            save(f"eye_{eye}_{tag}.png", disc, dview, pose,
                 f"{eye} eye's field at heading {yaw} deg")
    hview = HeadPanorama(width)
    head = pipeline.render(field, Pose(0.0), layout, response, hview, scene=scene, gain=GAIN)
    save("head_heading000.png", head, hview, Pose(0.0), "head-frame panorama at heading 0 deg")
    rows = [np.concatenate(thumbs[i:i + 2], axis=1) for i in range(0, len(thumbs), 2)]
    sheet = np.concatenate(rows, axis=0)
    write_srgb8_codes(os.path.join(out_dir, "contact_sheet.png"), sheet, label_chunks(
        "demo contact sheet: world panoramas at eight headings, labelled", CAUTION,
        {"site": SITE, "headings_deg": list(HEADINGS_DEG), "gain": GAIN},
        warning="figure with burned-in labels; not a stimulus"))
    files.append("contact_sheet.png")
    info = {
        "caution": CAUTION,
        "site": SITE,
        "field": field.as_dict(),
        "layout": layout.describe(),
        "response": response.describe(),
        "gain": GAIN,
        "headings_deg": list(HEADINGS_DEG),
        "view_width": width,
        "display": display.describe(),
        "dither": {"method": dither, "seed": dither_seed if dither != "none" else None},
        "encodings": {"*.png": "codes of the display above (default 8-bit sRGB, IEC "
                               "61966-2-1, sRGB chunk); contact_sheet.png is a labelled "
                               "8-bit sRGB figure"},
        "magretina_version": __version__,
    }
    atomic_write_json(os.path.join(out_dir, "demo.json"), info)
    files.append("demo.json")
    atomic_write_text(os.path.join(out_dir, "README.txt"),
                      "magretina demo output\n\n" + CAUTION + "\n\n"
                      "world_*.png   world panoramas (north in the middle, east right) on the dusk scene\n"
                      "pattern_*.png the modulation alone on uniform grey\n"
                      "eye_*_*.png   each eye's field, azimuthal equidistant about its optic axis\n"
                      "head_*.png    head-frame panorama (forward in the middle)\n"
                      "contact_sheet.png  all headings at a glance\n")
    files.append("README.txt")
    atomic_write_json(os.path.join(out_dir, MARKER), {"files": files, "written_s": time.time() - t0})
    return [os.path.join(out_dir, f) for f in files]
