"""`apsidal export`: a priced plan handed to high-fidelity tools (docs/export.md).

Exit codes: 0 written; 1 written, but the plan does not fit its load (the message
carries the whole plan, as `run` prices it); 2 bad input (a plan that does not parse or
cannot be flown, no `epoch`, no frame for the body).
"""

from __future__ import annotations

import sys

from .cliutil import EXIT_BAD_INPUT, EXIT_FINDINGS, EXIT_OK, UsageError, write_atomic


def register(sub) -> None:
    exp = sub.add_parser("export", help="write the start state and every burn for "
                         "high-fidelity tools (CCSDS OPM)",
                         description="Write the plan's start state and every burn as a "
                         "CCSDS Orbit Parameter Message in keyword = value form "
                         "(docs/export.md).  The plan needs an `epoch`.")
    exp.add_argument("plan", nargs="?", help="plan file (.aps); `-` reads standard input")
    exp.add_argument("--read", metavar="MESSAGE", default=None,
                     help="read an OPM (KVN) back and print its epoch, start orbit and "
                     "burns as plan lines, instead of writing one")
    exp.add_argument("--format", choices=("opm",), default="opm",
                     help="the message to write (opm: CCSDS 502.0-B-3 Orbit Parameter "
                     "Message, KVN)")
    exp.add_argument("--output", "-o", metavar="FILE", default=None,
                     help="write to FILE instead of standard output")
    exp.add_argument("--ref-frame", metavar="NAME", default=None,
                     help="the inertial frame the plan's axes stand for (default EME2000 "
                     "around earth, MCI around mars; needed for other bodies)")
    exp.add_argument("--impulsive", action="store_true",
                     help="write each burn as an impulsive manoeuvre (duration 0, ignition "
                     "at the impulse) instead of a finite burn centred on it")
    exp.add_argument("--object-id", metavar="ID", default="UNKNOWN",
                     help="the craft's international designator (default UNKNOWN)")
    exp.set_defaults(func=cmd_export)


def cmd_export(args) -> int:
    from apsidal.lang.errors import PlanError

    from .budget import budget, shortfall_text
    from .evaluate import run
    from .load import load
    from .opm import ExportError, build, write

    if args.read is not None:
        if args.plan is not None:
            raise UsageError("--read takes the message only, not a plan")
        return read_back(args.read)
    if args.plan is None:
        raise UsageError("export needs a plan file (or --read MESSAGE)")
    program = load(args.plan)
    result = run(program)
    if result.error is not None:
        raise result.error
    try:
        message = build(program, result, args.ref_frame, args.object_id,
                        impulsive=args.impulsive)
        text = write(message)
    except ExportError as err:
        span = next((s.span for s in program.plan.statements
                     if type(s).__name__ == "Start"), None)
        raise PlanError(str(err), err.span or span, program.source) from None
    if args.output:
        try:
            write_atomic(args.output, text)
        except OSError as err:
            raise UsageError(f"cannot write `{args.output}`: {err.strerror or err}") from None
    else:
        sys.stdout.write(text)
    for note in message.comments:
        if "before the epoch" in note:
            print(f"apsidal: note: {note}; the receiving tool starts that much earlier, or "
                  "move the plan's epoch", file=sys.stderr)
        elif "the two overlap" in note:
            print(f"apsidal: note: {note} (each burn is centred on its impulse point); "
                  "merge them into one burn, or put a coast between them", file=sys.stderr)
    report = budget(result)
    if not report["feasible"]:
        print(f"apsidal: the plan does not fit its load: {shortfall_text(report)}; the "
              "message carries the whole plan as priced", file=sys.stderr)
        return EXIT_FINDINGS
    return EXIT_OK


def read_back(path: str) -> int:
    """The message's epoch, start orbit and burns as plan lines (docs/export.md)."""
    from pathlib import Path

    from .opm import OpmError, plan_lines, read

    try:
        text = sys.stdin.read() if path == "-" else Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as err:
        raise UsageError(f"cannot read `{path}`: {getattr(err, 'strerror', None) or err}"
                         ) from None
    try:
        message = read(text)
        lines = plan_lines(message)
    except OpmError as err:
        print(f"{path}: error: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    sys.stdout.write(f"# read from {path}: {message.metadata['OBJECT_NAME']} around "
                     f"{message.metadata['CENTER_NAME']} ({message.metadata['REF_FRAME']}); "
                     "the craft, its engines and `around` are not in an OPM\n")
    sys.stdout.write("\n".join(lines) + "\n")
    return EXIT_OK
