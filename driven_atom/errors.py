"""One exception type for bad user input: the CLI prints its message on one line and exits 2."""


class InputError(ValueError):
    """Invalid user input. The message names the key or argument and the allowed range.

    >>> str(InputError("`cycles` must be > 0, got -3"))
    '`cycles` must be > 0, got -3'
    """
