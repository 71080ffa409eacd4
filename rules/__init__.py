"""Built-in design rules, one concern per file; installed as ``checker.rules``."""
