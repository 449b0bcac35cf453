"""Render farm: the shots of one render as tasks on a Dask cluster, local or shared.

A shot's frames depend on each other through the temporal chain, but shots do not, so each
shot is one task (:func:`framestyle.pipeline.render_shot`), and the output folder's store
(per-shot locks and records) lets workers on several processes or machines write one folder.
Tasks carry the render's plan — paths, settings, the shot list — never frames or networks;
each worker opens the input and loads the network itself (once per process).

Scheduling is longest shot first (the longest-processing-time rule of Graham 1969, "Bounds on
multiprocessing timing anomalies": within 4/3 of the optimal makespan on identical
machines). A worker killed mid-shot has its task run again by Dask on a live worker, which
resumes the shot from its record and kept state (the dead process's shot lock went with
it). framestyle runs no scheduler or queue of its own: a local cluster is Dask's
``LocalCluster``, a shared one is started with Dask's own ``dask scheduler`` and
``dask worker`` commands (see the README).
"""

from __future__ import annotations

import logging
import os
import time
import uuid
from pathlib import Path

from framestyle.errors import FramestyleError
from framestyle.pipeline import Plan, Progress, RenderResult, finish_render, no_progress, plan_render, render_shot
from framestyle.qc.flash_check import flash_warning
from framestyle.settings import Settings
from framestyle.store import FLASH_KINDS, Store

RESOURCE = "shot"  # the Dask worker resource a shot task needs: one shot per worker at a time
_CONNECT_TIMEOUT = "5s"
_POLL_SECONDS = 1.0
_NO_WORKER_SECONDS = 30.0  # a worker killed is restarted by its nanny within seconds; past this, none is left


def farm_render(
    input_path: Path, out: Path, settings: Settings, *, workers: int = 2, scheduler: str | None = None,
    threads: int | None = None, shots: str | None = None, shot_file: Path | None = None, restart: bool = False,
    keep_shot_list: bool = False, progress: Progress = no_progress,
) -> RenderResult:
    """Render the shots of a clip as tasks on a Dask cluster; otherwise as :func:`pipeline.render`.

    Parameters
    ----------
    workers : local worker processes on a ``LocalCluster`` (when ``scheduler`` is None)
    scheduler : address of a running Dask scheduler whose workers see the same input and
        output paths, each offering one ``shot`` resource
    threads : torch threads per worker (default: this machine's cores / ``workers`` locally,
        on a shared cluster the worker machine's cores shared among its shot workers)
    progress : as :func:`pipeline.render`, plus ``"farm"`` events (done, shots: the shots being
        rendered in the folder now) about once a second

    Paths are made absolute here: a worker of a shared cluster runs in a folder of its own,
    where a relative path names another file or folder (a sweep's worker wrote a whole render
    into its own working folder, and the client then found none).
    """
    from distributed import Client, LocalCluster

    input_path, out = Path(input_path).absolute(), Path(out).absolute()
    shot_file = Path(shot_file).absolute() if shot_file is not None else None

    if workers < 1:
        raise FramestyleError(f"--workers {workers}: must be 1 or more")
    cores = os.cpu_count() or 1
    if scheduler is None and workers > cores:  # more torch processes than cores slow each other several times over
        progress("warning", message=f"--workers {workers} on {cores} cores: {cores} worker(s) started, one thread each")
        workers = cores
    local_threads = threads or max(1, cores // workers)
    if scheduler is None:
        _set_threads(local_threads)  # recorded with the render: what each worker computes with
    # Dask's own log lines (a lost connection's traceback ...) would bury the one line said here
    for name in ["distributed", *logging.root.manager.loggerDict]:
        if name.startswith("distributed"):
            logging.getLogger(name).setLevel(logging.CRITICAL)
    client = None if scheduler is None else _connect(scheduler)  # before the output folder is touched
    cluster = None
    try:
        plan = plan_render(input_path, out, settings, shots=shots, shot_file=shot_file, restart=restart,
                           keep_shot_list=keep_shot_list, progress=progress)
        if scheduler is None and len(plan.wanted) < workers:
            progress("warning", message=f"--workers {workers} for {len(plan.wanted)} shot(s): a shot is one worker's "
                                        f"task, so {max(1, len(plan.wanted))} worker(s) started, with "
                                        f"{local_threads} thread(s) each instead of more")
            workers = max(1, len(plan.wanted))
        if client is None:
            # No memory limit: Dask's nanny would kill a worker whose torch pool grows past its
            # share, and an HD frame's solve legitimately needs a few GB.
            cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, resources={RESOURCE: 1},
                                   memory_limit=0, dashboard_address=None, silence_logs=logging.CRITICAL)
            client = Client(cluster)
        _run_shots(client, plan, local_threads if scheduler is None else threads, progress,
                   "the local cluster" if scheduler is None else f"--scheduler {scheduler}")
    finally:
        if client is not None:
            client.close()
        if cluster is not None:
            cluster.close()
    return finish_render(plan, progress)


def _connect(scheduler: str):
    """A client of the running Dask scheduler at ``scheduler``, with a worker that offers the
    shot resource; a one-line error otherwise."""
    from distributed import Client

    try:
        client = Client(scheduler, timeout=_CONNECT_TIMEOUT)
    except (OSError, ValueError) as exc:  # ValueError: not an address (e.g. no port)
        raise FramestyleError(f"--scheduler {scheduler}: cannot reach the Dask scheduler ({exc})") from None
    workers = client.scheduler_info()["workers"].values()
    if not any(w.get("resources", {}).get(RESOURCE) for w in workers):
        client.close()
        raise FramestyleError(
            f"--scheduler {scheduler}: no worker offers the '{RESOURCE}' resource; start workers with "
            f"`dask worker {scheduler} --nthreads 1 --resources {RESOURCE}=1`"
        )
    return client


def _run_shots(client, plan: Plan, threads: int | None, progress: Progress, where: str) -> None:
    """Submit one task per wanted shot, longest first; report progress; stop at a user error.

    Task keys carry a token of this submission, so two renders sent to one cluster never
    share a task. Without ``threads`` a worker takes its machine's cores shared among the
    shot workers on that machine. ``where`` names the cluster in messages."""
    from distributed import KilledWorker
    from distributed.client import FutureCancelledError

    token = uuid.uuid4().hex[:8]
    shares = _workers_per_machine(client)
    order = sorted(plan.wanted, key=lambda n: (-plan.shots[n - 1].length, n))
    futures = {client.submit(_shot_task, plan, n, threads, shares, key=f"shot-{n}-{token}", resources={RESOURCE: 1},
                             pure=False, priority=plan.shots[n - 1].length): n for n in order}
    store, names = Store(plan.out), plan.names
    wanted = {names[i] for n in plan.wanted for i in plan.shots[n - 1].frames}
    pending, error, died, alone_since = set(futures), None, [], None
    while pending:
        time.sleep(_POLL_SECONDS)
        try:
            done = {f for f in pending if f.done()}
            pending -= done
            for future in done:
                try:
                    summary = future.result()
                    for warning in summary.warnings:  # the worker's, said here where someone watches
                        progress("warning", message=warning)
                    progress("shot", summary=summary)
                    _warn_flashes(store, futures[future], progress)
                except KilledWorker:
                    died.append(futures[future])
                except FramestyleError as exc:  # a user error in one shot: start no further shot
                    error = error or exc
                if error or died:
                    for other in pending:
                        if other.status == "pending" and not _running(client, other.key):
                            other.cancel()
                    pending = {f for f in pending if not f.cancelled()}
            if not _workers_per_machine(client):  # every worker offering the resource is gone
                alone_since = alone_since or time.monotonic()
                if time.monotonic() - alone_since > _NO_WORKER_SECONDS:
                    raise FramestyleError(f"{where}: no worker offering the '{RESOURCE}' resource has been there for "
                                          f"{_NO_WORKER_SECONDS:.0f} s; the frames finished are kept: start workers "
                                          f"and run the same command again")
            else:
                alone_since = None
        except (FutureCancelledError, OSError) as exc:  # the scheduler went away (CommClosedError is an OSError)
            reason = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
            raise FramestyleError(f"{where}: lost the Dask scheduler ({reason}); the frames finished are kept: run "
                                  f"the same command again, or with --workers N on this machine") from None
        finished = sum(1 for name in store.finished() if name in wanted)
        progress("farm", done=finished, shots=store.rendering(plan.wanted))
    if died:
        shots = ", ".join(map(str, sorted(died)))
        error = error or FramestyleError(f"shot(s) {shots}: the workers rendering or holding them died repeatedly "
                                         f"(out of memory?); the frames they finished are kept")
    if error is not None:
        raise error
    done = store.finished()
    unfinished = [n for n in plan.wanted
                  if any(names[i] not in done for i in plan.shots[n - 1].frames)]
    if unfinished:  # a task that returned without its frames: never exit 0 with frames missing
        raise FramestyleError(f"{plan.out}: shot(s) {', '.join(map(str, unfinished))} came back from {where} "
                              f"unfinished; run the same command again to finish them")


def _workers_per_machine(client) -> dict[str, int]:
    """For each worker offering the shot resource (by address), how many such workers share
    its machine."""
    workers = {address: info for address, info in client.scheduler_info()["workers"].items()
               if info.get("resources", {}).get(RESOURCE)}
    hosts = [info.get("host", address) for address, info in workers.items()]
    return {address: hosts.count(host) for address, host in zip(workers, hosts)}


def _warn_flashes(store: Store, shot: int, progress: Progress) -> None:
    """Pass on the flash check a worker recorded for ``shot``, where its frames flash."""
    reports = {kind: store.flash_check(kind, shot) for kind in FLASH_KINDS}
    warning = all(reports.values()) and flash_warning(reports, f"shot {shot}")
    if warning:
        progress("warning", message=warning)


def _running(client, key: str) -> bool:
    return any(key in keys for keys in client.processing().values())


def _shot_task(plan: Plan, index: int, threads: int | None, shares: dict[str, int]):
    """A shot on a worker: render it (resuming its record), with ``threads`` torch threads, or
    its machine's cores shared among the ``shares[address]`` shot workers there."""
    from distributed import get_worker

    _set_threads(threads or max(1, (os.cpu_count() or 1) // shares.get(get_worker().address, 1)))
    started = time.time()
    summary = render_shot(plan, index, wait=True, check_flashes=True)
    Store(plan.out).log(f"shot {index} rendered on {os.uname().nodename} pid {os.getpid()} "
                        f"in {time.time() - started:.0f} s")
    return summary


def _set_threads(threads: int) -> None:
    import cv2
    import torch

    torch.set_num_threads(threads)
    cv2.setNumThreads(threads)
