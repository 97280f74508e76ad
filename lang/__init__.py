"""The apsidal plan language: grammar, parser, syntax tree, units, errors, formatter."""
