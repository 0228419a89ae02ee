"""Inline SVG for the build sheet: a rotor and the stator drawn to scale, and curves against rpm.

Plain strings in, an SVG element (text) out; no scripts, no external fonts or files, so the sheet
prints and opens anywhere. Drawings are in millimetres (one user unit = 1 mm) with the x axis to the
right and angles counter-clockwise, seen from the rotor side looking at the stator; coil 1 and magnet 1
are at 3 o'clock. Every label that could come from a catalog goes through `html.escape`.
"""

from __future__ import annotations

import math
from html import escape

from ..physics.geometry import hole_corners, turn_path

__all__ = ["print_scale", "rotor_svg", "stator_svg", "performance_svg", "nice_ticks", "PALETTE"]

PALETTE = {"navy": "#1d3557", "teal": "#2a7f84", "sand": "#e9d8a6", "sand_dark": "#c9a66b",
           "ink": "#22313f", "grey": "#8a99a6", "paper": "#fbf8f1", "rust": "#b5523b"}
"""Our sea-chart colours, shared with the front page."""

PRINT_WIDTH_MM = 170.0
"""Usable width of an A4 page with 20 mm margins [mm]."""


def print_scale(extent_mm: float, width_mm: float = PRINT_WIDTH_MM) -> int:
    """Smallest usual drawing reduction 1:k that fits `extent_mm` into `width_mm` [-]."""
    for k in (1, 2, 3, 4, 5, 10, 20):
        if extent_mm / k <= width_mm:
            return k
    return 50


def _f(x: float) -> str:
    return f"{x:.2f}".rstrip("0").rstrip(".")


def _polar(r: float, angle_rad: float) -> tuple[float, float]:
    # SVG's y axis points down: flip it so angles run counter-clockwise on the page.
    return r * math.cos(angle_rad), -r * math.sin(angle_rad)


def _frame(half_mm: float, title: str, scale: int, body: list[str]) -> str:
    """An SVG sized to print at 1:scale, centred on the shaft, with a 50 mm scale bar."""
    margin = 0.12 * half_mm + 8.0
    h = half_mm + margin
    size = 2.0 * h
    bar = 50.0
    bx, by = -h + 4.0, h - 6.0
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="{_f(-h)} {_f(-h)} {_f(size)} {_f(size)}" '
        f'width="{_f(size / scale)}mm" height="{_f(size / scale)}mm" role="img" '
        f'font-family="sans-serif" class="drawing">',
        f"<title>{escape(title)}</title>",
        *body,
        f'<g stroke="{PALETTE["ink"]}" stroke-width="{_f(size / 400)}">'
        f'<line x1="{_f(bx)}" y1="{_f(by)}" x2="{_f(bx + bar)}" y2="{_f(by)}"/>'
        f'<line x1="{_f(bx)}" y1="{_f(by - 2)}" x2="{_f(bx)}" y2="{_f(by + 2)}"/>'
        f'<line x1="{_f(bx + bar)}" y1="{_f(by - 2)}" x2="{_f(bx + bar)}" y2="{_f(by + 2)}"/></g>',
        f'<text x="{_f(bx)}" y="{_f(by - 3)}" font-size="{_f(size / 70)}" fill="{PALETTE["ink"]}">'
        f"50 mm (scale 1:{scale} printed at 100 %)</text>",
        "</svg>",
    ]
    return "\n".join(parts)


def rotor_svg(disc_radius_m, bore_radius_m, ring_radius_m, magnet_length_m, magnet_width_m, poles,
              title="Rotor, magnet side") -> str:
    """One rotor disc with its 2p magnets, to scale.

    Parameters
    ----------
    disc_radius_m : float
        Rotor disc radius [m].
    bore_radius_m : float
        Shaft bore radius [m].
    ring_radius_m : float
        Mean radius of the magnet ring (magnet centres) [m].
    magnet_length_m, magnet_width_m : float
        Magnet radial length and tangential width [m].
    poles : int
        Magnets per rotor 2p [-]; magnet i sits at 360 i / 2p degrees, N for even i.

    Returns
    -------
    str
        An ``<svg>`` element sized to print at a stated scale.
    """
    R, rb, rm = disc_radius_m * 1e3, bore_radius_m * 1e3, ring_radius_m * 1e3
    L, W = magnet_length_m * 1e3, magnet_width_m * 1e3
    scale = print_scale(2.4 * R)
    stroke = _f(R / 250)
    font = _f(max(min(W, L) * 0.55, 3.0))
    body = [f'<circle cx="0" cy="0" r="{_f(R)}" fill="{PALETTE["sand"]}" stroke="{PALETTE["ink"]}" '
            f'stroke-width="{stroke}"/>',
            f'<circle cx="0" cy="0" r="{_f(rb)}" fill="white" stroke="{PALETTE["ink"]}" '
            f'stroke-width="{stroke}"/>',
            f'<circle cx="0" cy="0" r="{_f(rm)}" fill="none" stroke="{PALETTE["grey"]}" '
            f'stroke-width="{stroke}" stroke-dasharray="{_f(R / 60)}"/>']
    for i in range(int(poles)):
        angle = 2.0 * math.pi * i / poles
        north = i % 2 == 0
        fill = PALETTE["navy"] if north else PALETTE["teal"]
        body.append(f'<rect x="{_f(rm - L / 2)}" y="{_f(-W / 2)}" width="{_f(L)}" height="{_f(W)}" '
                    f'fill="{fill}" stroke="{PALETTE["ink"]}" stroke-width="{stroke}" '
                    f'transform="rotate({_f(-math.degrees(angle))})"/>')
        x, y = _polar(rm, angle)
        body.append(f'<text x="{_f(x)}" y="{_f(y)}" font-size="{font}" fill="white" '
                    f'text-anchor="middle" dominant-baseline="central">{"N" if north else "S"}</text>')
        x, y = _polar(rm + L / 2 + 1.2 * float(font), angle)
        body.append(f'<text x="{_f(x)}" y="{_f(y)}" font-size="{_f(float(font) * 0.7)}" '
                    f'fill="{PALETTE["ink"]}" text-anchor="middle" dominant-baseline="central">{i + 1}</text>')
    return _frame(R, title, scale, body)


def stator_svg(coil_inner_radius_m, coil_outer_radius_m, rim_m, bore_radius_m, ring_radius_m,
               hole_radial_m, hole_tangential_m, leg_width_m, coil_phase_letters, coil_polarity,
               title="Stator, seen from the rotor", hole_outer_tangential_m=None) -> str:
    """The stator's Q coils, to scale, each labelled with its number, phase and polarity.

    Parameters
    ----------
    coil_inner_radius_m, coil_outer_radius_m : float
        Radial extent of the coils [m].
    rim_m : float
        Resin beyond the coils' outer corners [m].
    bore_radius_m : float
        Shaft radius, drawn for orientation [m].
    ring_radius_m : float
        Radius of the coil centres (= magnet ring) [m].
    hole_radial_m, hole_tangential_m, leg_width_m : float
        Coil hole and leg width [m].
    coil_phase_letters : sequence of str
        "A", "B" or "C" for each coil (coil k at 360 k / Q degrees).
    coil_polarity : sequence of int
        +1 forward, -1 reversed, for each coil.
    hole_outer_tangential_m : float, optional
        Width of the hole at its outer end: wider than `hole_tangential_m` for a keystone coil,
        drawn as wound (the trapezoidal former grown by the leg width, corners rounded) [m].

    Returns
    -------
    str
        An ``<svg>`` element. A filled dot marks each coil's start lead, an open one its finish.
    """
    ri, ro, rm = coil_inner_radius_m * 1e3, coil_outer_radius_m * 1e3, ring_radius_m * 1e3
    Lh, Wh, w = hole_radial_m * 1e3, hole_tangential_m * 1e3, leg_width_m * 1e3
    R = ro + rim_m * 1e3
    scale = print_scale(2.4 * R)
    stroke = _f(R / 250)
    font = _f(max(min(Wh, Lh) * 0.45, 3.0))
    colours = {"A": PALETTE["navy"], "B": PALETTE["teal"], "C": PALETTE["sand_dark"]}
    body = [f'<circle cx="0" cy="0" r="{_f(R)}" fill="{PALETTE["paper"]}" stroke="{PALETTE["ink"]}" '
            f'stroke-width="{stroke}"/>',
            f'<circle cx="0" cy="0" r="{_f(max(ri - rim_m * 1e3, bore_radius_m * 1e3))}" fill="white" '
            f'stroke="{PALETTE["ink"]}" stroke-width="{stroke}"/>',
            f'<circle cx="0" cy="0" r="{_f(bore_radius_m * 1e3)}" fill="none" stroke="{PALETTE["grey"]}" '
            f'stroke-width="{stroke}" stroke-dasharray="{_f(R / 80)}"/>']
    q = len(coil_phase_letters)
    dot = max(w * 0.18, 1.0)
    Wo = Wh if hole_outer_tangential_m is None else hole_outer_tangential_m * 1e3
    keystone = Wo > Wh
    if keystone:
        corners = hole_corners(rm, Lh, Wh, Wo)
        outline = turn_path(corners, w, 12)
        keystone_path = ("M" + "L".join(f"{_f(x)} {_f(y)}" for x, y in outline) + "z M"
                         + "L".join(f"{_f(x)} {_f(y)}" for x, y in corners) + "z")
    for k, (letter, pol) in enumerate(zip(coil_phase_letters, coil_polarity)):
        angle = 2.0 * math.pi * k / q
        deg = _f(-math.degrees(angle))
        colour = colours.get(letter, PALETTE["grey"])
        x0, y0 = rm - Lh / 2 - w, -Wh / 2 - w
        # Outer outline minus the hole, one path with the even-odd rule.
        if keystone:
            path = keystone_path
        else:
            path = (f"M{_f(x0)} {_f(y0)}h{_f(Lh + 2 * w)}v{_f(Wh + 2 * w)}h{_f(-(Lh + 2 * w))}z "
                    f"M{_f(rm - Lh / 2)} {_f(-Wh / 2)}h{_f(Lh)}v{_f(Wh)}h{_f(-Lh)}z")
        lead_x = rm + Lh / 2 + w / 2
        lead_y = (Wo if keystone else Wh) / 2 + w / 2
        body.append(
            f'<g transform="rotate({deg})">'
            f'<path d="{path}" fill="{colour}" fill-opacity="0.85" fill-rule="evenodd" '
            f'stroke="{PALETTE["ink"]}" stroke-width="{stroke}"/>'
            f'<circle cx="{_f(lead_x)}" cy="{_f(-lead_y)}" r="{_f(dot)}" fill="white" '
            f'stroke="{PALETTE["ink"]}" stroke-width="{stroke}"/>'
            f'<circle cx="{_f(lead_x)}" cy="{_f(-lead_y)}" r="{_f(dot * 0.55)}" fill="{PALETTE["ink"]}"/>'
            f'<circle cx="{_f(lead_x)}" cy="{_f(lead_y)}" r="{_f(dot)}" fill="white" '
            f'stroke="{PALETTE["ink"]}" stroke-width="{stroke}"/></g>')
        x, y = _polar(rm, angle)
        sign = "+" if pol > 0 else "\u2212"
        body.append(f'<text x="{_f(x)}" y="{_f(y)}" font-size="{font}" fill="{PALETTE["ink"]}" '
                    f'text-anchor="middle" dominant-baseline="central" font-weight="bold">'
                    f"{escape(str(letter))}{sign}</text>")
        x, y = _polar(ro + 0.5 * float(font) + 2.0, angle)
        body.append(f'<text x="{_f(x)}" y="{_f(y)}" font-size="{_f(float(font) * 0.8)}" '
                    f'fill="{PALETTE["ink"]}" text-anchor="middle" dominant-baseline="central">{k + 1}</text>')
    return _frame(R, title, scale, body)


def nice_ticks(lo: float, hi: float, n: int = 5) -> list[float]:
    """Round tick values (1, 2, 2.5, 5 x 10^k steps) covering [lo, hi]."""
    if not math.isfinite(lo) or not math.isfinite(hi):
        return [0.0, 1.0]
    if hi <= lo:
        hi = lo + (abs(lo) if lo else 1.0)
    raw = (hi - lo) / max(n - 1, 1)
    mag = 10.0 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)
    start = math.floor(lo / step) * step
    ticks, t = [], start
    while t < hi + 0.5 * step:
        ticks.append(round(t, 10))
        t += step
    return ticks


def _tick_label(x: float) -> str:
    return f"{x:g}" if abs(x) >= 1e-9 else "0"


def performance_svg(rows: list[dict], sailing_rpm: float, cut_in_rpm: float | None = None) -> str:
    """Four small plots against shaft speed: charge current, drag torque, efficiency, coil temperature.

    Parameters
    ----------
    rows : list of dict
        `report.evaluation.rpm_table` rows.
    sailing_rpm : float
        Marked with a dashed line [rpm].
    cut_in_rpm : float, optional
        Marked with a dotted line [rpm].

    Returns
    -------
    str
        An ``<svg>`` element about 170 mm wide.
    """
    panels = [("charge_current_A", "Charge current [A]", 1.0),
              ("drag_torque_Nm", "Drag torque [N m]", 1.0),
              ("efficiency", "Efficiency [%]", 100.0),
              ("coil_temperature_C", "Coil temperature [\N{DEGREE SIGN}C]", 1.0)]
    W, H = 170.0, 120.0
    pw, ph = 70.0, 38.0
    ox = (12.0, 97.0)
    oy = (8.0, 66.0)
    rpm = [r["rpm"] for r in rows]
    xt = nice_ticks(0.0, max(rpm) if rpm else 1.0)
    x_lo, x_hi = xt[0], xt[-1]
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {_f(W)} {_f(H)}" width="{_f(W)}mm" '
           f'height="{_f(H)}mm" font-family="sans-serif" role="img" class="plot">',
           "<title>Performance against shaft speed</title>"]
    for j, (key, label, factor) in enumerate(panels):
        x0, y0 = ox[j % 2], oy[j // 2]
        # A coil temperature with no steady state (runaway) is not a number to plot: leave it out
        # of the curve and say "runaway" from the first speed where it happens.
        runaway = [bool(r.get("thermal_runaway")) and key == "coil_temperature_C" for r in rows]
        ys = [r[key] * factor for r in rows]
        kept = [y for y, bad in zip(ys, runaway) if not bad]
        yt = nice_ticks(min(0.0, min(kept, default=0.0)), max(kept, default=1.0))
        y_lo, y_hi = yt[0], yt[-1]

        def px(x):
            return x0 + pw * (x - x_lo) / (x_hi - x_lo)

        def py(y):
            return y0 + ph - ph * (y - y_lo) / (y_hi - y_lo)

        out.append(f'<rect x="{_f(x0)}" y="{_f(y0)}" width="{_f(pw)}" height="{_f(ph)}" fill="white" '
                   f'stroke="{PALETTE["grey"]}" stroke-width="0.25"/>')
        for t in yt:
            out.append(f'<line x1="{_f(x0)}" x2="{_f(x0 + pw)}" y1="{_f(py(t))}" y2="{_f(py(t))}" '
                       f'stroke="{PALETTE["sand"]}" stroke-width="0.2"/>'
                       f'<text x="{_f(x0 - 1)}" y="{_f(py(t))}" font-size="2.6" text-anchor="end" '
                       f'dominant-baseline="central" fill="{PALETTE["ink"]}">{_tick_label(t)}</text>')
        for t in xt:
            out.append(f'<text x="{_f(px(t))}" y="{_f(y0 + ph + 3.2)}" font-size="2.6" text-anchor="middle" '
                       f'fill="{PALETTE["ink"]}">{_tick_label(t)}</text>')
        for mark, dash in ((sailing_rpm, "1.5 1"), (cut_in_rpm, "0.4 0.8")):
            if mark is not None and x_lo <= mark <= x_hi:
                out.append(f'<line x1="{_f(px(mark))}" x2="{_f(px(mark))}" y1="{_f(y0)}" y2="{_f(y0 + ph)}" '
                           f'stroke="{PALETTE["rust"]}" stroke-width="0.3" stroke-dasharray="{dash}"/>')
        pts = " ".join(f"{_f(px(x))},{_f(py(y))}" for x, y, bad in zip(rpm, ys, runaway) if not bad)
        out.append(f'<polyline points="{pts}" fill="none" stroke="{PALETTE["navy"]}" stroke-width="0.5"/>')
        out.extend(f'<circle cx="{_f(px(x))}" cy="{_f(py(y))}" r="0.6" fill="{PALETTE["teal"]}"/>'
                   for x, y, bad in zip(rpm, ys, runaway) if not bad)
        if any(runaway):
            first = rpm[runaway.index(True)]
            out.append(f'<text x="{_f(px(first))}" y="{_f(y0 + 4)}" font-size="2.8" fill="{PALETTE["rust"]}" '
                       f'class="runaway">runaway from {first:.0f} rpm</text>')
        out.append(f'<text x="{_f(x0)}" y="{_f(y0 - 2)}" font-size="3" font-weight="bold" '
                   f'fill="{PALETTE["navy"]}">{escape(label)}</text>')
        out.append(f'<text x="{_f(x0 + pw)}" y="{_f(y0 + ph + 7)}" font-size="2.6" text-anchor="end" '
                   f'fill="{PALETTE["ink"]}">shaft speed [rpm]</text>')
    out.append(f'<text x="{_f(W / 2)}" y="{_f(H - 1.5)}" font-size="2.6" text-anchor="middle" '
               f'fill="{PALETTE["rust"]}">dashed: sailing rpm; dotted: cut-in rpm</text>')
    out.append("</svg>")
    return "\n".join(out)
