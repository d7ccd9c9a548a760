"""driven-atom scan, driven-atom status, driven-atom collect: campaigns from the command line.

driven-atom scan CONFIG --out DIR runs every job of the [scan] grid that is not done yet, on a local
process pool (default), a running Dask scheduler (--scheduler ADDRESS), a Dask LocalCluster
(--dask-local N) or the SLURM/PBS cluster of the config's [cluster] table. CONFIG may also be a
campaign folder: its stored config runs again (resume). A second scan on a folder that is being
worked on stops with exit code 2 naming the holder. A scan that ends with failed jobs exits with
code 3 (and says how many, and that --retry-failed runs them again); `status` exits 0 whatever
the jobs' states.
"""
from __future__ import annotations

import sys
from pathlib import Path

EXIT_FAILED_JOBS = 3          # a scan that ended with failed jobs


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("scan", help="run or resume a campaign over the [scan] axes of CONFIG",
                              description=__doc__.split("\n\n")[1])
    p.add_argument("config", metavar="CONFIG", help="TOML config with a [scan] table, or a campaign folder")
    p.add_argument("--out", metavar="DIR", default=None,
                   help="campaign folder (default: runs/<CONFIG name>, or CONFIG itself if it is a folder)")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, metavar="N", default=None,
                       help="local worker processes, one thread each (default: one per core)")
    where.add_argument("--scheduler", metavar="ADDRESS", default=None,
                       help="address of a running Dask scheduler, e.g. tcp://10.0.0.5:8786")
    where.add_argument("--dask-local", type=int, metavar="N", default=None,
                       help="start a Dask LocalCluster of N single-threaded workers")
    p.add_argument("--retry-failed", action="store_true", help="run failed jobs again")
    p.add_argument("--yes", action="store_true", help="run a scan of more than 10000 jobs")
    p.add_argument("--cache-dir", metavar="DIR", default=None,
                   help="basis-cache folder for every job (default: inside the campaign folder)")
    p.add_argument("--no-progress", action="store_true", help="no progress bar on stderr")
    add_common(p)
    p.set_defaults(handler=_scan)

    p = subparsers.add_parser("status", help="progress of a campaign folder")
    p.add_argument("folder", metavar="DIR")
    add_common(p)
    p.set_defaults(handler=_status)

    p = subparsers.add_parser("collect", help="write the summary table of a campaign folder")
    p.add_argument("folder", metavar="DIR")
    p.add_argument("--csv", action="store_true", help="also write summary.csv")
    p.add_argument("--rows", type=int, default=60, metavar="N", help="rows of the printed table (default 60, 0: none)")
    add_common(p)
    p.set_defaults(handler=_collect)


def _config_and_folder(args):
    from driven_atom.campaign.runner import campaign_config

    source = Path(args.config)
    default = source if source.is_dir() else Path("runs") / source.stem
    return campaign_config(source), Path(args.out) if args.out else default


def _scan(args):
    import contextlib
    import time

    from driven_atom.campaign.executors import dask_client
    from driven_atom.campaign.runner import scan
    from driven_atom.campaign.store import campaign_status

    cfg, folder = _config_and_folder(args)
    started = time.perf_counter()
    if args.scheduler is not None or args.dask_local is not None:
        context = dask_client(scheduler=args.scheduler, local_workers=args.dask_local)
    else:
        context = contextlib.nullcontext(None)
    with context as client:
        scan(cfg, folder, executor=client, workers=args.workers, retry_failed=args.retry_failed,
             progress=not (args.no_progress or args.json), cache_dir=args.cache_dir, yes=args.yes)
    status = campaign_status(folder)
    payload = {key: status[key] for key in ("folder", "total", "done", "failed", "pending", "running",
                                            "untrustworthy")}
    payload["wall_s"] = time.perf_counter() - started
    payload["caution"] = _scan_caution(cfg)
    if status["failed"]:                  # scripts can tell: exit 3 names the failed jobs
        args.exit_code = EXIT_FAILED_JOBS
        sys.stderr.write(f"driven-atom scan: {status['failed']} job(s) failed; see `driven-atom status {folder}`, "
                         f"run again with --retry-failed to retry them\n")
    if not args.json:
        print(f"campaign {folder}: {status['done']}/{status['total']} done, {status['failed']} failed, "
              f"{status['pending']} pending ({payload['wall_s']:.1f} s)")
        if status["untrustworthy"]:
            print(f"  {status['untrustworthy']} done job(s) flagged by a quality check: see `driven-atom status {folder}`")
        print(f"  table: driven-atom collect {folder}")
        if payload["caution"]:
            print(payload["caution"])
    return payload


def _scan_caution(cfg) -> str | None:
    """The laser-safety caution for the strongest pulse at the corners of the scan, or None."""
    from driven_atom.campaign.scan import corner_configs
    from driven_atom.pulse import build_pulse
    from driven_atom.safety import laser_caution

    return laser_caution([build_pulse(c) for c in corner_configs(cfg)])


def _duration(seconds) -> str:
    if seconds is None:
        return "-"
    if seconds < 120:
        return f"{seconds:.1f} s"
    return f"{seconds / 60:.1f} min" if seconds < 7200 else f"{seconds / 3600:.1f} h"


def _status(args):
    from driven_atom.campaign.display import status_table
    from driven_atom.campaign.store import campaign_status

    status = campaign_status(args.folder)
    if args.json:
        return status
    print(f"campaign {status['folder']}" + ("  (a scan is working on it)" if status["scan_active"] else ""))
    print(f"  total {status['total']}  done {status['done']}  running {status['running']}  "
          f"failed {status['failed']}  pending {status['pending']}"
          f"  (checkpointed {status['checkpointed']}, corrupt {status['corrupt']}; "
          f"untrustworthy {status['untrustworthy']})")
    cluster = status["cluster"]
    if cluster:
        print(f"  workers ({cluster['system']}): {cluster['alive']} of {cluster['workers']} alive, "
              f"{cluster['lost']} lost, {cluster['requested']} requested "
              f"({cluster['resubmits']} of {cluster['max_resubmits']} resubmissions); "
              f"batch jobs {', '.join(cluster['batch_jobs']) or 'none'}")
    line = f"  wall time of done jobs: {_duration(status['wall_s_total'])}"
    if status["eta_s"] is not None:
        workers = f"{status['workers']} workers" if status["workers"] else "workers: as many as are running"
        line += f"; ETA {_duration(status['eta_s'])} ({workers})"
    print(line)
    for text in status_table(status):
        print("  " + text)
    if status["failed"]:
        print(f"  rerun with `driven-atom scan {status['folder']} --retry-failed` to run failed jobs again")
    return None


def _collect(args):
    from driven_atom.campaign.summary import collect, open_campaign

    from driven_atom.errors import InputError

    if args.rows < 0:
        raise InputError(f"`--rows` must be a whole number >= 0, got {args.rows}")
    folder = Path(args.folder)
    path = collect(folder, csv=args.csv)
    ds = open_campaign(path)
    dims = {str(d): int(n) for d, n in ds["ionization"].sizes.items()}
    payload = {"summary": str(path), "csv": str(folder / "summary.csv") if args.csv else None,
               "dims": dims, "total": int(ds.attrs["n_jobs"]), "done": int(ds.attrs["jobs_done"]),
               "failed": int(ds.attrs["jobs_failed"]), "missing": int(ds.attrs["jobs_missing"]),
               "untrustworthy": int(ds.attrs["jobs_untrustworthy"])}
    if args.json:
        return payload
    print(f"summary: {path}" + (f"\ncsv:     {payload['csv']}" if args.csv else ""))
    print("  dims: " + ", ".join(f"{d} = {n}" for d, n in dims.items()) +
          f"; {payload['done']}/{payload['total']} jobs done, {payload['failed']} failed, "
          f"{payload['untrustworthy']} flagged by a quality check")
    for line in summary_table(ds, args.rows):
        print("  " + line)
    print("  open it: xarray.open_dataset(path, engine=\"h5netcdf\") or driven_atom.open_campaign(folder); "
          "draw it: driven-atom plot " + str(folder))
    return None


def summary_table(ds, rows: int = 60) -> list[str]:
    """The summary as text: one row per grid point (at most ``rows``), the axis values in the
    user's units, the job status, the ionisation and the final population of each level."""
    import numpy as np

    from driven_atom.campaign.display import axis_headings, axis_texts
    from driven_atom.plotting import _levels_only

    dims = list(ds["ionization"].dims)
    axes = {str(n): {"units": ds[n].attrs.get("user_units", ds[n].attrs.get("units", "1"))}
            for n in ds.coords if n != "state" and set(ds[n].dims) <= set(dims) and ds[n].dims}
    headings = axis_headings(axes)
    states = list(_levels_only({str(s): None for s in ds["state"].values})) if "state" in ds.coords else []
    head = [*headings.values(), "status", "ionization", *(f"P({s})" for s in states)]
    values = {path: axis_texts(ds[path].values.tolist()) for path in headings}
    lines = []
    for count, idx in enumerate(np.ndindex(*ds["ionization"].shape)):
        if count == rows:
            break
        point = dict(zip(dims, idx))
        row = [values[path][point[ds[path].dims[0]]] for path in headings]
        row += [str(ds["status"].values[idx]), _number(ds["ionization"].values[idx])]
        row += [_number(ds["population"].sel(state=s).values[idx]) for s in states]
        lines.append(row)
    widths = [max(len(r[j]) for r in [head, *lines]) for j in range(len(head))]
    text = ["  ".join(cell.rjust(w) for cell, w in zip(line, widths)) for line in [head, *lines]]
    total = int(np.prod(ds["ionization"].shape))
    if total > rows:
        text.append(f"... {total - rows} more rows (all of them: --rows {total}, or summary.csv with --csv)")
    return text


def _number(value) -> str:
    value = float(value)
    return "-" if value != value else f"{value:.4g}"

