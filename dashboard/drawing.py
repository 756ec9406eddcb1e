"""A top view of a robot profile's tracking wheels, as SVG: offsets and signs in REP 103.

Owns the picture that explains a profile: the robot seen from above with
x (forward) pointing up the page and y (left) pointing left, each wheel at
its (x, y) with an arrow along its rolling direction and its offsets written
with their signs. Pure: a Profile in, SVG text out.

    python -m dashboard.drawing replay_fixtures/practice-bot.toml profile.svg
"""

from __future__ import annotations

import math
import sys
from xml.sax.saxutils import escape

from receiver.errors import PodwatchError
from receiver.formats.profile_toml import load_profile
from receiver.odometry.robot import Profile

SIZE = 480  # px, square
INK = "#1b1b1b"
WHEEL = "#0072b2"  # Okabe-Ito blue (colour-blind safe)
AXIS = "#d55e00"  # Okabe-Ito vermillion


def _fmt(value: float) -> str:
    return f"{value:+.2f}".rstrip("0").rstrip(".") if value else "0"


def profile_svg(profile: Profile) -> str:
    """The drawing for ``profile``; scaled so that every wheel fits with room for labels."""
    reach = max(max(abs(w.x), abs(w.y)) for w in profile.wheels) or 1.0
    scale = (SIZE * 0.24) / reach  # px per profile unit
    cx = cy = SIZE / 2

    def page(x: float, y: float) -> tuple[float, float]:
        # REP 103 body frame to page: +x up, +y left.
        return cx - y * scale, cy - x * scale

    unit = profile.distance_unit
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{SIZE}" height="{SIZE}" viewBox="0 0 {SIZE} {SIZE}" '
        f'font-family="sans-serif" font-size="12">',
        '<defs><marker id="head" markerWidth="6" markerHeight="6" refX="5" refY="3" markerUnits="strokeWidth" orient="auto">'
        f'<path d="M0,0 L6,3 L0,6 z" fill="{INK}"/></marker></defs>',
        f'<rect x="0" y="0" width="{SIZE}" height="{SIZE}" fill="white"/>',
        f'<text x="12" y="20" font-size="14" fill="{INK}">{escape(profile.name)}: tracking wheels seen from above '
        f"(REP 103, {escape(unit)})</text>",
    ]
    # Axes through the robot's centre.
    arm = SIZE * 0.42
    parts += [
        f'<line x1="{cx}" y1="{cy}" x2="{cx}" y2="{cy - arm}" stroke="{AXIS}" stroke-width="2" marker-end="url(#head)"/>',
        f'<text x="{cx + 6}" y="{cy - arm + 12}" fill="{AXIS}">+x forward</text>',
        f'<line x1="{cx}" y1="{cy}" x2="{cx - arm}" y2="{cy}" stroke="{AXIS}" stroke-width="2" marker-end="url(#head)"/>',
        f'<text x="{cx - arm}" y="{cy - 8}" fill="{AXIS}">+y left</text>',
        f'<path d="M{cx + 40},{cy} A40,40 0 0,0 {cx},{cy - 40}" fill="none" stroke="{AXIS}" '
        f'stroke-width="1.5" marker-end="url(#head)"/>',
        f'<text x="{cx + 8}" y="{cy - 48}" fill="{AXIS}">+heading (CCW)</text>',
        f'<circle cx="{cx}" cy="{cy}" r="3" fill="{INK}"/>',
    ]
    for wheel in profile.wheels:
        px, py = page(wheel.x, wheel.y)
        phi = math.radians(wheel.angle)
        # Rolling direction (cos phi, sin phi) in the body frame, drawn on the page.
        dx, dy = -math.sin(phi), -math.cos(phi)
        half = 16
        rotate = math.degrees(math.atan2(dy, dx))
        parts += [
            f'<rect x="{px - half}" y="{py - 6}" width="{2 * half}" height="12" rx="3" fill="{WHEEL}" '
            f'transform="rotate({rotate:.1f} {px:.1f} {py:.1f})"/>',
            f'<line x1="{px:.1f}" y1="{py:.1f}" x2="{px + dx * 34:.1f}" y2="{py + dy * 34:.1f}" stroke="{INK}" '
            f'stroke-width="1.5" marker-end="url(#head)"/>',
        ]
        # Labels sit on the outer side of side wheels, beside the others.
        anchor, tx = ("end", px - 14) if px < cx - 1 else ("start", px + 14)
        label = f'text-anchor="{anchor}" fill="{INK}"'
        parts += [
            f'<text x="{tx:.1f}" y="{py + 28:.1f}" {label}>{escape(wheel.name)}'
            f"{' (reversed)' if wheel.reversed else ''}</text>",
            f'<text x="{tx:.1f}" y="{py + 42:.1f}" {label}>x {_fmt(wheel.x)}, y {_fmt(wheel.y)}</text>',
            f'<text x="{tx:.1f}" y="{py + 56:.1f}" {label}>rolls {wheel.angle:g} deg</text>',
        ]
    parts += [
        f'<text x="12" y="{SIZE - 28}" fill="{INK}">Right of centre: y &lt; 0. Behind centre: x &lt; 0.</text>',
        f'<text x="12" y="{SIZE - 12}" fill="{INK}">Arrows: rolling direction; counts rise that way unless reversed.</text>',
    ]
    parts.append("</svg>")
    return "\n".join(parts) + "\n"


def main(argv: list[str] | None = None) -> int:
    """``python -m dashboard.drawing PROFILE.toml OUT.svg``: write the profile's drawing;
    returns the exit status.
    """
    args = sys.argv[1:] if argv is None else argv
    if len(args) != 2:
        print("usage: python -m dashboard.drawing PROFILE.toml OUT.svg", file=sys.stderr)
        return 2
    try:
        svg = profile_svg(load_profile(args[0]))
    except PodwatchError as exc:
        print(f"podwatch: error: {exc}", file=sys.stderr)
        return 1
    with open(args[1], "w", encoding="utf-8") as fh:
        fh.write(svg)
    return 0


if __name__ == "__main__":
    sys.exit(main())
