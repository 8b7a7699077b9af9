"""Readable labels with units for the names in docs/data-dictionary.md.

Outputs (CSV, NetCDF, JSON) use the dictionary's snake_case names; tables, plot axes
and the HTML report show people a label with the unit instead.  :func:`label` turns
any dictionary name (including per-eye names and unknown ones, from their unit word)
into such a label; :func:`latlon_text` writes a site with hemispheres.  This module
holds words only; it computes nothing.
"""

from __future__ import annotations

#: Unit word at the end of a name -> the unit people read.
UNIT_WORDS = (("_per_rad2", "rad⁻²"), ("_per_s", "s⁻¹"), ("_ut", "µT"), ("_nt", "nT"),
              ("_deg", "°"), ("_km", "km"), ("_ms", "ms"), ("_mhz", "MHz"), ("_s", "s"))

#: Name -> (label, unit).  Names not listed get a label from their words.
LABELS = {
    "t_s": ("time in the sequence", "s"),
    "yaw_deg": ("heading (yaw, clockwise from north)", "°"),
    "pitch_deg": ("pitch", "°"),
    "roll_deg": ("roll", "°"),
    "lat_deg": ("latitude", "°"),
    "lon_deg": ("longitude", "°"),
    "alt_km": ("altitude", "km"),
    "site_lat_deg": ("site latitude", "°"),
    "site_lon_deg": ("site longitude", "°"),
    "field_north_ut": ("field, north component", "µT"),
    "field_east_ut": ("field, east component", "µT"),
    "field_down_ut": ("field, down component", "µT"),
    "field_total_ut": ("field intensity", "µT"),
    "field_horizontal_ut": ("field, horizontal intensity", "µT"),
    "inclination_deg": ("inclination", "°"),
    "declination_deg": ("declination", "°"),
    "mean_signal": ("mean receptor signal ⟨s⟩", ""),
    "modulation_depth": ("modulation depth", ""),
    "n_receptors": ("receptors", ""),
    "n_pools": ("readout pools", ""),
    "min_mean_count": ("smallest mean count per receptor", "counts"),
    "fisher_at_yaw_per_rad2": ("Fisher information at this heading", "rad⁻²"),
    "crb_at_yaw_deg": ("Cramér–Rao bound at this heading", "°"),
    "crb_mean_deg": ("Cramér–Rao bound, mean over headings", "°"),
    "crb_rms_deg": ("Cramér–Rao bound, rms over headings", "°"),
    "crb_min_deg": ("Cramér–Rao bound, best heading", "°"),
    "crb_max_deg": ("Cramér–Rao bound, worst heading", "°"),
    "asymmetry_rms": ("ψ vs ψ+180° asymmetry, rms (relative)", ""),
    "asymmetry_dprime_mean": ("ψ vs ψ+180° discriminability d′, mean", ""),
    "asymmetry_dprime_min": ("ψ vs ψ+180° discriminability d′, min", ""),
    "contrast_threshold": ("contrast threshold (Weber fraction)", ""),
    "michelson": ("Michelson contrast", ""),
    "rms": ("rms contrast", ""),
    "peak_to_peak": ("peak-to-peak modulation", ""),
    "weber_max": ("largest Weber contrast", ""),
    "visible": ("above threshold (1 = yes)", ""),
}


def split(name, eyes=()):
    """(label, unit, eye or None) of a dictionary name.

    ``eyes`` are the layout's eye names: a name ending in ``_<eye>`` whose stem is known
    is read as that stem for one eye (``michelson_left``, ``crb_mean_deg_right``).
    """
    n = str(name)
    if n in LABELS:
        return (*LABELS[n], None)
    for eye in sorted(eyes, key=len, reverse=True):
        stem = n[:-len(eye) - 1] if n.endswith("_" + eye) else None
        if stem and (stem in LABELS or any(stem.endswith(u) for u, _ in UNIT_WORDS)):
            lab, unit, _ = split(stem)
            return lab, unit, eye
    for word, unit in UNIT_WORDS:
        if n.endswith(word):
            return n[:-len(word)].replace("_", " ").strip(), unit, None
    return n.replace("_", " "), "", None


def label(name, eyes=(), unit=True) -> str:
    """``'Cramér–Rao bound, mean over headings (°), left eye'`` for ``crb_mean_deg_left``."""
    lab, u, eye = split(name, eyes)
    out = lab + (f" ({u})" if unit and u else "")
    return out + (f", {eye} eye" if eye else "")


def latlon_text(lat_deg, lon_deg, digits=4) -> str:
    """``'12.0500° S, 75.3000° W'``: a site with its hemispheres instead of signs.

    Longitudes are wrapped to (-180, 180] first (common practice of geographic
    notation: east and west up to 180°).
    """
    lon = (float(lon_deg) + 180.0) % 360.0 - 180.0
    if lon == -180.0:
        lon = 180.0
    lat = float(lat_deg)
    ns = "S" if lat < 0 else "N"
    ew = "W" if lon < 0 else "E"
    return f"{abs(lat):.{digits}f}° {ns}, {abs(lon):.{digits}f}° {ew}"
