"""Bottom of the house: the exception types and the helpers that turn errors into one line.

* :class:`InputError` — bad user input; the command line prints its message on one line, exit 2.
* :class:`Refused` — a preflight refusal (the run would be wrong or would not fit); exit 2.
* :class:`Interrupted` — a run stopped by a signal after writing its checkpoint; exit 128 + signal.
* :class:`WorkersLost` — a campaign on a batch system with no worker left and none coming; exit 4.
* :func:`short` — user text cut for messages; :func:`validation_message` — one line from a
  pydantic ``ValidationError`` (pydantic itself is not imported here).
"""
from __future__ import annotations

import difflib

MESSAGE_ECHO = 200            # characters of user input echoed in a message


class InputError(ValueError):
    """Invalid user input. The message names the key or argument and the allowed range.

    >>> str(InputError("`cycles` must be > 0, got -3"))
    '`cycles` must be > 0, got -3'
    """


class Refused(InputError):
    """A run refused before it starts: a preflight found it would be wrong or would not fit."""


class Interrupted(BaseException):
    """A run stopped by ``signum`` at a checkpoint it wrote (BaseException: never caught as an error).

    >>> Interrupted(15).exit_code
    143
    """

    def __init__(self, signum: int, message: str = ""):
        self.signum = int(signum)
        super().__init__(message or f"interrupted by signal {self.signum}")

    @property
    def exit_code(self) -> int:
        return 128 + self.signum


class WorkersLost(RuntimeError):
    """A campaign on a batch system stopped because no worker is left and none is coming (or none
    has started for the set time). Finished jobs are kept, the others stay pending; exit code 4.

    >>> WorkersLost("no worker left").exit_code
    4
    """

    exit_code = 4


def short(text, limit: int = MESSAGE_ECHO) -> str:
    """``text`` cut to ``limit`` characters for a message (user input is echoed, never a flood).

    >>> short("x" * 300)[-11:]
    '[300 chars]'
    """
    text = str(text)
    return text if len(text) <= limit else f"{text[:limit]}...[{len(text)} chars]"


def one_line(text) -> str:
    r"""``text`` with its line breaks and other control characters escaped: a message stays one line.

    >>> one_line("bad\n0")
    'bad\\n0'
    """
    return "".join(ch if ch.isprintable() or ch == " " else ch.encode("unicode_escape").decode() for ch in str(text))


def suggest(word: str, options) -> str:
    """`` (did you mean `x`?)`` for the closest of ``options``, or ``""``.

    >>> suggest("wavelenght", ["wavelength", "cycles"])
    ' (did you mean `wavelength`?)'
    """
    match = difflib.get_close_matches(str(word), [str(o) for o in options], n=1, cutoff=0.6)
    return f" (did you mean `{match[0]}`?)" if match else ""


def _model_at(model, loc):
    """Walk a pydantic model class along an error location to the model that owns the last key."""
    import typing

    current = model
    for part in loc[:-1]:
        if isinstance(part, int) or current is None:
            continue
        field = getattr(current, "model_fields", {}).get(part)
        if field is None:
            return None
        candidates = [field.annotation, *typing.get_args(field.annotation)]
        for sub in list(candidates):
            candidates.extend(typing.get_args(sub))
        current = next((c for c in candidates if isinstance(c, type) and hasattr(c, "model_fields")), None)
    return current


# parts of a pydantic error location that name union members or validators, not keys
_UNION_TAGS = {"float", "str", "int", "bool", "function-after", "function-before", "function-wrap",
               "function-plain", "list[WeightedState]", "constrained-float", "none"}


def validation_message(exc, *, prefix: str = "", model=None) -> str:
    """One line from a pydantic ``ValidationError``: the dotted key (``pulse.1.fwhm``, as scan axes
    name it), what is wrong, a suggestion for typos. Of several errors (union members) the most
    specific one is reported.
    """
    errors = exc.errors()
    err = max(errors, key=lambda e: len(e["loc"]))
    loc = [part for part in err["loc"]
           if not (isinstance(part, str) and (part in _UNION_TAGS or "[" in part or part.startswith("function-")))]
    key = ".".join(str(p) for p in ([prefix] if prefix else []) + loc)
    kind = err["type"]
    if kind == "extra_forbidden":
        owner = _model_at(model, loc) if model else None
        options = getattr(owner, "model_fields", {}) if owner is not None else {}
        return f"unknown key `{short(key, 80)}`{suggest(str(loc[-1]), options)}"
    if kind == "missing":
        return f"`{key}` is required"
    msg = err["msg"].removeprefix("Value error, ").removeprefix("Assertion failed, ")
    if msg.startswith(("`", "unknown key `")):       # already one complete line naming its key
        return msg
    return f"`{key}`: {msg}, got {short(repr(err.get('input')))}"
