"""Exit codes: the only place radialpn turns errors into process status."""

OK = 0
INTERNAL = 1  #: a bug: please report
BAD_INPUT = 2  #: malformed or out-of-range input, unknown file, bad flag
NO_ANSWER = 3  #: a valid design the chosen engine cannot answer (status says why)
INTERRUPTED = 130


class UsageError(Exception):
    """One-line message for the user; the CLI exits with BAD_INPUT."""
