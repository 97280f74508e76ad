"""The hand-off to high-fidelity tools: a priced plan as a CCSDS Orbit Parameter Message.

The Orbit Parameter Message (OPM) is one of the Orbit Data Messages of the Consultative
Committee for Space Data Systems, CCSDS 502.0-B-3 (Blue Book, issue 3, April 2023); this
module writes and reads its keyword = value notation (KVN), version 3.0.  What is written
(docs/export.md):

* the header (``CCSDS_OPM_VERS``, ``CREATION_DATE``, ``ORIGINATOR``) and the metadata
  (``OBJECT_NAME`` the craft, ``OBJECT_ID``, ``CENTER_NAME`` the body, ``REF_FRAME``,
  ``TIME_SYSTEM`` the scale of the plan's ``epoch``);
* the start state at the plan's ``epoch``: position and velocity [km], [km/s], and the
  osculating Keplerian elements with the body's GM;
* the spacecraft mass at the start [kg];
* one manoeuvre block per burn (transfers give one per burn they expand into) and per
  release (`drop`, a block with no velocity change), in the order flown.

A burn's ignition is centred on its impulse: ``MAN_EPOCH_IGNITION`` is the impulse's
time less half the burn time, ``MAN_DURATION`` the burn time from thrust and mass flow,
``MAN_DELTA_MASS`` minus the propellant the budget books for it (the plan's margin
included, so the mass after each block is the budget's), and ``MAN_DV_1..3`` the
velocity change itself (no margin) in the radial-transverse-normal frame of the state
just before the impulse.  Elapsed seconds are added to the epoch as a uniform scale: no
leap second is inserted (a UTC plan across a leap second is one second early after it).

>>> text = "epoch 2027-03-01T00:00:00 UTC"
>>> parse_epoch("2027-03-01T00:00:00") + timedelta(seconds=90.5)
datetime.datetime(2027, 3, 1, 0, 1, 30, 500000)
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta

import numpy as np

VERSION = "3.0"
STANDARD = "CCSDS 502.0-B-3 (Orbit Data Messages, April 2023)"

# The inertial frame the plan's axes stand for, by body: the z axis is the body's pole
# (the plan's inclinations are from its equator) and x is the direction of raan 0.
# EME2000 and MCI are values of REF_FRAME the standard lists (section 3.2.3.3).
REF_FRAMES = {"earth": "EME2000", "mars": "MCI"}

# The keywords of each part of the message in the standard's order (tables 3-1 to 3-3),
# with their unit as the standard writes it ("" for none).
HEADER = (("CCSDS_OPM_VERS", ""), ("CREATION_DATE", ""), ("ORIGINATOR", ""))
METADATA = (("OBJECT_NAME", ""), ("OBJECT_ID", ""), ("CENTER_NAME", ""), ("REF_FRAME", ""),
            ("TIME_SYSTEM", ""))
STATE = (("EPOCH", ""), ("X", "km"), ("Y", "km"), ("Z", "km"), ("X_DOT", "km/s"),
         ("Y_DOT", "km/s"), ("Z_DOT", "km/s"))
KEPLER = (("SEMI_MAJOR_AXIS", "km"), ("ECCENTRICITY", ""), ("INCLINATION", "deg"),
          ("RA_OF_ASC_NODE", "deg"), ("ARG_OF_PERICENTER", "deg"), ("TRUE_ANOMALY", "deg"),
          ("GM", "km**3/s**2"))
SPACECRAFT = (("MASS", "kg"),)
MANEUVER = (("MAN_EPOCH_IGNITION", ""), ("MAN_DURATION", "s"), ("MAN_DELTA_MASS", "kg"),
            ("MAN_REF_FRAME", ""), ("MAN_DV_1", "km/s"), ("MAN_DV_2", "km/s"),
            ("MAN_DV_3", "km/s"))
UNITS = {k: u for block in (HEADER, METADATA, STATE, KEPLER, SPACECRAFT, MANEUVER)
         for k, u in block}


class OpmError(ValueError):
    """A message that cannot be read back: the line and what was expected."""


def parse_epoch(text: str) -> datetime:
    """A CCSDS time (7.5.10 of the standard): ``YYYY-MM-DDThh:mm:ss[.d...]`` or the
    day-of-year form ``YYYY-DDDThh:mm:ss[.d...]``, with an optional ``Z``; naive.

    >>> parse_epoch("2027-060T12:00:00.25Z")
    datetime.datetime(2027, 3, 1, 12, 0, 0, 250000)
    """
    text = text.strip().removesuffix("Z")
    m = re.fullmatch(r"(\d{4})-(\d{3})T(\d\d):(\d\d):(\d\d(?:\.\d+)?)", text)
    if m:
        year, day, hh, mm, ss = m.groups()
        base = datetime(int(year), 1, 1) + timedelta(days=int(day) - 1)
        return base + timedelta(hours=int(hh), minutes=int(mm), seconds=float(ss))
    m = re.fullmatch(r"(\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d)(\.\d+)?", text)
    if not m:
        raise OpmError(f"`{text}` is not a CCSDS time (YYYY-MM-DDThh:mm:ss or "
                       "YYYY-DDDThh:mm:ss)")
    return datetime.fromisoformat(m.group(1)) + timedelta(seconds=float(m.group(2) or 0))


def format_epoch(t: datetime) -> str:
    """``2027-03-01T00:01:30.500000``: microseconds, always written; the year in four
    digits (``%Y`` gives ``999`` for the year 999 on some platforms).

    >>> format_epoch(datetime(999, 1, 1))
    '0999-01-01T00:00:00.000000'
    """
    return f"{t.year:04d}" + t.strftime("-%m-%dT%H:%M:%S.%f")


def _num(x: float) -> str:
    """A number with the digits to read it back to the last bit (repr), never NaN."""
    x = float(x)
    if not math.isfinite(x):
        raise ValueError(f"a non-finite number ({x}) cannot go into an OPM")
    return repr(x + 0.0)


# --- the message as data ---------------------------------------------------------------


@dataclass
class Maneuver:
    """One manoeuvre block: ignition epoch, duration (s), delta mass (kg, < 0), the frame
    and the velocity change (km/s); ``name`` and ``kind`` come from its comment."""

    ignition: datetime
    duration: float
    delta_mass: float
    frame: str
    dv: tuple[float, float, float]
    name: str = ""
    kind: str = "burn"  # burn | drop
    engine: str = ""  # the engine, where not the craft's default (said in the comment)

    @property
    def impulse(self) -> datetime:
        """The impulse's time: the middle of the burn."""
        return self.ignition + timedelta(seconds=self.duration / 2.0)


@dataclass
class Opm:
    """What an OPM says, in its own units (km, km/s, deg, kg, s)."""

    header: dict[str, str]
    metadata: dict[str, str]
    epoch: datetime
    r: tuple[float, float, float]
    v: tuple[float, float, float]
    elements: dict[str, float] = field(default_factory=dict)
    mass: float | None = None
    maneuvers: list[Maneuver] = field(default_factory=list)
    comments: list[str] = field(default_factory=list)


# --- writing ---------------------------------------------------------------------------


class ExportError(ValueError):
    """A plan that cannot be written as an OPM; the message says what it needs, and
    ``span`` where (None: the start orbit)."""

    def __init__(self, message: str, span=None):
        super().__init__(message)
        self.span = span


def build(program, result, ref_frame: str | None = None, object_id: str = "UNKNOWN",
          originator: str = "apsidal", created: datetime | None = None,
          impulsive: bool = False) -> Opm:
    """The OPM of a priced plan (``evaluate.run``).  Needs the plan's ``epoch``.

    With ``impulsive`` every burn is written as the standard's impulsive manoeuvre
    (duration 0, ignition at the impulse) instead of a finite burn centred on it."""
    from apsidal.lang import syntax as ast

    from .budget import caution
    from .state import elements_from_state

    epoch_st = next((s for s in program.plan.statements if isinstance(s, ast.Epoch)), None)
    if epoch_st is None:
        raise ExportError("the plan has no `epoch`: an OPM gives the start state at a date "
                          "and time; add a line such as `epoch 2027-03-01T00:00:00 UTC` "
                          "above the `start` orbit")
    leg = next((s for s in program.steps if getattr(s, "kind", "") == "leg"), None)
    if leg is not None:
        raise ExportError(f"an OPM has one central body, and this plan changes body at leg "
                          f"`{leg.name}`: export the phase before it, as a plan of its own "
                          "that ends there, and the arrival as another that starts on its "
                          "hyperbola", getattr(leg, "span", None))
    finite_burns = program.burns == "finite"
    if finite_burns and impulsive:
        raise ExportError("this plan prices its burns finite (`burns finite`): a message of "
                          "impulsive manoeuvres would not be the plan it priced (an impulse "
                          "of the finite delta-v overshoots each goal by the gravity loss); "
                          "export without --impulsive, or remove `burns finite` to price "
                          "and export the plan impulsive",
                          next((st.span for st in program.plan.statements
                                if isinstance(st, ast.Setting) and st.key == "burns"), None))
    body = program.body.name.lower()
    frame = ref_frame or REF_FRAMES.get(body)
    if frame is None:
        raise ExportError(f"which inertial frame do the plan's axes stand for around "
                          f"`{program.body.name}`?  Its z axis is the body's pole and x the "
                          "direction of raan 0; name the frame with --ref-frame (for "
                          "example ICRF, or a frame agreed in your interface document)")
    epoch = parse_epoch(epoch_st.timestamp)
    created = created or datetime.now(UTC).replace(tzinfo=None)
    mu = program.body.gm
    el = elements_from_state(program.start_r[None], program.start_v[None], mu)
    deg = lambda x: float(np.degrees(x[0]))
    opm = Opm(
        header={"CCSDS_OPM_VERS": VERSION, "CREATION_DATE": format_epoch(created),
                "ORIGINATOR": originator},
        metadata={"OBJECT_NAME": program.craft.name, "OBJECT_ID": object_id,
                  "CENTER_NAME": program.body.name.upper(), "REF_FRAME": frame,
                  "TIME_SYSTEM": epoch_st.scale},
        epoch=epoch, r=tuple(float(x) for x in program.start_r),
        v=tuple(float(x) for x in program.start_v),
        elements={"SEMI_MAJOR_AXIS": float(el.sma[0]), "ECCENTRICITY": float(el.ecc[0]),
                  "INCLINATION": deg(el.inclination),
                  "RA_OF_ASC_NODE": deg(el.raan) % 360.0,
                  "ARG_OF_PERICENTER": deg(el.argp) % 360.0,
                  "TRUE_ANOMALY": deg(el.anomaly) % 360.0, "GM": float(mu)},
        mass=float(program.craft.dry + program.craft.propellant),
        comments=[program.title or "apsidal plan", *_wrap(caution(program)),
                  *(_wrap(FINITE_NOTE) if finite_burns else
                    [("Burns are impulsive (duration 0, ignition at the impulse)" if impulsive
                      else "Ignition is centred on the impulse of the two-body estimate")
                     + "; the delta",
                     "mass is the budget's propellant, margin included; no leap seconds are",
                     "inserted."])],
    )
    if program.gravity == "j2":
        opm.comments += _wrap(J2_NOTE)
    try:
        return _maneuvers(opm, program, result, epoch, impulsive, finite_burns)
    except OverflowError:  # a time before the year 1 or after 9999
        raise ExportError("a burn of this plan falls outside the years 1 to 9999 counted "
                          "from its epoch, which a CCSDS time cannot write: move the epoch",
                          epoch_st.span) from None


def _maneuvers(opm: Opm, program, result, epoch: datetime, impulsive: bool,
               finite_burns: bool) -> Opm:
    """``opm`` with a block per burn and per release of the priced plan ``result``."""
    mass = opm.mass
    from .frames import components

    for row in result.rows:
        after = float(row.after.mass[0])
        t = epoch + timedelta(seconds=float(row.after.t[0]))
        if row.kind == "burn" and row.dv_impulsive is not None:
            # flown finite: the thrust arc the chain flew, centred on the impulse point
            # (the row's time is the arc's end), its delta-v along the impulsive burn's
            duration = float(row.finite_time[0])
            t = t - timedelta(seconds=duration / 2.0)
            imp = float(row.dv_impulsive[0])
            change = (row.v_impulsive[:1] - row.v_before[:1]) * (
                float(row.dv[0]) / imp if imp > 0 else 0.0)
            dv = components("rtn", row.r_impulse[:1], row.v_before[:1], change)[0]
        elif row.kind == "burn":
            dv = components("rtn", row.after.r[:1], row.v_before[:1],
                            row.after.v[:1] - row.v_before[:1])[0]
            duration = float(row.burn_time[0]) if row.burn_time is not None else 0.0
            # a plan priced finite keeps some burns impulsive (phasing): it flew them as
            # impulses, which the standard writes with duration 0
            duration = 0.0 if impulsive or finite_burns else duration
        if row.kind == "burn":
            used = mass - after
            if not used > 0.0:  # a burn of nothing: no manoeuvre to fly
                opm.comments.append(f"burn {row.name} changes nothing and is left out")
                mass = after
                continue
            early = duration / 2.0 - (t - epoch).total_seconds()  # t: the impulse
            if early > 0.0:
                opm.comments.append(f"burn {row.name} ignites {early:.3f} s before the epoch "
                                    "(its impulse is at the epoch)")
            engine = "" if row.engine is None or \
                row.engine.name == program.craft.default_engine.name else row.engine.name
            ignition = t - timedelta(seconds=duration / 2.0)
            last = next((m for m in reversed(opm.maneuvers) if m.kind == "burn"), None)
            if last is not None:
                cutoff = last.ignition + timedelta(seconds=last.duration)
                overlap = (cutoff - ignition).total_seconds()
                if overlap > 1e-6:  # centred burns too close together for one engine
                    opm.comments.append(f"burn {row.name} ignites {overlap:.3f} s before burn "
                                        f"{last.name} cuts off: the two overlap")
            opm.maneuvers.append(Maneuver(ignition, duration,
                                          -used, "RTN", tuple(float(x) for x in dv),
                                          row.name, "burn", engine))
        elif row.kind == "allow" and mass - after > 0.0:
            opm.comments.append(f"allowance {row.name}: {mass - after:.6g} kg of propellant "
                                "booked, not a manoeuvre (no block)")
        elif row.kind == "drop" and mass - after > 0.0:
            opm.maneuvers.append(Maneuver(t, 0.0, -(mass - after), "RTN", (0.0, 0.0, 0.0),
                                          row.name, "drop"))
        mass = after
    return opm


# The header note of a plan priced `gravity j2`.
J2_NOTE = ("Under gravity j2 the state and the burn epochs follow the plan's secular "
           "(mean) motion: the short-period J2 terms, of order J2 in every element (some km "
           "in low orbit), are in neither; read the state as mean elements or convert it.")

# The header note of a plan priced `burns finite` (its first words tell the reader so).
FINITE_NOTE = ("Burns are finite thrust arcs (burns finite): each block is the arc the plan "
               "flew, centred on its impulse point (ignition half the duration before it), its "
               "duration the arc's without margin, its velocity change the delta-v the engine "
               "gives over the arc, along the impulsive burn's direction (a burn the plan "
               "keeps impulsive, of a phasing transfer, has duration 0); the delta mass is the "
               "budget's propellant, margin included; no leap seconds are inserted.")


def _wrap(text: str, width: int = 80) -> list[str]:
    import textwrap

    return textwrap.wrap(text, width)


def write(opm: Opm) -> str:
    """The KVN text of ``opm``: blocks in the standard's order, each keyword with its
    unit in brackets where the standard gives one."""
    lines: list[str] = []

    def put(key: str, value) -> None:
        text = value if isinstance(value, str) else _num(value)
        unit = UNITS[key]
        lines.append(f"{key:<18} = {text}" + (f" [{unit}]" if unit else ""))

    put("CCSDS_OPM_VERS", opm.header["CCSDS_OPM_VERS"])
    for c in opm.comments:
        lines.append(f"COMMENT {c}")
    put("CREATION_DATE", opm.header["CREATION_DATE"])
    put("ORIGINATOR", opm.header["ORIGINATOR"])
    lines.append("")
    for key, _ in METADATA:
        put(key, opm.metadata[key])
    lines += ["", "COMMENT State vector at the plan's epoch"]
    put("EPOCH", format_epoch(opm.epoch))
    for key, x in zip(("X", "Y", "Z"), opm.r):
        put(key, x)
    for key, x in zip(("X_DOT", "Y_DOT", "Z_DOT"), opm.v):
        put(key, x)
    lines += ["", "COMMENT Osculating Keplerian elements"
              + (" (a hyperbola: negative semi-major axis)"
                 if opm.elements["ECCENTRICITY"] > 1 else "")]
    for key, _ in KEPLER:
        put(key, opm.elements[key])
    lines += ["", "COMMENT Spacecraft parameters: mass at the epoch, propellant included"]
    put("MASS", opm.mass)
    for m in opm.maneuvers:
        lines += ["", f"COMMENT {m.kind} {m.name}" + (f" using {m.engine}" if m.engine else "")]
        put("MAN_EPOCH_IGNITION", format_epoch(m.ignition))
        put("MAN_DURATION", m.duration)
        put("MAN_DELTA_MASS", m.delta_mass)
        put("MAN_REF_FRAME", m.frame)
        for key, x in zip(("MAN_DV_1", "MAN_DV_2", "MAN_DV_3"), m.dv):
            put(key, x)
    return "\n".join(lines) + "\n"


# --- reading ---------------------------------------------------------------------------

# Keywords of the standard's OPM that carry nothing apsidal reads: the other header and
# metadata items, the mean anomaly (the state vector is the data), the other spacecraft
# parameters, the covariance and user-defined parameters.
_IGNORED = re.compile(r"MESSAGE_ID|CLASSIFICATION|REF_FRAME_EPOCH|MEAN_ANOMALY|SOLAR_RAD_AREA"
                      r"|SOLAR_RAD_COEFF|DRAG_AREA|DRAG_COEFF|COV_REF_FRAME|C[XYZ](_DOT)?_"
                      r"[XYZ](_DOT)?|USER_DEFINED_\w+")
_LINE = re.compile(r"([A-Z0-9_]+)\s*=\s*(.*?)\s*(?:\[([^\]]*)\])?\s*")


def read(text: str) -> Opm:
    """An OPM in KVN back into data (what :func:`write` writes, and the same message
    written by others in the standard's units).  Raises :class:`OpmError` naming the
    line for anything it cannot read."""
    header: dict[str, str] = {}
    meta: dict[str, str] = {}
    data: dict[str, float] = {}
    epoch = None
    mass = None
    maneuvers: list[Maneuver] = []
    comments: list[str] = []
    current: dict | None = None
    pending_comment = ""

    def close() -> None:
        nonlocal current
        if current is None:
            return
        missing = [k for k, _ in MANEUVER if k not in current]
        if missing:
            raise OpmError(f"a manoeuvre block lacks {', '.join(missing)}")
        name, kind = current.pop("_name", ""), current.pop("_kind", "burn")
        engine = current.pop("_engine", "")
        maneuvers.append(Maneuver(parse_epoch(current["MAN_EPOCH_IGNITION"]),
                                  float(current["MAN_DURATION"]),
                                  float(current["MAN_DELTA_MASS"]),
                                  current["MAN_REF_FRAME"],
                                  tuple(float(current[f"MAN_DV_{i}"]) for i in (1, 2, 3)),
                                  name, kind, engine))
        current = None

    for number, raw in enumerate(text.splitlines(), 1):
        line = raw.strip()
        if not line:
            continue
        if line.startswith("COMMENT"):
            body = line[len("COMMENT"):].strip()
            m = re.fullmatch(r"(burn|drop) (\S+)(?: using \S+)?", body)
            if m:
                close()
                pending_comment = body
            elif not data and epoch is None and not maneuvers:
                comments.append(body)
            continue
        m = _LINE.fullmatch(line)
        if not m:
            raise OpmError(f"line {number}: `{raw}` is not KEYWORD = value")
        key, value, unit = m.groups()
        if key not in UNITS and _IGNORED.fullmatch(key):
            continue  # a keyword of the standard that apsidal has no use for
        if key not in UNITS:
            raise OpmError(f"line {number}: `{key}` is not an OPM keyword apsidal reads")
        if unit is not None and unit != UNITS[key]:
            raise OpmError(f"line {number}: {key} is in [{UNITS[key] or 'no unit'}], "
                           f"not [{unit}]")
        try:
            if key in dict(HEADER):
                header[key] = value
            elif key in dict(METADATA):
                meta[key] = value
            elif key == "EPOCH":
                epoch = parse_epoch(value)
            elif key == "MASS":
                mass = float(value)
            elif key.startswith("MAN_"):
                if key == "MAN_EPOCH_IGNITION":
                    close()
                    current = {}
                    if pending_comment:
                        kind, name, *using = pending_comment.split(" ")
                        current.update(_kind=kind, _name=name, _engine=using[-1] if using else "")
                        pending_comment = ""
                if current is None:
                    raise OpmError(f"line {number}: {key} before MAN_EPOCH_IGNITION")
                current[key] = value
            else:
                data[key] = float(value)
        except ValueError as err:
            if isinstance(err, OpmError):
                raise
            raise OpmError(f"line {number}: {key} = `{value}` is not a number") from None
    close()
    missing = [k for k, _ in (*HEADER, *METADATA) if k not in {**header, **meta}]
    missing += [k for k, _ in STATE[1:] if k not in data] + ([] if epoch else ["EPOCH"])
    if missing:
        raise OpmError(f"the message lacks {', '.join(missing)}")
    return Opm(header, meta, epoch, tuple(data[k] for k in ("X", "Y", "Z")),
               tuple(data[k] for k in ("X_DOT", "Y_DOT", "Z_DOT")),
               {k: data[k] for k, _ in KEPLER if k in data}, mass, maneuvers, comments)


def plan_lines(opm: Opm) -> list[str]:
    """The message as plan lines: the `epoch`, the `start orbit` from the state vector
    (its elements in the conventions of compiler/state.py) and, in order, a `coast` to
    each impulse and the burn as `frame rtn` components (a release as `drop`).  The
    craft, its engines and the body are not in an OPM; the caller supplies them."""
    from .state import elements_from_state

    gm = opm.elements.get("GM")
    if gm is None:
        raise OpmError("the message has no GM: the start orbit cannot be given by "
                       "elements without it")
    el = elements_from_state(np.array([opm.r]), np.array([opm.v]), gm)
    deg = lambda x: repr(float(np.degrees(x[0])) % 360.0)
    shape = (f"sma {float(el.sma[0])!r} km ecc {float(el.ecc[0])!r}")
    lines = [f"epoch {format_epoch(opm.epoch)} {opm.metadata['TIME_SYSTEM']}",
             (f"start orbit {shape} inclination {float(np.degrees(el.inclination[0]))!r} deg "
              f"raan {deg(el.raan)} deg argp {deg(el.argp)} deg anomaly {deg(el.anomaly)} deg")]
    # apsidal's message of a plan priced `burns finite`: its blocks are the thrust arcs,
    # and a plan flown finite goes on from the end of each arc, so each coast is counted
    # from there (in a plan flown impulsive from the impulse)
    finite_arcs = any(c.startswith(FINITE_NOTE[:40]) for c in opm.comments)
    if finite_arcs:
        lines.insert(0, "# the burns are finite thrust arcs: fly these lines in a plan with "
                        "`burns finite` (each coast starts at the end of the arc before it)")
    if "J2 drift" in " ".join(opm.comments):  # the caution of a plan priced `gravity j2`
        lines.insert(0, "# the coasts drifted with J2: fly these lines in a plan with "
                        "`gravity j2` (the times between burns are the drifting chain's)")
    now = opm.epoch
    for k, m in enumerate(opm.maneuvers, 1):
        name = m.name.replace("/", "-") or f"{m.kind}-{k}"
        wait = (m.impulse - now).total_seconds()
        if wait > 0:
            lines.append(f"coast to-{name} for {wait!r} s")
        now = m.impulse
        if m.kind == "drop":
            lines.append(f"drop {name} {-m.delta_mass!r} kg")
            continue
        if m.frame not in ("RTN", "RSW"):
            raise OpmError(f"manoeuvre {name} is in {m.frame}; apsidal reads RTN")
        r, t, n = (x * 1000.0 for x in m.dv)
        lines.append(f"burn {name}: radial {r!r} m/s, transverse {t!r} m/s, "
                     f"normal {n!r} m/s  frame rtn" + (f"  using {m.engine}" if m.engine else ""))
        if finite_arcs:
            now = m.impulse + timedelta(seconds=m.duration / 2.0)
    return lines
