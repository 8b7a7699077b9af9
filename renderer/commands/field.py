"""``magretina field``: print the geomagnetic vector at a site and date."""

from __future__ import annotations

import json


def register(sub):
    p = sub.add_parser("field", help="print the geomagnetic field vector at a site and date",
                       description="Field vector in local NED (nT) with inclination and declination.")
    p.add_argument("--lat", type=float, required=True, help="geodetic latitude, degrees (-90..90)")
    p.add_argument("--lon", type=float, required=True, help="longitude, degrees east")
    p.add_argument("--alt-km", type=float, default=0.0, help="altitude above WGS84, km")
    p.add_argument("--date", default="2026-06-01", help="ISO 8601 date within 1900.0-2030.0")
    p.add_argument("--model", default="igrf", help="igrf | dipole")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.set_defaults(func=run)


def run(a) -> int:
    from ..field import at_site

    f = at_site(a.model, a.lat, a.lon, a.alt_km, a.date)
    d = f.as_dict()
    if a.json:
        print(json.dumps(d, indent=2))
        return 0
    print(f"{f.model} at {d['site']['lat_deg']:.4f} N, {d['site']['lon_deg']:.4f} E, "
          f"{d['site']['alt_km']:g} km, {f.date}")
    for key, label in (("north_nT", "north (X)"), ("east_nT", "east (Y)"), ("down_nT", "down (Z)"),
                       ("horizontal_nT", "horizontal (H)"), ("total_nT", "total (F)")):
        print(f"  {label:<15} {d[key]:12.1f} nT")
    print(f"  {'inclination (I)':<15} {d['inclination_deg']:12.3f} deg")
    print(f"  {'declination (D)':<15} {d['declination_deg']:12.3f} deg")
    return 0
