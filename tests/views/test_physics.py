"""Checks with a physical meaning, through the whole rendering path."""

import dataclasses

import numpy as np
import pytest

import renderer
from renderer.eye import load_layout
from renderer.eye.alignment import ChiefRay, FullFrame, Tilt
from renderer.eye.alignment import examples as alignment_examples
from renderer.field import fixed
from renderer.field.base import FieldVector
from renderer.pose import Pose
from renderer.response import Legendre
from renderer.views import HeadPanorama, WorldPanorama
from renderer.views import examples as view_examples


class EvenXY:
    """Made-up even full response (f(−b) = f(b)) with x/y dependence (test only)."""

    axial = False

    def evaluate_dirs(self, d):
        d = np.asarray(d, float)
        return 0.5 + 0.2 * d[..., 0] ** 2 - 0.1 * d[..., 1] ** 2 + 0.1 * d[..., 0] * d[..., 2]

    def axial_average(self):
        return Legendre([0.5 + 0.1 / 3, 0.0, -0.1 / 3])


def _reversed(field):
    return field.replace(-np.asarray(field.ned_T))


def _lateral(d=1.5, alignment=None):
    lay = load_layout("lateral")
    lay = lay.with_eyes([dataclasses.replace(e, nodal_offset_mm=d) for e in lay.eyes])
    return lay if alignment is None else lay.with_alignment(alignment)


#: Every registered alignment hypothesis (example settings) and every registered view.
ALIGNMENTS = list(alignment_examples().values())
VIEWS = list(view_examples().values())


@pytest.mark.parametrize("alignment", ALIGNMENTS, ids=repr)
def test_field_reversal_leaves_every_view_unchanged(alignment):
    """A radical-pair yield is even in the field, so reversing B changes nothing in any view
    or alignment (the polarity-blind inclination compass of Wiltschko & Wiltschko 1972,
    Science 176:62)."""
    field = fixed(48.0, 62.0, 7.0)
    resp = EvenXY() if isinstance(alignment, FullFrame) else Legendre([0.6, 0.0, 0.2, 0.0, 0.05])
    lay = _lateral(alignment=alignment)
    pose = Pose(25.0, 6.0, -4.0)
    for view in VIEWS:
        a = renderer.render_pattern(field, pose, lay, resp, view)
        b = renderer.render_pattern(_reversed(field), pose, lay, resp, view)
        np.testing.assert_allclose(a, b, atol=1e-12, equal_nan=True)


@pytest.mark.parametrize("decl", [0.0, 9.0])
def test_vertical_reversal_mirrors_the_world_panorama(decl):
    """Reversing only the vertical component turns inclination I into −I: for an even
    response the world panorama is mirrored north–south about the magnetic meridian
    (Wiltschko & Wiltschko 1972: birds then reverse their choice).  All-around eye, so the
    head adds no asymmetry; W = 720 puts the mirror axis (azimuth D ± 90°) on the pixel
    grid: column j ↦ 3W/2 − 1 − j + 2D·W/360 (mod W)."""
    W = 720
    field = fixed(47.0, 58.0, decl)
    flipped = field.replace(np.asarray(field.ned_T) * np.array([1.0, 1.0, -1.0]))
    lay, resp, pose = load_layout("all-around"), Legendre([0.6, 0.0, 0.25, 0.0, 0.04]), Pose(0, 0, 0)
    a = renderer.render_pattern(field, pose, lay, resp, WorldPanorama(W))
    b = renderer.render_pattern(flipped, pose, lay, resp, WorldPanorama(W))
    j = np.arange(W)
    mirror = (3 * W // 2 - 1 - j + int(round(2 * decl * W / 360))) % W
    np.testing.assert_allclose(b, a[:, mirror], atol=1e-9)
    assert np.max(np.abs(b - a)) > 1e-2  # not trivially symmetric


@pytest.mark.parametrize("incl,decl,yaw", [(64.0, 5.0, 30.0), (45.0, -12.0, -100.0)])
def test_p2_contour_follows_the_inclination_formula(incl, decl, yaw):
    """Receptors normal at d = 0 with a pure P_2 response: f = −½ exactly where θ = 90°,
    i.e. on the great circle tan(elevation) = cos(azimuth − D)·cot I (view direction ⟂ B
    in NED; geometry).  In each column the row of the minimum lies within one row of the
    predicted elevation, and f there is within the row spacing's quadratic bound of −½.
    Lateral layout with d = 0: visibility masks part of the sphere, values are
    independent of the head pose."""
    W = 720
    field = fixed(50.0, incl, decl)
    lay = _lateral(d=0.0)
    f = renderer.render_pattern(field, Pose(yaw, 0.0, 0.0), lay, Legendre([0.0, 0.0, 1.0]),
                                WorldPanorama(W))
    az, el = WorldPanorama(W).pixel_azel()
    pred = np.degrees(np.arctan(np.cos(np.radians(az - decl)) / np.tan(np.radians(incl))))
    checked = 0
    for j in range(0, W, 7):
        col = f[:, j]
        ip = int(np.argmin(np.abs(el - pred[j])))
        if np.isnan(col[max(ip - 3, 0):ip + 4]).any():
            continue  # contour not seen (or at the edge of the field) in this column
        i = int(np.nanargmin(col))
        assert abs(el[i] - pred[j]) <= 180.0 / (W // 2) + 1e-9
        # |dθ| ≤ half a row (0.25°) plus the great circle's slope: f + ½ ≤ (3/2)·δ²
        assert col[i] + 0.5 <= 1.5 * np.radians(0.5) ** 2
        checked += 1
    assert checked > 30


@pytest.mark.parametrize("alignment", [None, ChiefRay(), Tilt(tilt_deg=30.0), FullFrame()],
                         ids=["normal", "chief-ray", "tilt", "full"])
def test_no_heading_information_at_inclination_90(alignment):
    """With a vertical field (I = 90°) the field in the head frame is the same for every
    heading, so the animal's pattern carries no heading information (orientation is lost
    near 90° inclination; e.g. blackcaps, J. Exp. Biol. 218:206).  The head panorama is
    identical across yaws for any eye; the world panorama of the all-around d = 0 eye is
    identical too, and a lateral eye's world panorama is only shifted with the head (by
    whole pixels here)."""
    vertical = FieldVector(np.array([0.0, 0.0, 50e-6]), model="fixed")
    resp = EvenXY() if isinstance(alignment, FullFrame) else Legendre([0.6, 0.0, 0.2])
    lay = _lateral(alignment=alignment)
    W = 360
    ref_head = renderer.render_pattern(vertical, Pose(0, 0, 0), lay, resp, HeadPanorama(W))
    ref_world = renderer.render_pattern(vertical, Pose(0, 0, 0), lay, resp, WorldPanorama(W))
    for yaw in (37.0, 123.0, -71.0):
        np.testing.assert_allclose(
            renderer.render_pattern(vertical, Pose(yaw, 0, 0), lay, resp, HeadPanorama(W)),
            ref_head, atol=1e-12, equal_nan=True)
        world = renderer.render_pattern(vertical, Pose(yaw, 0, 0), lay, resp, WorldPanorama(W))
        np.testing.assert_allclose(world, np.roll(ref_world, int(yaw), axis=1), atol=1e-9,
                                   equal_nan=True)
    sphere = load_layout("all-around")
    a = renderer.render_pattern(vertical, Pose(0, 0, 0), sphere, resp, WorldPanorama(W))
    b = renderer.render_pattern(vertical, Pose(77.0, 0, 0), sphere, resp, WorldPanorama(W))
    np.testing.assert_allclose(a, b, atol=1e-12)
