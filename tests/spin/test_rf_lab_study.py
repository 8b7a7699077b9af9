"""A study with a lab-fixed RF coil: each receptor reads the static and the RF direction in
its own frame.

Reference: the project's Floquet solver evaluated directly for single receptors
(:func:`renderer.spin.rf.floquet_singlet_yield`, itself checked against QuTiP 5
``mesolve`` time-dependent propagation in tests/spin/test_rf_lab.py; Johansson, Nation &
Nori 2013, Comput. Phys. Commun. 184:1234), at the static and RF directions rotated into
each receptor's molecular frame: world NED -> head (the pose) -> eye (the layout) ->
molecular axes of the full-frame alignment.  The tolerance 1e-7 is the table's fit
truncation, checked against the same solver at random geometries in test_rf_lab.py
(asserted residual < 1e-7 at the nodes).
"""

import json
import os
import textwrap

import numpy as np
import pytest

from renderer import kernels, pipeline
from renderer.errors import ConfigError
from renderer.field import fixed
from renderer.pose import Pose
from renderer.response.rf_lab_response import LabRFResponse
from renderer.response.rf_lab_table import compute_lab_table
from renderer.spin import Nucleus, Radical, RadicalPair
from renderer.spin.rf import RFField, floquet_singlet_yield
from renderer.study import load_study
from renderer.study.build import build_resources
from renderer.study.runner import run_study
from conftest import random_tensor

B0_UT, INC = 50.0, 60.0
RF_NT, RF_MHZ = 5000.0, 3.0

STUDY = """
[study]
name = "lab-rf"
seed = 2

[field]
model = "fixed"
total_uT = 50.0
inclination_deg = 60.0

[layout]
preset = "lateral"
alignment = {alignment}

[responses.coil]
kind = "rf-lab-table"
path = "lab.npz"

[views.world]
kind = "world-panorama"
width = 32

[scene]
kind = "uniform"
luminance = 0.5

[render]
gain = 2.0

[sequence]
kind = "still"
frames = 3
fps = 1.0

[timeline]
steps = [
  {t_s = 1.0, action = "rf-on", select = "coil", direction = [0.0, 1.0, 0.0]},
  {t_s = 2.0, action = "rf-on", select = "coil", direction = [1.0, 0.0, -1.0]},
]

[output]
png8 = false
png16 = true
"""


@pytest.fixture(scope="module")
def lab(tmp_path_factory):
    """The general pair of test_rf_lab.py (one anisotropic spin-1/2, ~1 mT, k = 2e7 s⁻¹) and
    its lab table at 50 µT with 5 µT at 3 MHz, saved where the study finds it."""
    rng = np.random.default_rng(11)
    pair = RadicalPair(Radical([Nucleus(0.5, random_tensor(rng, 1.0))]), Radical(),
                       k_s=2e7, k_t=2e7)
    table = compute_lab_table(pair, B0_UT * 1e-6, RF_NT * 1e-9, RF_MHZ * 1e6, lmax_static=8,
                              lmax_rf=2)
    assert table.residual_max < 1e-7
    d = tmp_path_factory.mktemp("lab")
    table.save(str(d / "lab.npz"))
    return pair, d


def _study(d, alignment='"full-frame"', name="s.toml"):
    p = d / name
    p.write_text(textwrap.dedent(STUDY).replace("{alignment}", alignment), encoding="utf-8")
    return p


def _read16(path):
    """16-bit samples as stored (pypng; imageio's default plugin reduces them to 8 bits)."""
    import png

    w, h, rows, info = png.Reader(filename=str(path)).read()
    return np.vstack([np.asarray(r, np.uint16) for r in rows]).reshape(h, w, -1)


def _direct(pair, inputs, eye, dirs_head, rf_ned):
    """Φ_S of single receptors by a direct Floquet solve at their molecular-frame fields."""
    p = inputs.eye_params[eye]
    u = dirs_head @ inputs.R_eye_head[eye].T
    a, e1, e2 = kernels.receptor_frames_numpy(u, p)
    x, y, z = kernels.mode_axes_numpy(p, a, e1, e2)
    b_ned = fixed(B0_UT, INC, 0.0).ned_T
    b_eye = inputs.R_eye_head[eye] @ inputs.R_head_world @ (b_ned / np.linalg.norm(b_ned))
    r = np.asarray(rf_ned, float) / np.linalg.norm(rf_ned)
    r_eye = inputs.R_eye_head[eye] @ inputs.R_head_world @ r
    out = []
    for k in range(len(u)):
        M = np.stack([x[k], y[k], z[k]])
        out.append(floquet_singlet_yield(pair, B0_UT * 1e-6 * (M @ b_eye),
                                         RFField(RF_NT * 1e-9, RF_MHZ * 1e6, M @ r_eye)))
    return np.array(out)


def test_study_frames_read_the_lab_rf_direction_per_receptor(lab):
    """Frames 1 and 2 switch the coil on along east, then along north-up; the signal the
    study renders at sample receptors of one eye equals a direct Floquet solve at each
    receptor's own static and RF directions (1e-7), the two coil directions give different
    frames, and each frame's labels record the coil direction."""
    pair, d = lab
    st = _study(d)
    study = load_study(st)
    out = d / "out"
    run_study(str(st), str(out), progress=False)
    res = build_resources(study.resolved, study.base_dir)
    layout, view = res.layout, res.views["world"]
    dirs_world = view.directions(layout).reshape(-1, 3)
    field = fixed(B0_UT, INC, 0.0)
    pose = Pose(0.0)
    for rf_ned in ([0.0, 1.0, 0.0], [1.0, 0.0, -1.0]):
        resp = res.responses["coil"].with_rf(rf_ned)
        inputs = pipeline.prepare(field, pose, layout, resp, "singlet")
        dirs_head = dirs_world @ inputs.R_head_world.T
        for eye in range(len(layout.eyes)):
            sig = pipeline.lab_signal(inputs, dirs_head, pick=eye)
            seen = np.nonzero(np.isfinite(sig))[0]
            assert len(seen) > 20
            pick = seen[np.linspace(0, len(seen) - 1, 3).astype(int)]
            ref = _direct(pair, inputs, eye, dirs_head[pick], rf_ned)
            np.testing.assert_allclose(sig[pick], ref, rtol=0, atol=1e-7)
    f = [_read16(out / f"frames/shot000/world_{k:04d}_lin16.png") for k in range(3)]
    assert not np.array_equal(f[1], f[2]) and not np.array_equal(f[0], f[1])
    from PIL import Image

    for k, want in ((1, [0.0, 1.0, 0.0]), (2, [2 ** -0.5, 0.0, -(2 ** -0.5)])):
        with Image.open(out / f"frames/shot000/world_{k:04d}_lin16.png") as im:
            params = json.loads(im.text["magretina parameters"])
        assert params["response"]["kind"] == "rf-lab-table"
        np.testing.assert_allclose(params["response"]["rf_direction_ned"], want, atol=1e-12)
    # The frame files are what the library renders for that frame, bit for bit.
    resp = LabRFResponse(str(d / "lab.npz")).with_rf([0.0, 1.0, 0.0])
    img = pipeline.render(field, pose, layout, resp, view.wrapped, scene=res.scene, gain=2.0)
    from renderer.composite import to_uint16_linear

    np.testing.assert_array_equal(f[1], to_uint16_linear(img))


def test_in_plane_average_is_the_mean_over_the_angle(lab):
    """With receptors free to turn about their axis (normal alignment) the signal is the
    mean over the in-plane angle: the same receptors read with a full-frame alignment at
    in-plane angles 0, 15, ..., 345 degrees and averaged give it to 1e-12 (round-off).  The
    renderer averages 12 angles (L0 + L1 + 2); 24 agree only because the expansion's
    in-plane Fourier orders stop at L0 + L1 = 10."""
    pair, d = lab
    from renderer.eye import load_layout
    from renderer.views import HeadPanorama

    field, pose = fixed(B0_UT, INC, 0.0), Pose(20.0)
    resp = LabRFResponse(str(d / "lab.npz")).with_rf([0.3, 0.9, 0.1])
    dirs = HeadPanorama(24).directions().reshape(-1, 3)
    avg = pipeline.lab_signal(pipeline.prepare(field, pose, load_layout("lateral"), resp), dirs)
    acc = 0.0
    for psi in range(0, 360, 15):
        lay = load_layout("lateral").with_alignment({"mode": "full-frame",
                                                     "in_plane_deg": float(psi)})
        acc = acc + pipeline.lab_signal(pipeline.prepare(field, pose, lay, resp), dirs)
    np.testing.assert_allclose(avg, acc / 24, rtol=0, atol=1e-12, equal_nan=True)
    assert np.isfinite(avg).sum() > 50


@pytest.mark.parametrize("edit, needle", [
    (lambda t: t.replace(', direction = [0.0, 1.0, 0.0]', ''), "direction: missing"),
    (lambda t: t.replace('action = "rf-on", select = "coil", direction = [0.0, 1.0, 0.0]',
                         'action = "response", select = "coil"'), "select it with action"),
    (lambda t: t.replace('direction = [0.0, 1.0, 0.0]', 'direction = [0.0, 0.0, 0.0]'),
     "not all 0"),
    (lambda t: t.replace('path = "lab.npz"', 'path = "none.npz"'), "responses.coil.path"),
    (lambda t: t + '\n[response]\nkind = "rf-lab-table"\npath = "lab.npz"\n',
     "response.kind = 'rf-lab-table'"),
])
def test_bad_lab_rf_studies_are_refused_in_validation(lab, edit, needle):
    pair, d = lab
    p = d / "bad.toml"
    p.write_text(edit(_study(d).read_text()), encoding="utf-8")
    with pytest.raises(ConfigError) as e:
        load_study(p)
    assert needle in str(e.value)


def test_alignment_that_cannot_read_a_lab_table_is_refused(lab):
    pair, d = lab
    from renderer.errors import MagretinaError
    from renderer.eye import load_layout

    resp = LabRFResponse(str(d / "lab.npz")).with_rf([0.0, 1.0, 0.0])
    lay = load_layout("lateral").with_alignment({"mode": "tilt", "tilt_deg": 30.0})
    with pytest.raises(MagretinaError, match="cannot read a lab-fixed RF table"):
        pipeline.prepare(fixed(B0_UT, INC, 0.0), Pose(0.0), lay, resp)
    assert os.path.isfile(d / "lab.npz")
