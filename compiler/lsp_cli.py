"""`apsidal lsp`: the language server, on standard input and output (docs/editors.md).

pygls is an optional extra (`pip install 'apsidal[lsp]'`); it is imported only when the
server starts, and its absence is a clear message and exit 2, not a traceback.
"""

from __future__ import annotations

from .cliutil import EXIT_OK, UsageError


def register(sub) -> None:
    lsp = sub.add_parser("lsp", help="run the language server for editors (stdio)",
                         description="Speak the Language Server Protocol on standard input "
                         "and output: diagnostics, hover, formatting and completion for "
                         "plan files (docs/editors.md).  Needs the `lsp` extra: "
                         "pip install 'apsidal[lsp]'.")
    lsp.add_argument("--stdio", action="store_true",
                     help="talk on standard input and output (the default and only way; "
                     "accepted because editors pass it)")
    lsp.set_defaults(func=cmd_lsp)


def cmd_lsp(args) -> int:
    try:
        import lsprotocol  # noqa: F401
        import pygls  # noqa: F401
    except ImportError:
        raise UsageError("`apsidal lsp` needs pygls, which is not installed; install the "
                         "extra with `pip install 'apsidal[lsp]'`") from None
    from .lsp import serve

    serve()
    return EXIT_OK
