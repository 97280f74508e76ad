"""Reading the pictures back: the SVG elements apsidal ids, their points, and the scales
a picture carries in itself (the body drawn to scale, the value axis's ticks), so a test
can turn a drawn position back into kilometres or metres per second without asking the
drawing code."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

import numpy as np

SVG = "{http://www.w3.org/2000/svg}"
XLINK = "{http://www.w3.org/1999/xlink}"
_NUM = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


def parse(data: bytes | str) -> ET.Element:
    return ET.fromstring(data)


def by_id(root: ET.Element) -> dict[str, ET.Element]:
    return {el.get("id"): el for el in root.iter() if el.get("id")}


def ids_like(root: ET.Element, pattern: str) -> dict[str, ET.Element]:
    rx = re.compile(pattern)
    return {k: v for k, v in by_id(root).items() if rx.fullmatch(k)}


def path_points(el: ET.Element) -> np.ndarray:
    """The end points of every segment of the first path in ``el`` (M, L and C end
    points; z adds nothing), in SVG points."""
    path = el if el.tag == f"{SVG}path" else next(el.iter(f"{SVG}path"))
    d = path.get("d")
    out = []
    for cmd, args in re.findall(r"([MLCz])([^MLCz]*)", d):
        nums = [float(x) for x in _NUM.findall(args)]
        if cmd in "ML":
            out += [nums[i:i + 2] for i in range(0, len(nums), 2)]
        elif cmd == "C":
            out += [nums[i + 4:i + 6] for i in range(0, len(nums), 6)]
    return np.array(out)


def marker_positions(el: ET.Element) -> np.ndarray:
    """Where a line's markers were drawn: the x, y of each <use> in the group."""
    return np.array([[float(u.get("x")), float(u.get("y"))] for u in el.iter(f"{SVG}use")])


def body_scale(root: ET.Element, radius_km: float, prefix: str = ""):
    """(centre x, centre y, points per km) from the body's circle, drawn to scale."""
    pts = path_points(by_id(root)[f"{prefix}body"])
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    centre = (lo + hi) / 2.0
    return centre[0], centre[1], (hi[0] - lo[0]) / 2.0 / radius_km


def to_km(xy: np.ndarray, scale) -> np.ndarray:
    """SVG points to the view's km (y up)."""
    cx, cy, k = scale
    return np.stack([(xy[..., 0] - cx) / k, (cy - xy[..., 1]) / k], axis=-1)


def axis(root: ET.Element, which: str = "y", prefix: str = "") -> tuple[float, float]:
    """(offset, slope) with value = offset + slope * svg coordinate, from the labelled
    ticks of the ``which`` axis ("x" or "y")."""
    pairs = []
    for key, el in by_id(root).items():
        if not re.fullmatch(rf"{prefix}{which}tick_\d+", key):
            continue
        use = next(el.iter(f"{SVG}use"), None)
        text = next(el.iter(f"{SVG}text"), None)
        if use is None or text is None or text.text is None:
            continue
        label = text.text.replace("\u2212", "-").replace(",", "")
        pairs.append((float(use.get(which)), float(label)))
    (c0, v0), (c1, v1) = pairs[0], pairs[-1]
    slope = (v1 - v0) / (c1 - c0)
    return v0 - slope * c0, slope


def y_axis(root: ET.Element, prefix: str = "") -> tuple[float, float]:
    return axis(root, "y", prefix)
