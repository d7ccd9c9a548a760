"""driven-atom scan, driven-atom status, driven-atom collect: campaigns from the command line.

driven-atom scan CONFIG --out DIR runs every job of the [scan] grid that is not done yet, on a local
process pool (default), a running Dask scheduler (--scheduler ADDRESS), a Dask LocalCluster
(--dask-local N) or the SLURM/PBS cluster of the config's [cluster] table. CONFIG may also be a
campaign folder: its stored config runs again (resume). A second scan on a folder that is being
worked on stops with exit code 2 naming the holder.
"""
from __future__ import annotations

import sys
from pathlib import Path

_LAB_KEYS = ("intensity", "peak_field")


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
    if not args.json:
        print(f"campaign {folder}: {status['done']}/{status['total']} done, {status['failed']} failed, "
              f"{status['pending']} pending ({payload['wall_s']:.1f} s)")
        if status["untrustworthy"]:
            print(f"  {status['untrustworthy']} done job(s) flagged by a quality check: see `driven-atom status {folder}`")
        if status["failed"]:
            print(f"  see `driven-atom status {folder}`; rerun with --retry-failed to run failed jobs again")
        print(f"  table: driven-atom collect {folder}")
    return payload


def _status(args):
    from driven_atom.campaign.store import campaign_status

    status = campaign_status(args.folder)
    if args.json:
        return status
    print(f"campaign {status['folder']}" + ("  (a scan is working on it)" if status["scan_active"] else ""))
    print(f"  total {status['total']}  done {status['done']}  running {status['running']}  "
          f"failed {status['failed']}  pending {status['pending']}"
          f"  (checkpointed {status['checkpointed']}, corrupt {status['corrupt']}; "
          f"untrustworthy {status['untrustworthy']})")
    workers = status["workers"]
    if workers:
        print(f"  workers ({workers['system']}): {workers['alive']} of {workers['workers']} alive, "
              f"{workers['lost']} lost, {workers['requested']} requested "
              f"({workers['resubmits']} of {workers['max_resubmits']} resubmissions); "
              f"batch jobs {', '.join(workers['batch_jobs']) or 'none'}")
    print(f"  wall time of done jobs: {status['wall_s_total']:.2f} s")
    print(f"  {'job':<18}{'status':<14}{'wall_s':>10}  {'trusted':<8} error")
    for job in status["jobs"]:
        wall = f"{job['wall_s']:.3f}" if job["wall_s"] is not None else "-"
        trust = {True: "yes", False: "NO", None: "-"}[job["trustworthy"]]
        print(f"  {job['id']:<18}{job['status']:<14}{wall:>10}  {trust:<8} {job['error']}")
    return None


def _collect(args):
    from driven_atom.campaign.summary import collect, open_campaign
    from driven_atom.cli import SAFETY_CAUTION

    folder = Path(args.folder)
    path = collect(folder, csv=args.csv)
    ds = open_campaign(path)
    dims = {str(d): int(n) for d, n in ds["ionization"].sizes.items()}
    payload = {"summary": str(path), "csv": str(folder / "summary.csv") if args.csv else None,
               "dims": dims, "total": int(ds.attrs["n_jobs"]), "done": int(ds.attrs["jobs_done"]),
               "failed": int(ds.attrs["jobs_failed"]), "missing": int(ds.attrs["jobs_missing"]),
               "untrustworthy": int(ds.attrs["jobs_untrustworthy"])}
    lab = any(str(name).rsplit(".", 1)[-1] in _LAB_KEYS for name in ds.coords)
    if args.json:
        if lab:
            sys.stderr.write(SAFETY_CAUTION + "\n")
        return payload
    print(f"summary: {path}" + (f"\ncsv:     {payload['csv']}" if args.csv else ""))
    print("  dims: " + ", ".join(f"{d} = {n}" for d, n in dims.items()) +
          f"; {payload['done']}/{payload['total']} jobs done, {payload['failed']} failed, "
          f"{payload['untrustworthy']} flagged by a quality check")
    print("  open it: xarray.open_dataset(path, engine=\"h5netcdf\") or driven_atom.open_campaign(folder)")
    if lab:
        print(SAFETY_CAUTION)
    return None

