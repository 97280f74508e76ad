"""Lint rules for `apsidal check`, one module each, collected in ``RULES``."""
