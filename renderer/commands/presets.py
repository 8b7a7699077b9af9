"""``magretina presets``: every bundled preset and registered kind, one short line each.

Lists the eye layouts (``--layout``), response kinds (``--legendre``/``--response-*``,
``[response] kind``), radical pairs (``response compute``, ``spin-plan``), scene kinds
(``[scene] kind``), views (``--view``) and field models (``--model``), so nothing has to
be discovered through an error message.  It only reads names and descriptions; it
loads no layout or spin system.
"""

from __future__ import annotations

import tomllib
from importlib import resources

KINDS = ("layouts", "responses", "spin-pairs", "scenes", "views", "field-models")

#: One line per scene kind of a study's ``[scene] kind`` (render uses dusk or --scene FILE).
SCENES = {
    "dusk": "procedural dusk sky over a dark ground, sun low in the west (the default)",
    "uniform": "uniform grey of a given linear luminance (for the pattern alone)",
    "file": "your own 2:1 equirectangular image (8-bit sRGB or 16-bit linear PNG, JPEG, ...); --scene FILE",
}

FIELD_MODELS = {
    "igrf": "IGRF-14 main field, 1900-2030 (geodetic site, altitude, date)",
    "dipole": "centred axial dipole (textbook approximation, for comparison)",
    "fixed": "a laboratory vector: --field-ut with --inclination-deg (study: model = fixed)",
}


def register(sub):
    p = sub.add_parser("presets", help="list every preset: layouts, responses, spin pairs, scenes",
                       description="List the bundled presets and registered kinds with one line "
                                   "each. Layouts and radical pairs are hypotheses or published "
                                   "parameter sets, see each file's source.")
    p.add_argument("kind", nargs="?", choices=KINDS, metavar="KIND",
                   help=f"list only one kind: {' | '.join(KINDS)} (default: all)")
    p.set_defaults(func=run)


def first_sentence(text, limit=88) -> str:
    """The first sentence of ``text`` on one line, cut to ``limit`` characters."""
    s = " ".join(str(text).split())
    for end in (". ", "; "):
        if end in s:
            s = s.split(end, 1)[0]
    s = s.rstrip(".")
    return s if len(s) <= limit else s[:limit - 1].rstrip() + "…"


def _doc_line(obj) -> str:
    return first_sentence((obj.__doc__ or "").strip().splitlines()[0] if obj.__doc__ else "")


def rows(kind) -> list[tuple[str, str]]:
    """(name, one-line description) of every entry of one kind."""
    if kind == "layouts":
        # deferred: library modules load when the command runs, so start-up stays light
        from ..eye.layout import preset_names

        root = resources.files("renderer.eye") / "presets"
        out = []
        for name in preset_names():
            data = tomllib.loads((root / f"{name}.toml").read_text(encoding="utf-8"))
            out.append((name, first_sentence(data.get("description", ""))))
        return out
    if kind == "responses":
        from ..response import REGISTRY

        return [(k, _doc_line(v)) for k, v in REGISTRY.items()]
    if kind == "spin-pairs":
        from ..spin.definition import list_presets, preset_metadata

        return [(n, first_sentence(preset_metadata(n).get("description", ""), 100))
                for n in list_presets()]
    if kind == "scenes":
        return list(SCENES.items())
    if kind == "views":
        from ..views import REGISTRY

        return [(k, _doc_line(v)) for k, v in REGISTRY.items()]
    return list(FIELD_MODELS.items())


def run(a) -> int:
    kinds = [a.kind] if a.kind else list(KINDS)
    for i, kind in enumerate(kinds):
        rs = rows(kind)
        if i:
            print()
        print(f"{kind}:")
        w = max(len(n) for n, _ in rs)
        for name, text in rs:
            print(f"  {name:<{w}}  {text}")
    return 0
