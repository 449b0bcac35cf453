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
from pathlib import Path

from framestyle.errors import FramestyleError
from framestyle.pipeline import Plan, Progress, RenderResult, finish_render, no_progress, plan_render, render_shot
from framestyle.qc.flash_check import flash_warning
from framestyle.settings import Settings
from framestyle.store import FLASH_KINDS, Store

RESOURCE = "shot"  # the Dask worker resource a shot task needs: one shot per worker at a time
_CONNECT_TIMEOUT = "5s"
_POLL_SECONDS = 1.0


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
        the worker machine's cores on a shared cluster)
    progress : as :func:`pipeline.render`, plus ``"farm"`` events (done, workers: address →
        shot number) about once a second
    """
    from distributed import Client, LocalCluster

    if workers < 1:
        raise FramestyleError(f"--workers {workers}: must be 1 or more")
    local_threads = threads or max(1, (os.cpu_count() or 1) // workers)
    if scheduler is None:
        _set_threads(local_threads)  # recorded with the render: what each worker computes with
    client = None if scheduler is None else _connect(scheduler)  # before the output folder is touched
    cluster = None
    try:
        plan = plan_render(input_path, out, settings, shots=shots, shot_file=shot_file, restart=restart,
                           keep_shot_list=keep_shot_list, progress=progress)
        if scheduler is None and len(plan.wanted) < workers:
            progress("warning", message=f"--workers {workers} for {len(plan.wanted)} shot(s): a shot is one worker's "
                                        f"task, so {workers - len(plan.wanted)} will have nothing to do, with "
                                        f"{local_threads} thread(s) each instead of more")
        if client is None:
            # No memory limit: Dask's nanny would kill a worker whose torch pool grows past its
            # share, and an HD frame's solve legitimately needs a few GB.
            cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, resources={RESOURCE: 1},
                                   memory_limit=0, dashboard_address=None, silence_logs=logging.CRITICAL)
            client = Client(cluster)
        _run_shots(client, plan, local_threads if scheduler is None else threads, progress)
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


def _run_shots(client, plan: Plan, threads: int | None, progress: Progress) -> None:
    """Submit one task per wanted shot, longest first; report progress; stop at a user error."""
    from distributed import KilledWorker

    order = sorted(plan.wanted, key=lambda n: (-plan.shots[n - 1].length, n))
    futures = {client.submit(_shot_task, plan, n, threads, key=f"shot-{n}", resources={RESOURCE: 1}, pure=False,
                             priority=plan.shots[n - 1].length): n for n in order}
    store, names = Store(plan.out), plan.names
    wanted = {names[i] for n in plan.wanted for i in range(plan.shots[n - 1].start, plan.shots[n - 1].end + 1)}
    pending, error = set(futures), None
    while pending:
        time.sleep(_POLL_SECONDS)
        done = {f for f in pending if f.done()}
        pending -= done
        for future in done:
            try:
                progress("shot", summary=future.result())
                _warn_flashes(store, futures[future], progress)
            except (FramestyleError, KilledWorker) as exc:  # a user error in one shot: start no further shot
                if isinstance(exc, KilledWorker):
                    exc = FramestyleError(f"shot {futures[future]}: the workers rendering it died repeatedly "
                                          f"(out of memory?); the frames it finished are kept")
                error = error or exc
                for other in pending:
                    if other.status == "pending" and not _running(client, other.key):
                        other.cancel()
                pending = {f for f in pending if not f.cancelled()}
        finished = sum(1 for name in store.finished() if name in wanted)
        on = {address: _shot_of(keys) for address, keys in client.processing().items()}
        progress("farm", done=finished, workers=on)
    if error is not None:
        raise error


def _warn_flashes(store: Store, shot: int, progress: Progress) -> None:
    """Pass on the flash check a worker recorded for ``shot``, where its frames flash."""
    reports = {kind: store.flash_check(kind, shot) for kind in FLASH_KINDS}
    warning = all(reports.values()) and flash_warning(reports, f"shot {shot}")
    if warning:
        progress("warning", message=warning)


def _shot_of(keys) -> int | None:
    """The shot number of the task a worker is processing (keys are ``shot-N``), or None."""
    for key in keys:
        if isinstance(key, str) and key.startswith("shot-"):
            return int(key[5:])
    return None


def _running(client, key: str) -> bool:
    return any(key in keys for keys in client.processing().values())


def _shot_task(plan: Plan, index: int, threads: int | None):
    """A shot on a worker: render it (resuming its record), with this worker's thread count."""
    _set_threads(threads or os.cpu_count() or 1)
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
