"""Hypothesis strategies for valid plan text, for property tests of any stage.

``plan_texts()`` draws a plan that parses, lowers and prices to the end without an error
(expectations may fail; that is not an error), written in a deliberately untidy layout:
random spacing and tabs, units glued to their numbers or not, fields in any order,
blocks on one line or several, blank lines and comments (own-line and trailing)
anywhere a comment can go.  ``plan_texts(tidy=True)`` writes the same plans with single
spaces and no comments.

The generator keeps a rough account of the orbit (periapsis and apoapsis altitudes,
inclination, whether it is circular) so that every goal it writes can be met where it
stands, with wide margins around what the small explicit burns can shift.  The craft
is fictional (10 kg dry, ten thousand tonnes of propellant) so that no drawn plan runs
out, and its drops are small enough never to exceed its dry mass.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from hypothesis import strategies as st

# Step names that are no keyword of the language.
EARTH_RADIUS = 6378.137  # km, the radius of both bodies the plans fly around
NAME_WORDS = ("raise", "lift", "circ", "tweak", "settle", "wait", "cover", "turn", "lower",
              "kick", "probe", "loiter", "shift", "hop")
COMMENT_WORDS = ("note", "see", "review", "TODO", "{", "}", '"quoted"', "#", ":", ",", "5 %",
                 "burn", "apoapsis to 1 km", "é", "->")


@dataclass
class Orbit:
    """The generator's rough idea of the orbit: altitudes in km, inclination in deg."""

    periapsis: float
    apoapsis: float
    inclination: float
    circular: bool
    drift: float = 0.0  # how far small explicit burns may have moved the apsides, km


@dataclass
class Statement:
    """One statement as words; a word that is a (number, unit) pair may lose its space."""

    words: list
    block: list[list] | None = None  # items of a `body` / `craft` block, each as words
    keyword: str = ""


@dataclass
class Draft:
    statements: list[Statement] = field(default_factory=list)


def q(number, unit: str) -> tuple[str, str]:
    """A quantity word: the number as written and its unit."""
    return (number if isinstance(number, str) else _num(number), unit)


def _num(x: float) -> str:
    text = f"{x:.6g}"
    return text if "e" not in text else f"{x:.3f}"


@st.composite
def numbers(draw, lo: float, hi: float, places: int = 1) -> str:
    """A number in [lo, hi] written as a reader might: `400`, `400.0`, `4e2`."""
    x = round(draw(st.floats(lo, hi, allow_nan=False, allow_infinity=False)), places)
    x = min(max(x, lo), hi)
    style = draw(st.sampled_from(("plain", "plain", "plain", "fixed", "exp")))
    if style == "fixed":
        return f"{x:.{places + 1}f}"
    if style == "exp" and x > 0:
        return f"{x:.4e}"
    return _num(x)


class _Names:
    def __init__(self, draw):
        self.draw = draw
        self.used: set[str] = set()

    def maybe(self) -> list[str]:
        if self.draw(st.booleans()):
            return []
        word = self.draw(st.sampled_from(NAME_WORDS))
        name = word
        k = 2
        while name in self.used:
            name, k = f"{word}-{k}", k + 1
        self.used.add(name)
        return [name]


def _scene(draw, d: Draft) -> tuple[Orbit, list[str]]:
    if draw(st.booleans()):
        d.statements.append(Statement(["plan", '"' + draw(st.text(
            st.sampled_from("abc XYZ-:0123"), min_size=1, max_size=20)) + '"']))
    body = "earth"
    if draw(st.booleans()):
        body = "terra"
        items = [["gm", q("398600.4418", "km3/s2")], ["radius", q("6378.137", "km")]]
        if draw(st.booleans()):
            items.append(["soi", q("924000", "km")])
        if draw(st.booleans()):
            items.append(["j2", "0.00108263"])
        d.statements.append(Statement(["body", body, "{"], draw(st.permutations(items))))
    scene = [Statement(["around", body])]
    engines = [["engine", "main", "isp", q(draw(numbers(300, 460, 0)), "s"), "thrust",
                q(draw(numbers(200, 5000, 0)), "N")]]
    names = ["main"]
    if draw(st.booleans()):
        engines.append(["engine", "aux", "thrust", q("20", "N"), "isp", q("300", "s")])
        names.append("aux")
    propellant = draw(st.sampled_from((("1e7", "kg"), ("10000000", "kg"), ("10000", "t"))))
    items = [["dry", q("10", "kg")], ["propellant", q(*propellant)]]
    if draw(st.booleans()):
        items.append(["residual", draw(st.sampled_from((q("2", "%"), q("1", "kg"))))])
    craft = Statement(["craft", "ship", "{"], draw(st.permutations(items)) + engines)
    scene.append(craft)
    if draw(st.booleans()):
        scene.append(Statement(["margin", q(draw(numbers(0, 10, 1)), "%")]))
    if draw(st.booleans()):
        scene.append(Statement(["reserve", q(draw(numbers(0, 50, 1)), "m/s")]))
    if draw(st.booleans()):  # the date of the start (`apsidal export`)
        day = draw(st.dates()).isoformat()
        clock = draw(st.sampled_from(("00:00:00", "12:30:05.250", "23:59:59.9")))
        scene.append(Statement(["epoch", f"{day}T{clock}",
                                draw(st.sampled_from(("UTC", "TAI", "TT", "GPS", "TDB")))]))
    d.statements += draw(st.permutations(scene))
    inc = float(draw(numbers(0, 60, 1)))
    angles = [w for k in ("raan", "argp") if draw(st.booleans())
              for w in (k, q(draw(numbers(0, 359, 1)), "deg"))]
    if draw(st.booleans()):
        alt = float(draw(numbers(400, 3000, 0)))
        d.statements.append(Statement(["start", "circular", q(_num(alt), "km"),
                                       "inclination", q(_num(inc), "deg"), *angles]))
        return Orbit(alt, alt, inc, True), names
    pe = float(draw(numbers(400, 2000, 0)))
    ap = pe + float(draw(numbers(0, 20000, 0)))
    d.statements.append(Statement(["start", "orbit", "periapsis", q(_num(pe), "km"),
                                   "apoapsis", q(_num(ap), "km"), "inclination",
                                   q(_num(inc), "deg"), *angles]))
    return Orbit(pe, ap, inc, pe == ap), names


def _options(draw, engines: list[str]) -> list:
    out = []
    if draw(st.booleans()):
        out += ["using", draw(st.sampled_from(engines))]
    if draw(st.integers(0, 3)) == 0:
        out += ["margin", q(draw(numbers(0, 20, 0)), "%")]
    if len(out) == 4 and draw(st.booleans()):
        out = out[2:] + out[:2]
    return out


def _step(draw, names: _Names, orbit: Orbit, engines: list[str], heavy: list[int]):
    """One step that can be flown from ``orbit``; updates ``orbit``."""
    low = 300.0 + orbit.drift
    kinds = ["coast", "drop", "expect", "vector", "apoapsis", "circularise", "allow"]
    if orbit.apoapsis - orbit.periapsis < 1000.0 + orbit.drift:  # ecc rises: see `ecc`
        kinds.append("ecc")
    if orbit.apoapsis - 300.0 - orbit.drift > low:
        kinds.append("periapsis")
    if heavy[0] < 3:
        kinds += ["plane"] + (["transfer", "phasing"] if orbit.circular else [])
    kind = draw(st.sampled_from(kinds))
    name = names.maybe()
    if kind == "coast":
        form = draw(st.sampled_from(("for", "to", "rev")))
        if form == "for":
            unit = draw(st.sampled_from(("s", "min", "h", "d")))
            return ["coast", *name, "for", q(draw(numbers(1, 5, 1)), unit)]
        if form == "to":
            places = [["apoapsis"], ["periapsis"], ["anomaly", q("120", "deg")],
                      ["next", "apoapsis"], ["next", "node"]]
            if orbit.apoapsis - orbit.periapsis > 4 * orbit.drift + 200.0:  # crossed twice
                middle = q(_num(round((orbit.periapsis + orbit.apoapsis) / 2)), "km")
                places += [[middle], ["next", "radius", q(_num(round(
                    6378.137 + (orbit.periapsis + orbit.apoapsis) / 2)), "km")]]
            return ["coast", *name, "to", *draw(st.sampled_from(places))]
        return ["coast", *name, draw(st.sampled_from(("1", "2", "3", "0.5", "2.25"))), "rev"]
    if kind == "drop":
        return ["drop", *name, q(draw(numbers(0.1, 0.5, 1)), "kg")]
    if kind == "allow":
        words = ["allow", *name, q(draw(numbers(0, 30, 1)), "m/s")]
        if draw(st.booleans()):
            words += ["per", "year", "for", q(draw(numbers(1, 15, 0)), "yr")]
        if draw(st.booleans()):
            words.append("statistical")
        return [*words, *_options(draw, engines)]
    if kind == "expect":
        checks = draw(st.lists(st.sampled_from((
            ["mass", "at", "least", q("1", "kg")],
            ["periapsis", q("500", "km"), "within", q("100000", "km")],
            ["inclination", q(_num(round(orbit.inclination)), "deg"), "within",
             q("180", "deg")],
            ["ecc", "at", "most", "0.99"],
            ["apoapsis", "at", "most", "radius", q("100000", "km")],
            ["elapsed", "at", "least", q("0", "s")],
            ["c3", "at", "most", q("0", "km2/s2")],
            ["anomaly", q("0", "deg"), "within", q("180", "deg")],
        )), min_size=1, max_size=3))
        body = []
        for k, c in enumerate(checks):
            body += ([","] if k else []) + c
        return ["expect", *name, *body]
    head = ["burn", *name]
    if kind == "vector":
        frame = draw(st.sampled_from((None, "vnb", "rtn")))
        words = {None: ("along", "cross", "radial"), "vnb": ("velocity", "normal", "binormal"),
                 "rtn": ("radial", "transverse", "normal")}[frame]
        parts = draw(st.lists(st.sampled_from(words), min_size=1, max_size=3, unique=True))
        goals = []
        for k, p in enumerate(parts):
            goals += ([","] if k else []) + [p, q(draw(numbers(-2, 2, 1)), "m/s")]
        orbit.circular = False
        orbit.drift += 15.0
        return [*head, ":", *goals, *_options(draw, engines),
                *(["frame", frame] if frame else [])]
    if kind == "ecc":
        # at periapsis a larger eccentricity keeps the periapsis (the tangential burn):
        # the apoapsis radius becomes rp (1 + E) / (1 - E)
        target = round(float(draw(numbers(0.05, 0.5, 2))), 2)
        rp = orbit.periapsis + EARTH_RADIUS
        orbit.apoapsis = rp * (1 + target) / (1 - target) - EARTH_RADIUS
        orbit.circular = False
        orbit.drift += 50.0
        return [*head, "at", "periapsis", ":", "ecc", "to", _num(target),
                *_options(draw, engines)]
    if kind == "apoapsis":
        target = orbit.periapsis + orbit.drift + float(draw(numbers(200, 30000, 0)))
        orbit.apoapsis, orbit.circular = target, False
        return [*head, "at", *draw(st.sampled_from((["periapsis"], ["next", "periapsis"]))),
                ":", "apoapsis", "to", q(_num(target), "km"), *_options(draw, engines)]
    if kind == "periapsis":
        target = float(draw(numbers(low, orbit.apoapsis - 300.0 - orbit.drift, 0)))
        orbit.periapsis, orbit.circular = target, False
        return [*head, "at", "apoapsis", ":", "periapsis", "to", q(_num(target), "km"),
                *_options(draw, engines)]
    if kind == "circularise":
        at = draw(st.sampled_from(("periapsis", "apoapsis")))
        alt = orbit.periapsis if at == "periapsis" else orbit.apoapsis
        orbit.periapsis = orbit.apoapsis = alt
        orbit.circular = True
        return [*head, "at", at, ":", "circular", *_options(draw, engines)]
    heavy[0] += 1
    if kind == "phasing":  # ahead little enough to stay clear of the surface from 400 km
        angle = draw(st.sampled_from(("20", "-40", "7.5", "-120")))
        return ["transfer", *name, ":", "phase", q(angle, "deg"), "in",
                str(draw(st.integers(3, 5))), "rev", *_options(draw, engines)]
    if kind == "plane":
        target = min(90.0, max(0.0, orbit.inclination + float(draw(numbers(-15, 15, 1)))))
        orbit.inclination = target
        return [*head, "at", draw(st.sampled_from(("node", "ascending node",
                                                   "descending node"))).split(), ":",
                "inclination", "to", q(_num(target), "deg"), *_options(draw, engines)]
    target = float(draw(numbers(400, 40000, 0)))
    goals = ["circular", q(_num(target), "km")]
    where: list[str] = []
    if draw(st.booleans()):
        # a new plane must hold the craft's position: start the transfer at a node
        plane = min(90.0, max(0.0, orbit.inclination + float(draw(numbers(-10, 10, 1)))))
        goals += [",", "inclination", "to", q(_num(plane), "deg")]
        where = ["at", *draw(st.sampled_from(("node", "ascending node",
                                              "descending node"))).split()]
        orbit.inclination = plane
    words = ["transfer", *name, *where, ":", *goals]
    if draw(st.integers(0, 3)) == 0:
        words += ["via", "apoapsis", q(_num(max(target, orbit.apoapsis) + 20000), "km")]
    orbit.periapsis = orbit.apoapsis = target
    orbit.drift = 0.0
    return [*words, *_options(draw, engines)]


def _flatten(words: list) -> list:
    out = []
    for w in words:
        out += w if isinstance(w, list) else [w]
    return out


@st.composite
def drafts(draw, max_steps: int = 7) -> Draft:
    d = Draft()
    orbit, engines = _scene(draw, d)
    names = _Names(draw)
    heavy = [0]
    for _ in range(draw(st.integers(0, max_steps))):
        d.statements.append(Statement(_flatten(_step(draw, names, orbit, engines, heavy))))
    if draw(st.integers(0, 4)) == 0:  # the way down: a last burn under the interface, entry
        d.statements.append(Statement(["burn", *names.maybe(), ":", "periapsis", "to",
                                       q(draw(st.sampled_from(("50", "-20"))), "km")]))
        d.statements.append(Statement(["entry", *names.maybe(), "at",
                                       *draw(st.sampled_from(([q("120", "km")],
                                                              ["radius", q("6500", "km")])))]))
    return d


# --- writing the draft out ------------------------------------------------------------


def _comment(draw) -> str:
    words = draw(st.lists(st.sampled_from(COMMENT_WORDS), min_size=0, max_size=4))
    return "#" + draw(st.sampled_from(("", " "))) + " ".join(words)


class _Writer:
    def __init__(self, draw, tidy: bool):
        self.draw, self.tidy = draw, tidy

    def gap(self) -> str:
        return " " if self.tidy else self.draw(st.sampled_from((" ", " ", "  ", "\t", " \t")))

    def word(self, w) -> str:
        if isinstance(w, tuple):
            number, unit = w
            if not unit:
                return number
            glue = "" if (not self.tidy and self.draw(st.booleans())) else " "
            return number + glue + unit
        return w

    def join(self, words) -> str:
        out = ""
        for k, w in enumerate(words):
            text = self.word(w)
            if k and not (text in (":", ",") and not self.tidy and self.draw(st.booleans())):
                out += self.gap()
            out += text
        return out

    def trailing(self) -> str:
        if self.tidy or self.draw(st.integers(0, 3)):
            return ""
        return self.gap() + _comment(self.draw)

    def own_lines(self, indent: str = "") -> list[str]:
        if self.tidy or self.draw(st.integers(0, 3)):
            return []
        return [indent + _comment(self.draw)
                for _ in range(self.draw(st.integers(1, 2)))]

    def blanks(self) -> list[str]:
        if self.tidy:
            return []
        return [self.draw(st.sampled_from(("", "  ", "\t")))
                for _ in range(self.draw(st.integers(0, 2)))]

    def block(self, s: Statement) -> list[str]:
        if not self.tidy and self.draw(st.integers(0, 3)) == 0:  # all on one line
            inner = self.gap().join(self.join(i) for i in s.block)
            return [f"{self.join(s.words)} {inner} }}" + self.trailing()]
        indent = "" if self.tidy else self.draw(st.sampled_from(("", "  ", "    ", "\t")))
        lines = [self.join(s.words) + self.trailing()]
        for item in s.block:
            lines += self.own_lines(indent)
            lines.append(indent + self.join(item) + self.trailing())
        lines += self.own_lines(indent)
        return lines + ["}" + self.trailing()]

    def text(self, d: Draft) -> str:
        lines: list[str] = []
        for s in d.statements:
            lines += self.blanks() + self.own_lines()
            lines += self.block(s) if s.block is not None else [self.join(s.words)
                                                                 + self.trailing()]
        lines += self.blanks() + self.own_lines()
        ending = "\n" if self.tidy or self.draw(st.integers(0, 4)) else ""
        return "\n".join(lines) + ending


@st.composite
def plan_texts(draw, tidy: bool = False, max_steps: int = 7) -> str:
    """The text of a valid plan (see the module docstring)."""
    return _Writer(draw, tidy).text(draw(drafts(max_steps)))


def start_orbits(inclinations, hyperbolas: bool = False):
    """Random `start` lines: an ellipse with every angle drawn, a circle at one of
    ``inclinations``, and with ``hyperbolas`` an open orbit near its periapsis."""
    kinds = [
        st.builds(lambda pe, dap, i, raan, argp, nu:
                  f"start orbit periapsis {pe:.3f} km apoapsis {pe + dap:.3f} km "
                  f"inclination {i:.4f} deg raan {raan:.4f} deg argp {argp:.4f} deg "
                  f"anomaly {nu:.4f} deg",
                  st.floats(300, 5000), st.floats(0, 40000), st.floats(0, 180),
                  st.floats(0, 359), st.floats(0, 359), st.floats(0, 359)),
        st.builds(lambda alt, i: f"start circular {alt:.3f} km inclination {i:.4f} deg",
                  st.floats(300, 40000), st.sampled_from(list(inclinations))),
    ]
    if hyperbolas:
        kinds.append(st.builds(lambda pe, e, i, nu: f"start orbit periapsis {pe:.3f} km "
                               f"ecc {e:.4f} inclination {i:.4f} deg anomaly {nu:.4f} deg",
                               st.floats(300, 5000), st.floats(1.05, 3.0),
                               st.floats(0, 180), st.floats(-60, 60)))
    return st.one_of(*kinds)
