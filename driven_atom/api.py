"""The Python API that notebooks and the command line share."""
from __future__ import annotations

import time
from pathlib import Path

from driven_atom.campaign.config import RunConfig, load_config
from driven_atom.result import Checkpoint, Result, read_result, write_result

DEFAULT_RUNS_DIR = Path("runs")


def result_path(config: RunConfig, out=None, *, name: str = "run") -> Path:
    """Where ``run`` writes: ``out`` if it ends in .h5, else ``out/NAME-HASH.h5`` (default runs/)."""
    if out is not None and str(out).endswith(".h5"):
        return Path(out)
    folder = Path(out) if out is not None else DEFAULT_RUNS_DIR
    return folder / f"{name}-{config.physics_hash()}.h5"


def ensure_writable(path: Path) -> None:
    """Fail before any work is done if the result file cannot be written where it is asked for."""
    from driven_atom.errors import InputError

    probe = path.with_name(path.name + ".probe")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        probe.write_bytes(b"")
        probe.unlink()
    except OSError as exc:
        raise InputError(f"`--out` {str(path)!r} cannot be written: {exc.strerror or exc}") from None


def run(config, *, out=None, progress: bool = True, name: str | None = None) -> Result:
    """Propagate one configuration with its route and write the HDF5 result.

    ``config`` is a path, a dict or a :class:`RunConfig`; the result goes to ``out`` (a folder or
    a ``.h5`` path; default ``runs/``). A run whose file holds a checkpoint of the same physics
    resumes from it. The returned :class:`Result` carries the file path in ``metadata["file"]``.
    """
    from driven_atom.engines import route_module

    if name is None and isinstance(config, (str, Path)):
        name = Path(config).stem
    cfg = load_config(config)
    atom = cfg.build_atom()
    pulse = cfg.build_pulse()
    settings = cfg.solver_settings()
    engine = route_module(cfg.solver["route"])
    path = result_path(cfg, out, name=name or "run")
    ensure_writable(path)
    physics_hash = cfg.physics_hash()
    config_text = cfg.to_toml()
    checkpoint = Checkpoint(path, physics_hash=physics_hash, config=config_text)
    started = time.perf_counter()
    result = engine.propagate(atom, pulse, settings, initial=cfg.initial_states(), output=cfg.output,
                              progress=progress, checkpoint=checkpoint)
    result.stats.setdefault("wall_s", time.perf_counter() - started)
    result.config = config_text
    write_result(path, result, attrs={"physics_hash": physics_hash})
    result.metadata["file"] = str(path)
    return result


def open_result(path) -> Result:
    """Read a result file written by :func:`run`."""
    result = read_result(path)
    result.metadata["file"] = str(path)
    return result
