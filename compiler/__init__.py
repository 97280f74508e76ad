"""The apsidal compiler: lowering, orbit mechanics, evaluator, checks, diff, reports, CLI."""
