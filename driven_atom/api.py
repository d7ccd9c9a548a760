"""The Python API that notebooks and the command line share (``import driven_atom as da``).

>>> import driven_atom as da
>>> da.transition("2p", "1s")["A_s"] > 6e8
True
"""
from __future__ import annotations

from pathlib import Path

from driven_atom.errors import InputError
from driven_atom.result import Result, read_result
from driven_atom.routes import load_config, run_config

DEFAULT_RUNS_DIR = Path("runs")


def result_path(config, out=None, *, name: str = "run") -> Path:
    """Where ``run`` writes: ``out`` if it ends in .h5, else ``out/NAME-HASH.h5`` (default runs/)."""
    if out is not None and str(out).endswith(".h5"):
        return Path(out)
    folder = Path(out) if out is not None else DEFAULT_RUNS_DIR
    return folder / f"{name}-{config.physics_hash()}.h5"


def ensure_writable(path: Path) -> None:
    """Fail before any work is done if the result file cannot be written where it is asked for."""
    from driven_atom.io import atomic_write

    if path.is_dir():
        raise InputError(f"`--out` {str(path)!r} is a folder; give a folder without .h5 or a file path")
    try:
        with atomic_write(path.with_name(path.name + ".probe"), sync=False):
            pass
        path.with_name(path.name + ".probe").unlink()
    except OSError as exc:
        raise InputError(f"`--out` {str(path)!r} cannot be written: {exc.strerror or exc}") from None


def run(config, *, out=None, progress: bool = True, name: str | None = None, error_estimate: bool | None = None,
        max_hours: float | None = None, cache_dir=None) -> Result:
    """Propagate one configuration with its route and write the HDF5 result.

    ``config`` is a path, a dict or a :class:`~driven_atom.config.RunConfig`; the result goes to
    ``out`` (a folder or a ``.h5`` path; default ``runs/``). A run whose checkpoint file holds the
    same physics resumes from it. ``error_estimate`` overrides ``[output] error_estimate`` (an
    error bar on every scalar, in ``result.quality["errors"]``); ``max_hours`` refuses a run
    estimated to take longer; ``cache_dir`` puts the basis cache anywhere (the config may only name a
    folder inside the result's). The returned :class:`Result` carries the file path in
    ``metadata["file"]`` and its ``quality`` block (checks made, ``trustworthy``).
    """
    if name is None and isinstance(config, (str, Path)):
        name = Path(config).stem
    cfg = load_config(config)
    path = result_path(cfg, out, name=name or "run")
    ensure_writable(path)
    return run_config(cfg, path, progress=progress, error_estimate=error_estimate, max_hours=max_hours,
                      cache_dir=cache_dir)


def open_result(path) -> Result:
    """Read a result file written by :func:`run` (or a campaign job)."""
    result = read_result(path)
    result.metadata["file"] = str(path)
    return result


def estimate(config=None, **keys) -> dict:
    """The lab estimate from a ``[lab]`` table, keyword arguments named like its keys, or a run
    configuration's atom and pulse (:func:`driven_atom.lab.estimate`)."""
    from driven_atom.lab import estimate as lab_estimate

    return lab_estimate(config, **keys)
