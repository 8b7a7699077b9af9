"""Frame series within one shot: poses, sites and laboratory field changes over time.

A sequence turns the shot's base pose and site into a :class:`FrameSeries`, the
per-frame time, head pose, site and presented field.  Kinds (``SEQUENCES``):

* ``still``: ``frames`` copies of the base pose at ``fps``;
* ``heading-sweep``: yaw from ``start_deg`` to ``stop_deg`` (excluded, as in
  Python's ``range``) by ``step_deg``;
* ``head-scan``: yaw(t) = mean + amplitude·sin(2πt/period + phase), optional pitch
  oscillation of its own amplitude, sampled at ``fps`` for ``duration_s``;
* ``route``: a CSV (``time_s, lat_deg, lon_deg[, alt_km, heading_deg]``) or a
  great-circle leg between two sites at ``speed_m_s``; the field is re-evaluated at
  every point (IGRF in one vectorised call), the head points along the track
  unless the CSV gives headings.

The ``[timeline]`` table then applies laboratory coil steps by frame time
(``TIMELINE_ACTIONS``): ``rotate`` the horizontal component by ``angle_deg``
(clockwise seen from above, i.e. magnetic north moves toward east), ``invert``
the vertical component, ``scale`` by ``factor``, ``zero`` the field, ``ambient``
(back to the unmanipulated field), ``response`` (switch the receptor response to
a named ``[responses.NAME]`` table), and ``rf-on`` / ``rf-off``: a radio-frequency
field switched on selects the response table computed with it (``select``, a
``[responses.NAME]`` entry) and records its ``amplitude_nT``, ``frequency_MHz``
and ``direction`` (checked with :class:`renderer.spin.rf.RFField`); off returns to
the default response.  When the selected entry is a lab-fixed RF table
(``kind = "rf-lab-table"``) the step's ``direction`` (world NED) is required and
is carried per frame (``FrameSeries.extra["rf_ned"]``), so each receptor reads the
static and the RF direction in its own frame.  Steps compose in time order; ``ambient`` resets the coil
manipulations (not the RF state).  Adding an action is one entry in
``STEP_KEYS`` and one in ``TIMELINE_ACTIONS``.  Nothing here renders.

Adding a sequence kind: write ``_kind(cfg, ctx) -> FrameSeries`` and its key schema
and add both to ``SEQUENCES``.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import MagretinaError
from ..frames import azel_to_vec, vec_to_azel_rad
from ..spin.rf import RFField
from .schema import REQUIRED, Key, check_table, resolve_path
from ..inputs import read_csv_rows

#: Mean Earth radius R1 (IUGG; Moritz 2000, Geodetic Reference System 1980), m.
EARTH_RADIUS_M = 6371008.8
MAX_FRAMES = 1_000_000


@dataclass(frozen=True)
class FrameSeries:
    """Per-frame inputs of one shot (n frames).

    Attributes
    ----------
    t_s : (n,) seconds from the start of the shot
    yaw_deg, pitch_deg, roll_deg : (n,) head pose
    lat_deg, lon_deg, alt_km : (n,) site of each frame (NaN for a fixed field)
    ambient_ned_T : (n, 3) natural field, NED tesla
    b_ned_T : (n, 3) presented field after laboratory manipulations
    response : tuple of n str, which response table each frame uses ("default")
    coil : tuple of n str, a label of the coil state
    """

    t_s: np.ndarray
    yaw_deg: np.ndarray
    pitch_deg: np.ndarray
    roll_deg: np.ndarray
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    alt_km: np.ndarray
    ambient_ned_T: np.ndarray | None = None
    b_ned_T: np.ndarray | None = None
    response: tuple = ()
    coil: tuple = ()
    extra: dict = field(default_factory=dict)

    def __len__(self):
        return int(self.t_s.shape[0])


# ---------------------------------------------------------------------------- schemas
_FPS = Key(float, 10.0, lo=0.0, hi=1000.0, lo_open=True, unit="frames per second")
SEQUENCE_KEYS = {
    "still": {"frames": Key(int, 1, lo=1, hi=MAX_FRAMES), "fps": _FPS},
    "heading-sweep": {
        "start_deg": Key(float, 0.0, lo=-3600.0, hi=3600.0, unit="degrees"),
        "stop_deg": Key(float, 360.0, lo=-3600.0, hi=3600.0, unit="degrees (excluded)"),
        "step_deg": Key(float, REQUIRED, lo=-360.0, hi=360.0, unit="degrees, not 0"),
        "fps": _FPS,
    },
    "head-scan": {
        "amplitude_deg": Key(float, REQUIRED, lo=0.0, hi=180.0, unit="degrees"),
        "period_s": Key(float, REQUIRED, lo=0.0, hi=1e6, lo_open=True, unit="s"),
        "fps": Key(float, REQUIRED, lo=0.0, hi=1000.0, lo_open=True, unit="frames per second"),
        "duration_s": Key(float, None, lo=0.0, hi=1e6, lo_open=True, unit="s"),
        "mean_heading_deg": Key(float, None, lo=-360.0, hi=360.0, unit="degrees"),
        "phase_deg": Key(float, 0.0, lo=-360.0, hi=360.0, unit="degrees"),
        "pitch_amplitude_deg": Key(float, 0.0, lo=0.0, hi=90.0, unit="degrees"),
    },
    "route": {
        "csv": Key(str, None),
        "from": Key(dict, None),
        "to": Key(dict, None),
        "speed_m_s": Key(float, None, lo=0.0, hi=1e5, lo_open=True, unit="m/s"),
        "fps": Key(float, None, lo=0.0, hi=1000.0, lo_open=True, unit="frames per second"),
        "yaw_offset_deg": Key(float, 0.0, lo=-360.0, hi=360.0, unit="degrees"),
    },
}
_WAYPOINT = {"name": Key(str, ""), "lat_deg": Key(float, REQUIRED, lo=-90.0, hi=90.0),
             "lon_deg": Key(float, REQUIRED, lo=-180.0, hi=360.0),
             "alt_km": Key(float, 0.0, lo=-10.0, hi=1000.0)}

STEP_KEYS = {
    "rotate": {"angle_deg": Key(float, REQUIRED, lo=-360.0, hi=360.0, unit="degrees")},
    "invert": {},
    "scale": {"factor": Key(float, REQUIRED, lo=0.0, hi=1e4, unit="x ambient")},
    "zero": {},
    "ambient": {},
    "response": {"select": Key(str, REQUIRED)},
    # RF on: switch to the response table computed with the oscillating field on
    # (a [responses.NAME] entry); the RF parameters are recorded and checked with
    # renderer.spin.rf.RFField.  RF off: back to the default response.
    "rf-on": {"select": Key(str, REQUIRED),
              "amplitude_nT": Key(float, None, lo=0.0, hi=1e9, unit="nT"),
              "frequency_MHz": Key(float, None, lo=0.0, hi=1e6, lo_open=True, unit="MHz"),
              "direction": Key(list, None)},
    "rf-off": {},
}


def check_sequence(tbl, base_dir, problems) -> dict:
    """Validate ``[sequence]``; returns it resolved (``kind`` defaults to still)."""
    if not isinstance(tbl, dict):
        problems.append("sequence: must be a table")
        return {"kind": "still"}
    kind = tbl.get("kind", "still")
    if kind not in SEQUENCE_KEYS:
        problems.append(f"sequence.kind = {kind!r}: allowed {', '.join(map(repr, SEQUENCE_KEYS))}")
        return dict(tbl)
    rest = {k: v for k, v in tbl.items() if k != "kind"}
    out = {"kind": kind, **check_table("sequence", rest, SEQUENCE_KEYS[kind], problems)}
    if kind == "heading-sweep" and out.get("step_deg") == 0:
        problems.append("sequence.step_deg = 0: must not be 0")
    if kind == "route":
        has_csv = out.get("csv") is not None
        has_leg = out.get("from") is not None or out.get("to") is not None
        if has_csv == has_leg:
            problems.append("sequence: a route needs either csv = \"points.csv\" or both from = "
                            "{lat_deg, lon_deg} and to = {lat_deg, lon_deg}")
        if has_csv:
            p = resolve_path(base_dir, out["csv"])
            if not os.path.isfile(p):
                problems.append(f"sequence.csv = {out['csv']!r}: no such file (looked for {p})")
            for k in ("speed_m_s", "fps"):
                if out.get(k) is not None:
                    problems.append(f"sequence.{k}: only for a great-circle leg (the CSV gives "
                                    f"the times)")
        if has_leg:
            for end in ("from", "to"):
                if out.get(end) is None:
                    problems.append(f"sequence.{end}: missing (a leg needs from and to)")
                else:
                    out[end] = check_table(f"sequence.{end}", out[end], _WAYPOINT, problems)
            for k in ("speed_m_s", "fps"):
                if k not in rest:
                    problems.append(f"sequence.{k}: missing (required for a great-circle leg)")
    return out


def check_timeline(tbl, response_names, problems, lab_names=()) -> dict:
    """Validate ``[timeline]``: ``steps`` is an array of {t_s, action, ...}.

    ``lab_names``: the ``[responses.NAME]`` entries that are lab-fixed RF tables; only an
    ``rf-on`` step with the coil's ``direction`` (world NED, 3 finite numbers, not all 0)
    may select one."""
    if not isinstance(tbl, dict):
        problems.append("timeline: must be a table")
        return {"steps": []}
    for k in tbl:
        if k != "steps":
            problems.append(f"timeline.{k}: unknown key; allowed: steps")
    steps = tbl.get("steps", [])
    if not isinstance(steps, list):
        problems.append("timeline.steps: must be an array of tables")
        return {"steps": []}
    out = []
    last = -math.inf
    for i, st in enumerate(steps):
        path = f"timeline.steps[{i}]"
        if not isinstance(st, dict):
            problems.append(f"{path}: must be a table {{t_s = ..., action = ...}}")
            continue
        action = st.get("action")
        if action not in TIMELINE_ACTIONS:
            problems.append(f"{path}.action = {action!r}: allowed "
                            f"{', '.join(map(repr, TIMELINE_ACTIONS))}")
            continue
        schema = {"t_s": Key(float, REQUIRED, lo=0.0, unit="s"),
                  "action": Key(str, REQUIRED), **STEP_KEYS[action]}
        s = check_table(path, st, schema, problems)
        if action == "rf-on" and (s.get("amplitude_nT") is not None
                                  or s.get("frequency_MHz") is not None):
            rf = _check_rf(path, s, problems)
            if rf is not None:
                s = {**s, "rf": rf}
        if s.get("select") in lab_names:
            _check_lab_step(path, action, s, problems)
        if action in ("response", "rf-on") and s.get("select") is not None and \
                s["select"] != "default" and s["select"] not in response_names:
            problems.append(f"{path}.select = {s['select']!r}: allowed 'default'"
                            + "".join(f", {n!r}" for n in sorted(response_names))
                            + " (define alternatives as [responses.NAME])")
        t = s.get("t_s")
        if isinstance(t, (int, float)):
            if t < last:
                problems.append(f"{path}.t_s = {t!r}: steps must be in time order "
                                f"(previous step at {last:g} s)")
            last = t
        out.append(s)
    return {"steps": out}


def _check_lab_step(path, action, s, problems):
    """A step selecting a lab-fixed RF table: rf-on with the coil direction."""
    if action != "rf-on":
        problems.append(f"{path}.select = {s['select']!r}: a lab-fixed RF table; select it with "
                        f"action = 'rf-on' and the coil's direction = [north, east, down]")
        return
    d = s.get("direction")
    if d is None:
        problems.append(f"{path}.direction: missing; rf-on selecting the lab-fixed RF table "
                        f"{s['select']!r} needs the RF coil's direction in the world frame, "
                        f"[north, east, down] (any length, not 0)")
        return
    if not (isinstance(d, list) and len(d) == 3
            and all(isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)
                    for x in d) and any(x != 0 for x in d)):
        problems.append(f"{path}.direction = {d!r}: must be 3 finite numbers [north, east, "
                        f"down], not all 0")


def _check_rf(path, s, problems):
    """The RF field of an ``rf-on`` step as :meth:`RFField.describe` gives it, or None
    (with a problem appended) when it is incomplete or out of range; ``s`` is not changed."""
    if s.get("amplitude_nT") is None or s.get("frequency_MHz") is None:
        problems.append(f"{path}: give both amplitude_nT and frequency_MHz (or neither)")
        return None
    try:
        rf = RFField.from_trade_units(s["amplitude_nT"], s["frequency_MHz"],
                                      direction=tuple(s.get("direction") or (1.0, 0.0, 0.0)))
    except (MagretinaError, TypeError, ValueError) as exc:
        problems.append(f"{path}: {exc}")
        return None
    return rf.describe()


# ---------------------------------------------------------------------------- building
@dataclass(frozen=True)
class SequenceContext:
    """What a sequence needs from the rest of the shot."""

    pose: dict
    site: dict | None
    base_dir: str


def _frames(n, fps):
    if n > MAX_FRAMES:
        raise MagretinaError(f"sequence: {n} frames; at most {MAX_FRAMES} per shot")
    return np.arange(n) / float(fps)


def _const(n, v):
    return np.full(n, float(v))


def _site_arrays(ctx, n):
    if ctx.site is None:
        return _const(n, np.nan), _const(n, np.nan), _const(n, np.nan)
    s = ctx.site
    return _const(n, s["lat_deg"]), _const(n, s["lon_deg"]), _const(n, s["alt_km"])


def _still(cfg, ctx):
    n = int(cfg["frames"])
    p = ctx.pose
    return FrameSeries(_frames(n, cfg["fps"]), _const(n, p["yaw_deg"]), _const(n, p["pitch_deg"]),
                       _const(n, p["roll_deg"]), *_site_arrays(ctx, n))


def sweep_count(start, stop, step) -> int:
    """Number of values of ``start + k·step`` before ``stop`` (excluded); 1e-9 slack."""
    n = math.ceil((stop - start) / step - 1e-9)
    return max(0, int(n))


def _heading_sweep(cfg, ctx):
    n = sweep_count(cfg["start_deg"], cfg["stop_deg"], cfg["step_deg"])
    if n == 0:
        raise MagretinaError(f"sequence: heading sweep from {cfg['start_deg']:g} to "
                             f"{cfg['stop_deg']:g} by {cfg['step_deg']:g} has no frames")
    yaw = cfg["start_deg"] + cfg["step_deg"] * np.arange(n)
    p = ctx.pose
    return FrameSeries(_frames(n, cfg["fps"]), yaw, _const(n, p["pitch_deg"]),
                       _const(n, p["roll_deg"]), *_site_arrays(ctx, n))


def _head_scan(cfg, ctx):
    duration = cfg["duration_s"] if cfg.get("duration_s") is not None else cfg["period_s"]
    n = max(1, int(math.floor(duration * cfg["fps"] + 1e-9)))
    t = _frames(n, cfg["fps"])
    p = ctx.pose
    mean = cfg["mean_heading_deg"] if cfg.get("mean_heading_deg") is not None else p["yaw_deg"]
    phase = 2 * np.pi * t / cfg["period_s"] + np.radians(cfg["phase_deg"])
    yaw = mean + cfg["amplitude_deg"] * np.sin(phase)
    pitch = p["pitch_deg"] + cfg["pitch_amplitude_deg"] * np.sin(phase)
    if np.any(np.abs(pitch) > 90.0):
        raise MagretinaError(f"sequence: pose.pitch_deg + pitch_amplitude_deg reaches "
                             f"{np.abs(pitch).max():g} degrees; allowed [-90, 90]")
    return FrameSeries(t, yaw, pitch, _const(n, p["roll_deg"]), *_site_arrays(ctx, n))


def great_circle(lat1, lon1, lat2, lon2, fractions):
    """Points and forward azimuths along the great circle between two sites.

    Parameters
    ----------
    lat1, lon1, lat2, lon2 : float, degrees (spherical Earth)
    fractions : (n,) positions along the leg in [0, 1]

    Returns
    -------
    lat_deg, lon_deg, azimuth_deg : (n,) each; azimuth clockwise from north in [0, 360).
    distance_m : float, the leg length on a sphere of radius EARTH_RADIUS_M.
    """
    # geocentric Earth-fixed vectors, z towards the north pole: the frames' direction
    # helpers with their z (down) negated, longitude as azimuth and latitude as elevation
    up = np.array([1.0, 1.0, -1.0])
    a, b = azel_to_vec(lon1, lat1) * up, azel_to_vec(lon2, lat2) * up
    omega = math.atan2(np.linalg.norm(np.cross(a, b)), float(np.dot(a, b)))
    if omega < 1e-12:
        raise MagretinaError("sequence: route from and to are the same place")
    if abs(omega - math.pi) < 1e-9:
        raise MagretinaError("sequence: route ends are antipodal; the great circle is undefined")
    f = np.asarray(fractions, float)[:, None]
    pts = (np.sin((1 - f) * omega) * a + np.sin(f * omega) * b) / math.sin(omega)
    lon, lat = vec_to_azel_rad(pts * up)
    # Direction of motion: d(pts)/df, defined everywhere on the leg (ends included).
    vel = (-np.cos((1 - f) * omega) * a + np.cos(f * omega) * b)
    north = np.stack([-np.sin(lat) * np.cos(lon), -np.sin(lat) * np.sin(lon), np.cos(lat)], -1)
    east = np.stack([-np.sin(lon), np.cos(lon), np.zeros_like(lon)], -1)
    az = np.degrees(np.arctan2(np.sum(vel * east, 1), np.sum(vel * north, 1))) % 360.0
    return np.degrees(lat), np.degrees(lon), az, omega * EARTH_RADIUS_M


def bearings(lat_deg, lon_deg):
    """Initial great-circle bearing from each point to the next (last repeats), degrees
    in [0, 360)."""
    lat = np.radians(np.asarray(lat_deg, float))
    lon = np.radians(np.asarray(lon_deg, float))
    if lat.size < 2:
        return np.zeros_like(lat)
    dl = lon[1:] - lon[:-1]
    y = np.sin(dl) * np.cos(lat[1:])
    x = np.cos(lat[:-1]) * np.sin(lat[1:]) - np.sin(lat[:-1]) * np.cos(lat[1:]) * np.cos(dl)
    b = np.degrees(np.arctan2(y, x)) % 360.0
    return np.concatenate([b, b[-1:]])


ROUTE_COLUMNS = ("time_s", "lat_deg", "lon_deg", "alt_km", "heading_deg")


def read_route_csv(path):
    """Read a route CSV; returns a dict of (n,) arrays (alt_km/heading_deg may be None)."""
    cols = {c: [] for c in ROUTE_COLUMNS}
    rows = [r for r in read_csv_rows(path, "route") if r and not r[0].lstrip().startswith("#")]
    if not rows:
        raise MagretinaError(f"route {path}: empty")
    header = [h.strip() for h in rows[0]]
    for h in header:
        if h not in ROUTE_COLUMNS:
            raise MagretinaError(f"route {path}: unknown column {h!r}; allowed: "
                                 f"{', '.join(ROUTE_COLUMNS)}")
    for need in ("time_s", "lat_deg", "lon_deg"):
        if need not in header:
            raise MagretinaError(f"route {path}: missing column {need!r} (header: "
                                 f"{', '.join(header)})")
    for lineno, row in enumerate(rows[1:], start=2):
        if len(row) != len(header):
            raise MagretinaError(f"route {path}: line {lineno}: {len(row)} cells, header has "
                                 f"{len(header)}")
        for h, cell in zip(header, row):
            try:
                cols[h].append(float(cell))
            except ValueError:
                raise MagretinaError(f"route {path}: line {lineno}: {h} = {cell!r} is not a "
                                     f"number") from None
    n = len(cols["time_s"])
    if n < 1:
        raise MagretinaError(f"route {path}: no points")
    out = {h: (np.array(cols[h]) if h in header else None) for h in ROUTE_COLUMNS}
    t = out["time_s"]
    if np.any(np.diff(t) <= 0):
        i = int(np.argmax(np.diff(t) <= 0)) + 3
        raise MagretinaError(f"route {path}: line {i}: time_s must increase strictly")
    bad = np.abs(out["lat_deg"]) > 90
    if bad.any():
        raise MagretinaError(f"route {path}: line {int(np.argmax(bad)) + 2}: lat_deg = "
                             f"{out['lat_deg'][bad][0]:g} out of range; allowed [-90, 90]")
    if out["alt_km"] is not None and np.any((out["alt_km"] < -10) | (out["alt_km"] > 1000)):
        raise MagretinaError(f"route {path}: alt_km out of range; allowed [-10, 1000] km")
    return out


def _route(cfg, ctx):
    p = ctx.pose
    if cfg.get("csv"):
        r = read_route_csv(resolve_path(ctx.base_dir, cfg["csv"]))
        t = r["time_s"] - r["time_s"][0]
        lat, lon = r["lat_deg"], (r["lon_deg"] + 180.0) % 360.0 - 180.0
        alt = r["alt_km"] if r["alt_km"] is not None else np.zeros_like(lat)
        heading = r["heading_deg"] if r["heading_deg"] is not None else bearings(lat, lon)
    else:
        a, b = cfg["from"], cfg["to"]
        lat_, lon_, _, dist = great_circle(a["lat_deg"], a["lon_deg"], b["lat_deg"], b["lon_deg"],
                                           [0.0, 1.0])
        duration = dist / cfg["speed_m_s"]
        n = int(math.floor(duration * cfg["fps"] + 1e-9)) + 1
        t = _frames(n, cfg["fps"])
        frac = np.minimum(t / duration, 1.0)
        lat, lon, heading, _ = great_circle(a["lat_deg"], a["lon_deg"], b["lat_deg"],
                                            b["lon_deg"], frac)
        alt = a["alt_km"] + (b["alt_km"] - a["alt_km"]) * frac
    n = len(t)
    _frames(n, 1.0)
    yaw = heading + cfg["yaw_offset_deg"]
    return FrameSeries(np.asarray(t, float), np.asarray(yaw, float), _const(n, p["pitch_deg"]),
                       _const(n, p["roll_deg"]), np.asarray(lat, float), np.asarray(lon, float),
                       np.asarray(alt, float))


SEQUENCES = {
    "still": _still,
    "heading-sweep": _heading_sweep,
    "head-scan": _head_scan,
    "route": _route,
}


# ---------------------------------------------------------------------------- timeline
@dataclass(frozen=True)
class CoilState:
    """Laboratory state: rotation of H (deg), sign of Z, scale, zero flag, response."""

    rotate_deg: float = 0.0
    vertical_sign: float = 1.0
    scale: float = 1.0
    zero: bool = False
    response: str = "default"
    rf: str = ""
    #: The RF coil's direction (world NED, unit) of the rf-on step in force, () if none.
    rf_dir: tuple = ()

    def label(self) -> str:
        if self == CoilState():
            return "ambient"
        parts = []
        if self.zero:
            parts.append("zero")
        else:
            if self.rotate_deg % 360.0:
                parts.append(f"rotate{self.rotate_deg % 360.0:g}")
            if self.vertical_sign < 0:
                parts.append("invert")
            if self.scale != 1.0:
                parts.append(f"scale{self.scale:g}")
        if self.rf:
            parts.append(f"rf:{self.rf}")
        elif self.response != "default":
            parts.append(f"response:{self.response}")
        return "+".join(parts) or "ambient"

    def apply(self, ned_T):
        """The presented field for ambient ``ned_T`` (..., 3)."""
        b = np.array(ned_T, float)
        if self.zero:
            return np.zeros_like(b)
        c, s = math.cos(math.radians(self.rotate_deg)), math.sin(math.radians(self.rotate_deg))
        x, y = b[..., 0].copy(), b[..., 1].copy()
        b[..., 0] = c * x - s * y
        b[..., 1] = s * x + c * y
        b[..., 2] *= self.vertical_sign
        return b * self.scale


TIMELINE_ACTIONS = {
    "rotate": lambda st, step: replace(st, rotate_deg=st.rotate_deg + step["angle_deg"]),
    "invert": lambda st, step: replace(st, vertical_sign=-st.vertical_sign),
    "scale": lambda st, step: replace(st, scale=st.scale * step["factor"]),
    "zero": lambda st, step: replace(st, zero=True),
    "ambient": lambda st, step: replace(CoilState(), response=st.response, rf=st.rf,
                                        rf_dir=st.rf_dir),
    "response": lambda st, step: replace(st, response=step["select"], rf="", rf_dir=()),
    "rf-on": lambda st, step: replace(st, response=step["select"], rf=step["select"],
                                      rf_dir=_unit_dir(step.get("direction"))),
    "rf-off": lambda st, step: replace(st, response="default", rf="", rf_dir=()),
}


def _unit_dir(d) -> tuple:
    if not d:
        return ()
    v = np.asarray(d, float)
    n = float(np.linalg.norm(v))
    return tuple(float(x) for x in v / n) if n > 0 and np.all(np.isfinite(v)) else ()


def coil_states(t_s, steps):
    """The CoilState in force at each time (steps at t_s <= t apply)."""
    states = []
    st = CoilState()
    k = 0
    for t in np.asarray(t_s, float):
        while k < len(steps) and steps[k]["t_s"] <= t + 1e-9:
            st = TIMELINE_ACTIONS[steps[k]["action"]](st, steps[k])
            k += 1
        states.append(st)
    return states


def apply_field(fs: FrameSeries, ambient_ned_T, timeline_cfg) -> FrameSeries:
    """Attach the ambient field (n, 3) and the timeline's presented field to ``fs``."""
    ambient = np.asarray(ambient_ned_T, float).reshape(len(fs), 3)
    states = coil_states(fs.t_s, timeline_cfg.get("steps", []))
    b = np.stack([s.apply(v) for s, v in zip(states, ambient)]) if len(fs) else ambient
    extra = fs.extra
    if any(s.rf_dir for s in states):
        # the RF coil's direction per frame (NaN where no rf-on step with one is in force)
        extra = {**extra, "rf_ned": np.array([s.rf_dir or (np.nan,) * 3 for s in states])}
    return replace(fs, ambient_ned_T=ambient, b_ned_T=b,
                   response=tuple(s.response for s in states),
                   coil=tuple(s.label() for s in states), extra=extra)


def build_series(seq_cfg, timeline_cfg, ctx: SequenceContext, field_fn) -> FrameSeries:
    """Frames of one shot with the field evaluated and the timeline applied.

    ``field_fn(lat (n,), lon (n,), alt (n,)) -> (n, 3)`` evaluates the ambient field
    at all frames at once.
    """
    fs = SEQUENCES[seq_cfg["kind"]](seq_cfg, ctx)
    return apply_field(fs, field_fn(fs.lat_deg, fs.lon_deg, fs.alt_km), timeline_cfg)
