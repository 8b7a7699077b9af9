"""``magretina field``: print the geomagnetic vector at a site and date."""

from __future__ import annotations

import json

from ..field import MODELS
from ..vocabulary import latlon_text
from . import _common


def register(sub):
    p = sub.add_parser("field", help="print the geomagnetic field vector at a site and date",
                       description="Field vector in local north-east-down axes (µT) with "
                                   "inclination and declination.")
    p.add_argument("--lat-deg", type=float, required=True, aliases=["--lat"],
                   help="geodetic latitude, degrees north (-90..90; south negative)")
    p.add_argument("--lon-deg", type=float, required=True, aliases=["--lon"],
                   help="longitude, degrees east (west negative)")
    p.add_argument("--alt-km", type=float, default=0.0, help="altitude above the WGS84 ellipsoid, km")
    p.add_argument("--date", default=None,
                   help="ISO 8601 date within 1900-01-01..2030-01-01 (default: today, UTC)")
    p.add_argument("--model", default="igrf", help=f"field model: {' | '.join(MODELS)}")
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    p.set_defaults(func=run)


def run(a) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from ..field import at_site

    date = _common.field_date(a)
    f = at_site(a.model, a.lat_deg, a.lon_deg, a.alt_km, date)
    d = f.as_dict()
    if a.json:
        print(json.dumps(d, indent=2))
        return 0
    when = f"{f.date}" + ("" if a.date else " (today; choose another day with --date)")
    print(f"{f.model} at {latlon_text(d['site']['lat_deg'], d['site']['lon_deg'])}, "
          f"{d['site']['alt_km']:g} km, {when}")
    for key, label in (("field_north_ut", "north (X)"), ("field_east_ut", "east (Y)"),
                       ("field_down_ut", "down (Z)"), ("field_horizontal_ut", "horizontal (H)"),
                       ("field_total_ut", "total (F)")):
        print(f"  {label:<15} {d[key]:12.4f} µT")
    print(f"  {'inclination (I)':<15} {d['inclination_deg']:12.3f}°")
    print(f"  {'declination (D)':<15} {d['declination_deg']:12.3f}°")
    return 0
