"""Studies with receptor-alignment hypotheses, eye movements and the perspective and
retina views: every mode is usable from a study file, eye offsets sweep by key path,
bad values are named, and the frames equal the library's own rendering."""

import csv
import json
import os

import numpy as np
import pytest

from renderer import pipeline
from renderer.composite import to_uint8_srgb
from renderer.errors import ConfigError, MagretinaError
from renderer.eye import load_layout
from renderer.eye.alignment import REGISTRY as ALIGNMENTS
from renderer.field import fixed
from renderer.pose import Pose
from renderer.response import Legendre
from renderer.scene import uniform
from renderer.study import load_study, run_study
from renderer.study.build import build_layout
from renderer.study.expand import plan
from renderer.views import PerspectiveScreen, RetinaView
from studyhelp import write

TINY = """
[study]
name = "eye-movement-test"
seed = 3

[field]
model = "fixed"
total_uT = 48.0
inclination_deg = 62.0
declination_deg = 3.0

[pose]
yaw_deg = 25.0
pitch_deg = 5.0

[layout]
preset = "lateral"
alignment = {{ mode = "tilt", tilt_deg = 40.0 }}
{layout_extra}

[response]
kind = "legendre"
coeffs = [0.7, 0.0, 0.1, 0.0, 0.03]

[views.screen]
kind = "perspective"
width = 32
height = 24
hfov_deg = 80.0
yaw_deg = -60.0

[views.retina]
kind = "retina"
eye = "left"
size = 24

[scene]
kind = "uniform"
width = 64
luminance = 0.5

[render]
gain = 2.0

[sequence]
kind = "still"

[output]
png8 = true
netcdf = false

[metrics]
providers = ["basic", "prediction"]

[metrics.options.prediction]
density = 0.004
heading_step_deg = 45.0

{sweep}
"""

SWEEP_OFFSETS = """
[[sweep.axis]]
key = "layout.eye_offsets.left.azimuth_deg"
values = [0.0, -15.0]
name = "left_eye_azimuth_offset_deg"
"""


def _frame(out, shot, view):
    import imageio.v3 as iio

    return iio.imread(os.path.join(out, "frames", f"shot{shot:03d}", f"{view}_0000.png"))


def test_tilt_alignment_eye_offsets_and_new_views_in_a_study(tmp_path):
    """A tiny study with a layout-wide tilt hypothesis, a perspective screen and a
    retina view, sweeping the left eye's azimuth offset (eye movement) by key path.
    Each frame must be byte-identical to renderer.pipeline.render with the layout built
    by hand (tilt on every eye, Layout.moved for the offset): the study adds nothing of
    its own to the maths.  The eye movement changes the retina frame (the field in the
    eye's frame turns) and the prediction metrics are written per shot."""
    path = write(tmp_path, TINY.format(layout_extra="", sweep=SWEEP_OFFSETS))
    out = str(tmp_path / "out")
    s = run_study(path, out, progress=False)
    assert (s["shots"], s["frames"]) == (2, 2)
    base = load_layout("lateral").with_alignment({"mode": "tilt", "tilt_deg": 40.0})
    field = fixed(48.0, 62.0, 3.0)
    pose = Pose(25.0, 5.0, 0.0)
    resp = Legendre([0.7, 0.0, 0.1, 0.0, 0.03])
    scene = uniform(64, 0.5)
    views = {"screen": PerspectiveScreen(width=32, height=24, hfov_deg=80.0, yaw_deg=-60.0),
             "retina": RetinaView(eye="left", size=24)}
    for shot, d_az in ((0, 0.0), (1, -15.0)):
        lay = base.moved({"left": (d_az, 0.0, 0.0)})
        for name, view in views.items():
            ref = to_uint8_srgb(pipeline.render(field, pose, lay, resp, view, scene=scene, gain=2.0))
            assert np.array_equal(_frame(out, shot, name), ref), (shot, name)
    assert not np.array_equal(_frame(out, 0, "retina"), _frame(out, 1, "retina"))
    with open(os.path.join(out, "metrics.csv"), newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [float(r["left_eye_azimuth_offset_deg"]) for r in rows] == [0.0, -15.0]
    assert all(float(r["crb_mean_deg"]) > 0 for r in rows)
    assert rows[0]["crb_mean_deg_left"] != rows[1]["crb_mean_deg_left"]


def _inline_table(mode, kw):
    """The TOML spelling of a hypothesis: its name alone, or an inline table."""
    if not kw:
        return json.dumps(mode)
    return "{ mode = " + json.dumps(mode) + "".join(f", {k} = {json.dumps(v)}"
                                                   for k, v in kw.items()) + " }"


#: Every registered hypothesis at its first example setting, as a study file writes it.
_MODE_TABLES = {name: _inline_table(name, next(iter(cls.examples.values()), {}))
                for name, cls in ALIGNMENTS.items()}


def test_every_alignment_mode_is_usable_from_a_study_file(tmp_path):
    """Sweep layout.alignment over every registered hypothesis (tables as sweep values),
    with a full (spherical-harmonic) response so the full-frame modes apply; every shot
    renders, carries its hypothesis and gives a frame of its own, and per-eye
    overrides win over the layout-wide one.  The list of modes is the registry itself, so a new hypothesis is covered."""
    values = ", ".join(_MODE_TABLES[m] for m in ALIGNMENTS)
    labels = ", ".join(f'"{m}"' for m in ALIGNMENTS)
    sweep = f"""
[[sweep.axis]]
key = "layout.alignment"
values = [{values}]
labels = [{labels}]
name = "alignment"
"""
    # the nodal point off the retina's centre so that normal and chief ray differ
    extra = ('[layout.eyes.left]\nnodal_offset_mm = 2.0\n\n'
             '[layout.eyes.right]\nalignment = "chief-ray"')
    text = TINY.format(layout_extra=extra, sweep=sweep)
    text = text.replace('kind = "legendre"\ncoeffs = [0.7, 0.0, 0.1, 0.0, 0.03]',
                        'kind = "harmonic"\ncoeffs = [2.2, 0.05, 0.0, -0.03, 0.1, 0.0, 0.2, '
                        '0.0, -0.1]')
    text = text.replace('providers = ["basic", "prediction"]', 'providers = ["basic"]')
    path = write(tmp_path, text)
    p = plan(load_study(path))
    assert len(p.shots) == len(ALIGNMENTS)
    for shot, mode in zip(p.shots, ALIGNMENTS):
        lay = build_layout(shot.config["layout"], str(tmp_path))
        assert lay.eyes[0].alignment.kind == mode
        assert lay.eyes[1].alignment.kind == "chief-ray"
    out = str(tmp_path / "out")
    s = run_study(path, out, progress=False)
    assert s["frames_rendered"] == len(ALIGNMENTS)  # one still frame per shot, two views
    frames = [_frame(out, k, "screen") for k in range(len(ALIGNMENTS))]
    assert all(f.std() > 0 for f in frames)
    assert len({f.tobytes() for f in frames}) == len(ALIGNMENTS)  # each hypothesis differs


def test_bad_alignment_and_eye_offsets_are_named(tmp_path):
    """Validation up front: a typo in an offset key, an offset out of range, a bad
    alignment mode and a tilt out of range are all reported at once with their key path
    and the allowed values or range."""
    extra = """
[layout.eye_offsets.left]
azimuth_deg = 200.0
elevaton_deg = 3.0

[layout.eyes.right]
alignment = { mode = "tilt", tilt_deg = 190.0 }
"""
    text = TINY.format(layout_extra=extra, sweep="").replace(
        'alignment = { mode = "tilt", tilt_deg = 40.0 }', 'alignment = "sideways"')
    with pytest.raises(ConfigError) as exc:
        load_study(write(tmp_path, text))
    msg = str(exc.value)
    assert "layout.eye_offsets.left.azimuth_deg = 200.0 is out of range; allowed [-180, 180]" in msg
    assert "layout.eye_offsets.left.elevaton_deg: unknown key; did you mean 'elevation_deg'? " \
           "allowed: azimuth_deg, elevation_deg, torsion_deg" in msg
    assert "layout.alignment.mode = 'sideways': allowed normal, chief-ray" in msg
    assert "layout.eyes.right.alignment" in msg and "tilt_deg" in msg and "[0, 180]" in msg


@pytest.mark.parametrize("extra,words", [
    ("[layout.eye_offsets.middle]\nazimuth_deg = 3.0", ["layout.eye_offsets.middle", "no eye",
                                                        "left, right"]),
    ("[layout.eye_offsets.left]\nelevation_deg = 120.0", ["layout.eye_offsets.left",
                                                          "elevation_deg", "[-90, 90]"]),
    ("[layout.eye_offsets.left]\nazimuth_deg = 150.0", ["layout.eye_offsets.left", "into the head"]),
])
def test_eye_offsets_that_do_not_fit_the_layout_are_refused_before_rendering(tmp_path, extra,
                                                                               words):
    """Offsets are checked against the layout when the shot's geometry is built, before
    any frame is written: an eye the layout does not have, an elevation that leaves
    [-90°, 90°], a left eye turned across the midline."""
    path = write(tmp_path, TINY.format(layout_extra=extra, sweep=""))
    out = tmp_path / "out"
    with pytest.raises(MagretinaError) as exc:
        run_study(path, str(out), progress=False)
    for w in words:
        assert w in str(exc.value), (w, str(exc.value))
    assert not out.exists() or not any(out.rglob("*.png"))


def test_example_study_mentions_alignment_eye_offsets_and_new_views():
    """`magretina new-study` writes an example that shows where the alignment hypothesis,
    eye movements and the perspective and retina views go (as comments)."""
    from renderer.commands.new_study import example_text

    text = example_text()
    for word in ("alignment", "eye_offsets", "perspective", "retina", "tilt_deg",
                 "full-frame", "layout.eye_offsets.left.azimuth_deg"):
        assert word in text, word
