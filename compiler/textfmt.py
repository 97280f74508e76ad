"""Numbers, durations and angles as a reader sees them: every renderer formats through here.

Figures are shown to significant digits, not to a fixed number of decimals, so a 0.4 m/s
trim and a 2.5 km/s capture are both readable, a 1e30 kg mass is not a 31-digit integer,
and a negative zero never appears.
"""

from __future__ import annotations

import math

SIG = 4  # significant digits of a table cell


def sig(x, digits: int = SIG, sep: bool = True) -> str:
    """``x`` to ``digits`` significant digits; whole numbers past that shown in full.

    >>> sig(2562.14), sig(406.23), sig(0.4), sig(33000.0), sig(0.0)
    ('2,562', '406.2', '0.4000', '33,000', '0')
    >>> sig(1e30), sig(-2.3e-5), sig(-0.00001, 1), sig(None)
    ('1.000e30', '-2.300e-5', '-1e-5', '-')
    >>> sig(999.96), sig(1392.87, sep=False), sig(-0.0)
    ('1,000', '1393', '0')
    """
    if x is None:
        return "-"
    x = float(x)
    if not math.isfinite(x):
        return "-"
    if x == 0.0:
        return "0"
    exp = math.floor(math.log10(abs(float(f"{x:.{digits - 1}e}"))))  # after rounding
    if exp >= 9 or exp < -3:
        mant, e = f"{x:.{digits - 1}e}".split("e")
        return f"{mant}e{int(e)}"
    decimals = max(digits - 1 - exp, 0)
    text = f"{x:,.{decimals}f}" if sep else f"{x:.{decimals}f}"
    return "0" if float(text.replace(",", "")) == 0.0 else text


def short(x, digits: int = 6, sep: bool = True) -> str:
    """Like :func:`sig`, without trailing zeros: for numbers inside a sentence.

    >>> short(400.0), short(87.31391), short(0.05), short(2.5e-7)
    ('400', '87.3139', '0.05', '2.5e-7')
    """
    text = sig(x, digits, sep)
    if "e" in text:
        mant, e = text.split("e")
        return (mant.rstrip("0").rstrip(".") if "." in mant else mant) + "e" + e
    return text.rstrip("0").rstrip(".") if "." in text else text


def signed(x, digits: int = SIG) -> str:
    """A change with its sign; zero as a bare 0.

    >>> signed(38.24), signed(-7.9), signed(0.0), signed(None)
    ('+38.24', '-7.900', '0', '-')
    """
    text = sig(x, digits)
    if text in ("0", "-"):
        return text
    return text if text.startswith("-") else "+" + text


def duration(seconds: float | None) -> str:
    """Elapsed time as a reader counts it.

    >>> duration(93784.5)
    '1 d 02:03:04.5'
    >>> duration(61)
    '00:01:01.0'
    """
    if seconds is None:
        return "-"
    days, rest = divmod(float(seconds), 86400.0)
    h, rest = divmod(rest, 3600.0)
    m, s = divmod(rest, 60.0)
    if round(s, 1) >= 60.0:  # 59.96 s shows as the next minute, not as 60.0
        s, m = 0.0, m + 1
        if m >= 60:
            m, h = 0, h + 1
            if h >= 24:
                h, days = 0, days + 1
    clock = f"{int(h):02d}:{int(m):02d}:{s:04.1f}"
    return f"{int(days)} d {clock}" if days else clock


def angle_text(deg: float | None, fmt: str) -> str:
    """An angle in [0, 360) deg as text, wrapped after rounding so 359.99996 is not 360.0.

    >>> angle_text(359.99996, ".1f"), angle_text(359.9999999, ".6g"), angle_text(12.25, ".1f")
    ('0.0', '0', '12.2')
    """
    if deg is None:
        return "-"
    text = format(deg % 360.0, fmt)
    return format(0.0, fmt) if float(text) >= 360.0 or float(text) == 0.0 else text


AU_KM = 149_597_870.700  # IAU 2012 Resolution B2


def length(km: float | None, digits: int = 6, sep: bool = True) -> str:
    """A length in km; at interplanetary scale the astronomical units beside it.

    >>> length(400.0), length(227942466.0), length(149598.0, sep=False)
    ('400 km', '227,942,466 km (1.5237 au)', '149598 km')
    """
    if km is None:
        return "-"
    text = f"{short(km, digits, sep)} km"
    if abs(km) >= 1e7:
        text += f" ({short(km / AU_KM, digits)} au)"
    return text
