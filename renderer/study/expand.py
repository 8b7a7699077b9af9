"""Sweep axes to shots: dotted key paths, lists/ranges/linspaces, grid or zip, seeds.

Each ``[[sweep.axis]]`` names a key path into the study file (``site.lat_deg``,
``views.world.width``, ``response.coeffs``, ``timeline.steps[0].angle_deg``, or a
whole table such as ``site``) and its values: ``values = [...]``, ``range =
[start, stop, step]`` (stop excluded, as in Python's ``range``) or ``linspace =
[start, stop, num]`` (both ends included).  Axes in the same ``group`` are zipped
(equal lengths, one dimension named after the group's first axis); groups combine
as a full grid.  ``combine = "zip"`` puts every axis in one group.  Every value is
checked by substituting it into the study and re-running the validation steps that
read the swept table (each distinct table value once), so a bad value is reported
with its axis, position and the allowed range, before anything renders, at a cost
that grows with the distinct values per table, not with shots x study.
Per-shot seeds are spawned from ``study.seed`` with ``numpy.random.SeedSequence``.
:func:`plan` builds every shot's frames and shared resources up front (the last
validation step).  :func:`load_study` reads and validates a study file and checks its
sweep values in the same pass, so every problem is listed at once.  Nothing here
renders.
"""

from __future__ import annotations

import copy
import hashlib
import itertools
import json
import math
import os
import re
from dataclasses import dataclass, replace

import numpy as np

from ..errors import ConfigError, MagretinaError
from . import sequences
from .build import build_view, field_function, resources_config, resources_key
from .config import Study, mark_given, override_display, read_study, validate
from .schema import canonical_json
from ..budget import check_frame_count, frame_limit

_SEG = re.compile(r"^([A-Za-z_][A-Za-z0-9_\-]*)((?:\[\d+\])*)$")
MAX_LISTED = 60


def parse_key_path(path: str) -> list:
    """``"a.b[2].c"`` -> ``["a", "b", 2, "c"]``; raises MagretinaError if malformed."""
    out = []
    if not isinstance(path, str) or not path:
        raise MagretinaError(f"key path {path!r}: must be a non-empty string like 'site.lat_deg'")
    for seg in path.split("."):
        m = _SEG.match(seg)
        if not m:
            raise MagretinaError(f"key path {path!r}: segment {seg!r} is not a key name "
                                 f"(letters, digits, '_', '-', optional [index])")
        out.append(m.group(1))
        out.extend(int(i) for i in re.findall(r"\[(\d+)\]", m.group(2)))
    return out


def set_key_path(raw: dict, path, value) -> dict:
    """A copy of ``raw`` with ``value`` at ``path`` (missing tables are created).

    Only the tables and arrays on the path are copied (the rest is shared with
    ``raw``, which is never modified), so substituting one value costs the depth of
    the path, not the size of the study.
    """
    segs = parse_key_path(path) if isinstance(path, str) else path
    if not isinstance(path, str):  # messages name the dotted path
        path = "".join(f"[{x}]" if isinstance(x, int) else f".{x}" for x in segs).lstrip(".")
    out = copy.copy(raw)
    node = out
    for i, s in enumerate(segs[:-1]):
        nxt = segs[i + 1]
        if isinstance(s, int):
            if not isinstance(node, list) or s >= len(node):
                raise MagretinaError(f"key path {path!r}: index [{s}] does not exist")
            node[s] = copy.copy(node[s])
            node = node[s]
            continue
        if not isinstance(node, dict):
            raise MagretinaError(f"key path {path!r}: {s!r} is inside a value that is not a table")
        if s not in node:
            if isinstance(nxt, int):
                raise MagretinaError(f"key path {path!r}: {s!r} is not set, so [{nxt}] does not "
                                     f"exist")
            node[s] = {}
        else:
            node[s] = copy.copy(node[s])
        node = node[s]
    last = segs[-1]
    if isinstance(last, int):
        if not isinstance(node, list) or last >= len(node):
            raise MagretinaError(f"key path {path!r}: index [{last}] does not exist")
    elif not isinstance(node, dict):
        raise MagretinaError(f"key path {path!r}: the parent of {last!r} is not a table")
    node[last] = copy.deepcopy(value)
    return out


def snake(name: str) -> str:
    s = re.sub(r"[^0-9A-Za-z]+", "_", name).strip("_").lower()
    if not s or not s[0].isalpha():
        s = "p_" + s
    return s


@dataclass(frozen=True)
class Axis:
    """One swept parameter: ``name`` (column/dimension), ``key`` path, values, labels."""

    name: str
    key: str
    values: tuple
    labels: tuple
    group: str
    #: Position of the axis in ``[[sweep.axis]]`` (for messages).
    index: int = 0

    @property
    def scalar(self) -> bool:
        return all(isinstance(v, (int, float, str, bool)) for v in self.values)


def axis_values(path, a, problems):
    given = [k for k in ("values", "range", "linspace") if a.get(k) is not None]
    if len(given) != 1:
        problems.append(f"{path}: give exactly one of values, range, linspace (got "
                        f"{', '.join(given) or 'none'})")
        return None
    kind = given[0]
    v = a[kind]
    if kind == "values":
        if not v:
            problems.append(f"{path}.values: must not be empty")
            return None
        return list(v)
    nums = [x for x in v if isinstance(x, (int, float)) and not isinstance(x, bool)]
    if len(v) != 3 or len(nums) != 3 or not all(math.isfinite(x) for x in nums):
        problems.append(f"{path}.{kind} = {v!r}: must be three numbers [start, stop, "
                        f"{'step' if kind == 'range' else 'num'}]")
        return None
    start, stop, third = v
    if kind == "range":
        if third == 0:
            problems.append(f"{path}.range = {v!r}: step must not be 0")
            return None
        n = sequences.sweep_count(start, stop, third)
        if n == 0 or n > 100000:
            problems.append(f"{path}.range = {v!r}: gives {n} values; allowed 1..100000")
            return None
        vals = [start + k * third for k in range(n)]
        if all(isinstance(x, int) for x in v):
            return [int(x) for x in vals]
        return [float(x) for x in vals]
    if not isinstance(third, int) or not 1 <= third <= 100000:
        problems.append(f"{path}.linspace = {v!r}: num must be an integer in [1, 100000]")
        return None
    return [float(x) for x in np.linspace(start, stop, third)]


def label_of(v) -> str:
    if isinstance(v, float):
        return f"{v:g}"
    if isinstance(v, (int, str, bool)):
        return str(v)
    return json.dumps(v, sort_keys=True, separators=(",", ":"), default=str)


def build_axes(study_raw, base_dir, sweep, problems, known=(), base=None, cache=None
               ) -> list[Axis]:
    """The sweep axes; problems of substituted values not already in ``known``.

    ``base`` (the resolved study) and ``cache`` make each value's check re-run only
    the validation steps that read the swept table (see :func:`check_axis_values`).
    """
    axes = collect_axes(sweep, problems)
    check_axis_values(study_raw, base_dir, axes, problems, known=known, base=base, cache=cache)
    return axes


def collect_axes(sweep, problems) -> list[Axis]:
    """The sweep axes with their values, without checking the values against the study."""
    axes = []
    names = set()
    combine = sweep.get("combine", "grid")
    for i, a in enumerate(sweep.get("axis", [])):
        path = f"sweep.axis[{i}]"
        key = a.get("key")
        try:
            segs = parse_key_path(key)
        except MagretinaError as exc:
            problems.append(f"{path}.key: {exc}")
            continue
        if segs[0] == "sweep":
            problems.append(f"{path}.key = {key!r}: the sweep table itself cannot be swept")
            continue
        vals = axis_values(path, a, problems)
        if vals is None:
            continue
        name = a.get("name") or snake(key)
        if snake(name) != name:
            problems.append(f"{path}.name = {name!r}: must be snake_case starting with a letter "
                            f"(e.g. {snake(name)!r})")
        if name in names:
            problems.append(f"{path}.name = {name!r}: used by another axis")
        names.add(name)
        labels = a.get("labels")
        if labels is not None:
            if len(labels) != len(vals) or not all(isinstance(x, str) for x in labels):
                problems.append(f"{path}.labels: must be {len(vals)} strings, one per value")
                labels = None
        labels = tuple(labels) if labels else tuple(label_of(v) for v in vals)
        group = a.get("group") or ("zip" if combine == "zip" else name)
        axes.append(Axis(name, key, tuple(vals), labels, group, i))
    # zipped groups must agree in length
    groups = {}
    for ax in axes:
        groups.setdefault(ax.group, []).append(ax)
    for g, members in groups.items():
        lens = {len(m.values) for m in members}
        if len(lens) > 1:
            problems.append(f"sweep: zipped axes {', '.join(m.name for m in members)} (group "
                            f"{g!r}) have different lengths "
                            f"{', '.join(str(len(m.values)) for m in members)}")
    return axes


def check_axis_values(study_raw, base_dir, axes, problems, known=(), base=None, cache=None,
                      resolved=None):
    """Check every axis value substituted alone into the study.

    With ``base`` (the study's resolved configuration) only the validation steps
    that read the swept top-level table are re-run, and ``cache`` (a dict shared
    with :func:`plan`) makes a table value that recurs -- in another axis or shot
    -- cost one check.  Without ``base`` the whole study is validated per value.
    ``resolved`` (a dict) receives ``(axis index, value index) -> resolved study``
    of each value, which is the shot's configuration when the sweep has one axis.
    """
    for ax in axes:
        path = f"sweep.axis[{ax.index}]"
        segs = parse_key_path(ax.key)
        for j, v in enumerate(ax.values):
            try:
                raw2 = set_key_path(study_raw, segs, v)
            except MagretinaError as exc:
                problems.append(f"{path}.key: {exc}")
                break
            sub = []
            if base is None:
                cfg = validate(raw2, base_dir, sub, cache=cache)
            else:
                cfg = validate(raw2, base_dir, sub, base=base, changed={segs[0]}, cache=cache)
            if resolved is not None:
                resolved[(ax.index, j)] = cfg
            for p in sub:
                if p not in known:
                    problems.append(f"{path} (key {ax.key}) value {j} = {ax.labels[j]}: {p}")


def load_study(path, display=None) -> Study:
    """Read and validate a study file; raises ConfigError listing every problem.

    Parameters
    ----------
    path : path-like
        The study TOML; relative paths inside it are resolved against its folder.
    display : dict or None
        Keys that replace the file's [display] keys (``magretina run --display ...``); the
        result is validated like the file and is part of the configuration's identity.

    Returns
    -------
    Study
    """
    data, raw = read_study(path)
    raw = override_display(raw, display or {})
    base = os.path.dirname(os.path.abspath(os.fspath(path)))
    problems = []
    resolved = validate(raw, base, problems)
    if problems:
        # Also report bad sweep values now, not after the first round of fixes.
        if isinstance(resolved.get("sweep"), dict):
            # Sectional checks (only the swept table's steps per value, each distinct
            # value once), so a long sweep over a broken study stays cheap to report;
            # a sweep over the frame limit is reported as such, its values unchecked.
            known = set(problems)
            axes = collect_axes(resolved["sweep"], problems)
            try:
                check_frame_count(f"study ({sweep_shots(axes)} shots)",
                                  sweep_shots(axes) * _frames_per_shot(axes, resolved))
            except MagretinaError as exc:
                problems.append(str(exc))
            else:
                check_axis_values(raw, base, axes, problems, known=known, base=resolved,
                                  cache={})
        raise ConfigError(mark_given(problems, "display", display or {}),
                          source=os.fspath(path))
    return Study(os.fspath(path), base, hashlib.sha256(data).hexdigest(), raw, resolved,
                 {"display": dict(display)} if display else {})


@dataclass(frozen=True)
class Shot:
    """One parameter combination: resolved config, coordinates on the axes, seed, frames."""

    index: int
    shot_id: str
    coords: dict
    params: dict
    labels: dict
    config: dict
    seed: int
    res_key: str
    frames: object


@dataclass(frozen=True)
class Plan:
    """The expanded study: axes, dimensions, shots and their shared resource configs."""

    study: Study
    axes: tuple
    dims: tuple  # ((dim name, size, (axis names...)), ...)
    shots: tuple
    resource_configs: dict  # res_key -> resolved shot config (to build resources)
    field_info: dict

    @property
    def n_frames(self) -> int:
        return sum(len(s.frames) for s in self.shots)

    @property
    def max_frames(self) -> int:
        return max(len(s.frames) for s in self.shots)


def sweep_shots(axes) -> int:
    """Shots of a sweep: the product of its group lengths (zipped axes count once)."""
    lengths = {}
    for ax in axes:
        lengths.setdefault(ax.group, len(ax.values))
    return math.prod(lengths.values())


def _frames_per_shot(axes, resolved) -> int:
    """Frames of each shot before expanding: 1 if the sequence or timeline is swept, else
    the study's own sequence (at least 1)."""
    tables = {parse_key_path(ax.key)[0] for ax in axes}
    if tables & {"sequence", "timeline"} or not isinstance(resolved.get("sequence"), dict):
        return 1
    return max(1, frames_estimate(resolved["sequence"]))


def shot_seeds(master: int, n: int) -> list[int]:
    """64-bit seeds of ``n`` shots spawned from one master seed (SeedSequence).

    ``numpy.random.SeedSequence(master).spawn(n)[i].generate_state(1, uint64)[0]``, computed
    for all children at once: NumPy's SeedSequence hash (O'Neill's seed_seq mixing, as
    NumPy implements it) applied with array arithmetic modulo 2³² to the children's entropy
    words, which differ only in the spawn key (i,).  Checked bit for bit against NumPy in
    the tests; NumPy's own loop is used where the shortcut's assumptions (a master of at most
    four 32-bit words, fewer than 2³² children) do not hold.
    """
    run = _words32(int(master))
    if n == 0:
        return []
    if len(run) > _POOL or n >= 2 ** 32:
        children = np.random.SeedSequence(int(master)).spawn(n)
        return [int(c.generate_state(1, np.uint64)[0]) for c in children]
    m32 = np.uint64(0xFFFFFFFF)
    entropy = [np.full(n, w, np.uint64) for w in run + [0] * (_POOL - len(run))]
    entropy.append(np.arange(n, dtype=np.uint64))  # the spawn key (i,)
    hash_const = [_INIT_A]

    def hashmix(v):
        v = (v ^ np.uint64(hash_const[0])) & m32
        hash_const[0] = (hash_const[0] * _MULT_A) & 0xFFFFFFFF
        v = (v * np.uint64(hash_const[0])) & m32
        return v ^ (v >> np.uint64(16))

    def mix(x, y):
        r = (np.uint64(_MIX_L) * x - np.uint64(_MIX_R) * y) & m32
        return r ^ (r >> np.uint64(16))

    pool = [hashmix(entropy[i]) for i in range(_POOL)]
    for i_src in range(_POOL):
        for i_dst in range(_POOL):
            if i_src != i_dst:
                pool[i_dst] = mix(pool[i_dst], hashmix(pool[i_src]))
    for i_src in range(_POOL, len(entropy)):
        for i_dst in range(_POOL):
            pool[i_dst] = mix(pool[i_dst], hashmix(entropy[i_src]))
    hb, state = _INIT_B, []
    for k in range(2):  # two 32-bit words make the uint64, low word first
        v = (pool[k] ^ np.uint64(hb)) & m32
        hb = (hb * _MULT_B) & 0xFFFFFFFF
        v = (v * np.uint64(hb)) & m32
        state.append(v ^ (v >> np.uint64(16)))
    return (state[0] | (state[1] << np.uint64(32))).tolist()


# NumPy's SeedSequence constants (numpy/random/bit_generator.pyx): pool of four 32-bit words.
_POOL = 4
_INIT_A, _MULT_A, _INIT_B, _MULT_B = 0x43b0d7e5, 0x931e8875, 0x8b51f9dd, 0x58f38ded
_MIX_L, _MIX_R = 0xca01f9dd, 0x4973f715


def _words32(x: int) -> list[int]:
    """A non-negative integer as little-endian 32-bit words ([0] for 0), as NumPy takes it."""
    out = []
    while x:
        out.append(x & 0xFFFFFFFF)
        x >>= 32
    return out or [0]


def plan(study: Study) -> Plan:
    """Expand the sweep into shots; build every frame series and check every shot.

    Raises ConfigError with every problem found (deduplicated).
    """
    problems = []
    raw = study.raw
    axes = collect_axes(study.resolved["sweep"], problems)
    if problems:
        raise ConfigError(_dedupe(problems), source=study.path)
    groups = []
    for ax in axes:
        for g in groups:
            if g[0].group == ax.group:
                g.append(ax)
                break
        else:
            groups.append([ax])
    dims = tuple((g[0].name, len(g[0].values), tuple(a.name for a in g)) for g in groups)
    n_combos = sweep_shots(axes)
    segs = {ax.name: parse_key_path(ax.key) for ax in axes}
    tables = {sg[0] for sg in segs.values()}
    # Every shot has at least one frame (and, unless the sequence is swept, as many as
    # the study's own sequence): refuse before checking or expanding anything.
    check_frame_count(f"study {study.resolved['study']['name']!r} ({n_combos} shots)",
                      n_combos * _frames_per_shot(axes, study.resolved))
    # Each value alone, then each shot: only the validation steps reading a swept
    # table are re-run, and each distinct table value is checked once (the cache).
    cache = {}
    # With one axis a shot is one value substituted alone: its configuration is the one
    # the value check resolved, so it is not validated a second time.
    single = {} if len(axes) == 1 else None
    check_axis_values(raw, study.base_dir, axes, problems, base=study.resolved, cache=cache,
                      resolved=single)
    if problems:
        raise ConfigError(_dedupe(problems), source=study.path)
    limit = frame_limit()
    combos = list(itertools.product(*[range(len(g[0].values)) for g in groups])) or [()]
    seeds = shot_seeds(study.resolved["study"]["seed"], len(combos))
    width = max(3, len(str(len(combos) - 1)))
    pending = []
    total_frames = 0
    # Shots that share a table share its resolved object (validation hands out the base's
    # or the cache's), so per-shot work that reads only some tables is done once per
    # distinct set of those objects.  Each cache entry holds the objects its key names, so
    # no id can be reused while the plan is built.
    series = _IdCache()
    for idx, combo in enumerate(combos):
        r = raw
        coords, params, labels = {}, {}, {}
        for g, k in zip(groups, combo):
            for ax in g:
                if single is None:
                    r = set_key_path(r, segs[ax.name], ax.values[k])
                coords[ax.name] = k
                params[ax.name] = ax.values[k]
                labels[ax.name] = ax.labels[k]
            coords[g[0].name] = k
        sub = []
        if single is not None:
            cfg = single[(axes[0].index, combo[0])]
        elif combo:
            cfg = validate(r, study.base_dir, sub, base=study.resolved, changed=tables,
                           cache=cache)
        else:
            cfg = study.resolved
        where = f"shot {idx} ({', '.join(f'{k}={v}' for k, v in labels.items())})" if labels \
            else "study"
        problems.extend(f"{where}: {p}" for p in sub)
        if sub:
            continue
        total_frames += frames_estimate(cfg["sequence"])
        if total_frames > limit:
            check_frame_count(f"study {study.resolved['study']['name']!r} (by {where})",
                              total_frames)
        fs = series.get((cfg["sequence"], cfg["pose"], cfg["site"]),
                        lambda: _frame_series(cfg, study.base_dir))
        if isinstance(fs, MagretinaError):
            problems.append(f"{where}: {fs}")
            continue
        pending.append((idx, coords, params, labels, cfg, fs))
    if problems:
        raise ConfigError(_dedupe(problems), source=study.path)
    check_frame_count(f"study {study.resolved['study']['name']!r}",
                      sum(len(it[5]) for it in pending))

    # One field evaluation per distinct field configuration, over the frames of its
    # distinct frame series (shots sharing a series and a field share the ambient field).
    field_keys = _IdCache()
    by_field = {}
    for item in pending:
        fkey = field_keys.get((item[4]["field"],), lambda: canonical_json(item[4]["field"]))
        by_field.setdefault(fkey, []).append(item)
    ambient = {}
    field_info = {}
    for fkey, items in by_field.items():
        fn, info = field_function(items[0][4])
        field_info[info["model"]] = info
        uniq = list({id(it[5]): it[5] for it in items}.values())
        lat = np.concatenate([f.lat_deg for f in uniq])
        lon = np.concatenate([f.lon_deg for f in uniq])
        alt = np.concatenate([f.alt_km for f in uniq])
        try:
            b = np.asarray(fn(lat, lon, alt), float).reshape(-1, 3)
        except MagretinaError as exc:
            problems.append(f"field: {exc}")
            continue
        k, part = 0, {}
        for f in uniq:
            part[id(f)] = (fkey, b[k:k + len(f)])
            k += len(f)
        for it in items:
            ambient[it[0]] = part[id(it[5])]
    shots = []
    res_cfgs = {}
    presented = _IdCache()
    res_keys = _IdCache()
    for idx, coords, params, labels, cfg, fs in pending:
        if idx not in ambient:
            continue
        fkey, amb = ambient[idx]
        base_fs = fs
        fs, finite = presented.get((base_fs, cfg["timeline"]),
                                   lambda: _presented(base_fs, amb, cfg["timeline"]), extra=fkey)
        if not finite:
            problems.append(f"shot {idx}: the field model gave non-finite values")
            continue
        rk = res_keys.get(tuple(resources_config(cfg).values()), lambda: resources_key(cfg))
        res_cfgs.setdefault(rk, cfg)
        shots.append(Shot(idx, f"shot{idx:0{width}d}", coords, params, labels, cfg, seeds[idx],
                          rk, fs))
    if problems:
        raise ConfigError(_dedupe(problems), source=study.path)
    p = Plan(study, tuple(axes), dims, tuple(shots), res_cfgs, field_info)
    _check_outputs(p, problems)
    if problems:
        raise ConfigError(_dedupe(problems), source=study.path)
    return p


class _IdCache:
    """Values computed once per distinct tuple of objects (by identity), for per-shot work
    on resolved tables that shots share.  Holds the objects, so their ids stay theirs."""

    def __init__(self):
        self._d = {}

    def get(self, objs, make, extra=None):
        key = (*map(id, objs), extra)
        hit = self._d.get(key)
        if hit is None:
            hit = self._d[key] = (objs, make())
        return hit[1]


def _presented(fs, ambient, timeline):
    """(the series with its ambient and presented field, whether every value is finite)."""
    out = sequences.apply_field(fs, ambient, timeline)
    return out, bool(np.all(np.isfinite(out.b_ned_T)))


def _frame_series(cfg, base_dir):
    """The shot's frame series before the field (a MagretinaError is returned, not raised,
    so that shots sharing the tables report it without rebuilding it)."""
    ctx = sequences.SequenceContext(pose=cfg["pose"], site=cfg["site"], base_dir=base_dir)
    try:
        return sequences.SEQUENCES[cfg["sequence"]["kind"]](cfg["sequence"], ctx)
    except MagretinaError as exc:
        return exc


def frames_estimate(seq) -> int:
    """Frames of a resolved ``[sequence]`` table, counted without building the series
    (0 when only the generator can tell, e.g. a route CSV)."""
    try:
        kind = seq.get("kind")
        if kind == "still":
            return int(seq["frames"])
        if kind == "heading-sweep":
            return sequences.sweep_count(seq["start_deg"], seq["stop_deg"], seq["step_deg"])
        if kind == "head-scan":
            d = seq["duration_s"] if seq.get("duration_s") is not None else seq["period_s"]
            return max(1, int(math.floor(d * seq["fps"] + 1e-9)))
        if kind == "route" and not seq.get("csv"):
            a, b = seq["from"], seq["to"]
            dist = sequences.great_circle(a["lat_deg"], a["lon_deg"], b["lat_deg"],
                                          b["lon_deg"], [0.0, 1.0])[3]
            return int(math.floor(dist / seq["speed_m_s"] * seq["fps"] + 1e-9)) + 1
    except (KeyError, TypeError, ValueError, ZeroDivisionError, OverflowError, MagretinaError):
        return 0
    return 0


def _check_outputs(p: Plan, problems):
    shapes = {}  # one view built per distinct view table (shots share most of them)
    reprs = _IdCache()
    for s in p.shots:
        out = s.config["output"]
        for name, vcfg in s.config["views"].items():
            key = reprs.get((vcfg,), lambda: repr(vcfg))
            if key not in shapes:
                try:
                    shapes[key] = build_view(vcfg).shape
                except (MagretinaError, TypeError) as exc:
                    shapes[key] = exc
            if isinstance(shapes[key], Exception):
                problems.append(f"views.{name}: {shapes[key]}")
                continue
            H, W = shapes[key]
            if out["video"] != "none" and (H % 2 or W % 2):
                problems.append(f"views.{name}: {W} x {H} pixels; output.video needs even width "
                                f"and height (frames are never resized)")


def _dedupe(problems):
    seen = []
    for p in problems:
        if p not in seen:
            seen.append(p)
    if len(seen) > MAX_LISTED:
        seen = seen[:MAX_LISTED] + [f"... and {len(seen) - MAX_LISTED} more"]
    return seen


def with_frames(shot: Shot, frames) -> Shot:
    return replace(shot, frames=frames)
