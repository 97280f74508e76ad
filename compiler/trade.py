"""The plan's `trade` statements, read by `apsidal sweep` (``run`` ignores them).

    trade orbit-size: vary geo.circular 30000..42000 km points 25
    trade best-split: vary leave.inclination 0..28.5 deg points 15, minimise dv
    trade launch: disperse start.periapsis 5 km, disperse start.inclination 0.05 deg, samples 20000, seed 7

Items: ``vary TARGET LOW..HIGH [UNIT] [points N]``, ``disperse TARGET SIGMA [UNIT]`` (a
1-sigma figure), ``minimise propellant|dv|elapsed``, ``tolerance AMOUNT [UNIT]``,
``points N`` (every range), ``samples N``, ``seed N``.  Every mistake is located in the
plan.
"""

from __future__ import annotations

from apsidal.lang import syntax as ast
from apsidal.lang.errors import PlanError, did_you_mean
from apsidal.lang.units import UNITS

from .cliutil import UsageError

ITEMS = ("vary", "disperse", "minimise", "tolerance", "points", "samples", "seed")
OBJECTIVES = ("propellant", "dv", "elapsed")


def trades(plan: ast.Plan) -> list[ast.Trade]:
    return [s for s in plan.statements if isinstance(s, ast.Trade)]


def trade_text(t: ast.Trade) -> str:
    """The statement's text with its spacing made canonical (for `diff`)."""
    from apsidal.lang.format import format_statement

    return format_statement(t)


def changes(old: ast.Plan | None, new: ast.Plan | None) -> list[dict]:
    """The trades a revision added, removed or changed, by name (`diff`)."""
    a = {t.name.text: trade_text(t) for t in trades(old)} if old is not None else {}
    b = {t.name.text: trade_text(t) for t in trades(new)} if new is not None else {}
    out = []
    for name in list(a) + [n for n in b if n not in a]:
        if a.get(name) == b.get(name):
            continue
        status = "added" if name not in a else "removed" if name not in b else "changed"
        out.append({"name": name, "status": status, "old": a.get(name), "new": b.get(name)})
    return out


def _err(message: str, node, source, hint: str | None = None) -> PlanError:
    return PlanError(message, node.span, source, hint)


def study_from_plan(plan: ast.Plan, name: str | None, study_class):
    """The study a `trade` statement of ``plan`` writes (``name``: which one; the first
    without)."""
    found = trades(plan)
    if not found:
        raise UsageError("nothing to sweep: give --vary or --disperse, or write a `trade` "
                         "statement in the plan (e.g. `trade size: vary geo.circular "
                         "30000..42000 km points 25`)")
    if name is None:
        t = found[0]
    else:
        t = next((x for x in found if x.name.text == name), None)
        if t is None:
            names = [x.name.text for x in found]
            guess = did_you_mean(name, names)
            raise UsageError(f"the plan has no trade `{name}`; "
                             + (f"did you mean `{guess}`?" if guess else
                                "its trades are " + ", ".join(f"`{n}`" for n in names)))
    return read(t, plan.source, study_class())


def _count(item: ast.TradeItem, source, least: int) -> int:
    args = item.args
    if len(args) != 1 or args[0].kind != "number":
        raise _err(f"`{item.word.text}` takes a whole number", item, source,
                   f"e.g. `{item.word.text} 25`")
    text = args[0].text
    try:
        n = int(text)
    except ValueError:
        raise _err(f"`{item.word.text}` takes a whole number, got `{text}`", args[0],
                   source, f"e.g. `{item.word.text} 25`") from None
    if n < least:
        raise _err(f"`{item.word.text}` must be at least {least}, got {n}", args[0], source)
    return n


def _unit_of(words: list[ast.TradeWord], at: int, source) -> tuple[str, int]:
    """The unit at ``words[at]`` if one stands there: (unit, index after it)."""
    if at < len(words) and words[at].kind == "word" and words[at].text not in ITEMS:
        w = words[at]
        if w.text not in UNITS:
            guess = did_you_mean(w.text, [u for u in UNITS if u])
            raise _err(f"unknown unit `{w.text}`", w, source,
                       f"did you mean `{guess}`?" if guess else None)
        return w.text, at + 1
    return "", at


def read(t: ast.Trade, source, study):
    """The items of one `trade` statement into ``study`` (a sweep_cli.Study)."""
    study.span = t.span
    for item in t.items:
        word, args = item.word, list(item.args)
        if word.text not in ITEMS:
            guess = did_you_mean(word.text, ITEMS)
            raise _err(f"a trade has no item `{word.text}`", word, source,
                       f"did you mean `{guess}`?" if guess else
                       "its items are " + ", ".join(f"`{w}`" for w in ITEMS))
        if word.text in ("vary", "disperse"):
            if not args or args[0].kind != "target":
                raise _err(f"`{word.text}` needs the quantity as NAME.FIELD", item, source,
                           f"e.g. `{word.text} geo.circular "
                           + ("30000..42000 km`" if word.text == "vary" else "5 km`"))
            target = args[0]
            want = "range" if word.text == "vary" else "number"
            if len(args) < 2 or args[1].kind != want:
                raise _err(f"`{word.text} {target.text}` needs "
                           + ("a range LOW..HIGH" if want == "range" else "a 1-sigma figure"),
                           item, source, "e.g. `vary geo.circular 30000..42000 km`"
                           if want == "range" else "e.g. `disperse start.periapsis 5 km`")
            unit, k = _unit_of(args, 2, source)
            points = None
            if word.text == "vary" and k < len(args) and args[k].text == "points":
                points = _count(ast.TradeItem(args[k], tuple(args[k + 1:k + 2]), item.span),
                                source, 1)
                k += 2
            if k < len(args):
                raise _err(f"unexpected `{args[k].text}` in `{word.text}`", args[k], source,
                           "one item per quantity, separated by commas"
                           + ("; `points N` may follow the range" if word.text == "vary"
                              else ""))
            if word.text == "vary":
                lo, hi = args[1].text.split("..")
                if float(lo) > float(hi):
                    raise _err(f"the range of `{target.text}` is empty ({args[1].text})",
                               args[1], source, "give the low end first")
                study.vary.append((target.text, float(lo), float(hi), unit, target.span))
                if points is not None:
                    if study.points is not None and study.points != points:
                        raise _err("every range of a grid has the same number of points",
                                   args[-1], source, f"give `points {study.points}`")
                    study.points = points
            else:
                sigma = float(args[1].text)
                if not sigma > 0:
                    raise _err(f"the dispersion of `{target.text}` must be positive", args[1],
                               source)
                study.disperse.append((target.text, sigma, unit, target.span))
        elif word.text == "minimise":
            if len(args) != 1 or args[0].text not in OBJECTIVES:
                raise _err("`minimise` takes what to minimise", item, source,
                           "one of " + ", ".join(f"`{o}`" for o in OBJECTIVES))
            study.minimise = args[0].text
        elif word.text == "tolerance":
            if not args or args[0].kind != "number":
                raise _err("`tolerance` takes an amount", item, source, "e.g. `tolerance 1 km`")
            unit, k = _unit_of(args, 1, source)
            study.tolerance = (float(args[0].text), unit)
        else:
            setattr(study, word.text, _count(item, source, 2 if word.text == "samples" else
                                             0 if word.text == "seed" else 1))
    if not study.vary and not study.disperse:
        raise _err(f"trade `{t.name.text}` neither varies nor disperses a quantity", t, source,
                   "add `vary NAME.FIELD LOW..HIGH UNIT` or `disperse NAME.FIELD SIGMA UNIT`")
    return study
