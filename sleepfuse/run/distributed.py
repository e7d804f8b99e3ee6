"""Per-participant work on a Dask cluster: ``sleepfuse batch STUDY --scheduler ADDRESS``.

Each participant is one task (``run_participant``) sent to a Dask
distributed cluster; only the light outcome comes back, as with the process
pool, and the outcomes are sorted by participant afterwards, so the tables
equal those of a single-process run. ``local`` starts a LocalCluster on
this machine. The workers must see the study at the same path (a shared
file system) and have sleepfuse installed. Dask is an optional extra:
``pip install 'sleepfuse[cluster]'``.
"""

from __future__ import annotations

import logging
import uuid
from typing import TYPE_CHECKING, Any, Callable

if TYPE_CHECKING:  # pragma: no cover
    from sleepfuse.model.config import StudyConfig
    from sleepfuse.run.participant import ParticipantJob

LOCAL = "local"
CONNECT_TIMEOUT = "30s"  # how long to wait for a remote scheduler before giving up
INSTALL_HINT = "install it with: pip install 'sleepfuse[cluster]'"


class DaskUnavailable(RuntimeError):
    """Dask is not installed, or the scheduler cannot be reached."""


def _import_distributed():
    try:
        import distributed  # noqa: F401
        from distributed import Client, LocalCluster, as_completed
    except ImportError as exc:
        raise DaskUnavailable(f"--scheduler needs Dask distributed, which is not installed ({exc}); {INSTALL_HINT}") from None
    return Client, LocalCluster, as_completed


def _run_task(job: "ParticipantJob", inputs: list[dict] | None, run_one: Callable[..., Any], config: "StudyConfig"):
    """The task run on a Dask worker: one participant, read and scored there."""
    return run_one(config, job, inputs)


def connect(scheduler: str, workers: int):
    """A Dask client (and the LocalCluster it owns, or None) for ``scheduler``: an address or 'local'."""
    Client, LocalCluster, _ = _import_distributed()
    if scheduler == LOCAL:
        # one single-threaded worker process per requested worker: one participant at a time each
        cluster = LocalCluster(n_workers=max(1, workers), threads_per_worker=1, processes=True,
                               dashboard_address=None, silence_logs=logging.ERROR)
        return Client(cluster), cluster
    try:
        return Client(scheduler, timeout=CONNECT_TIMEOUT), None
    except (OSError, TimeoutError, ValueError) as exc:
        raise DaskUnavailable(
            f"cannot reach the Dask scheduler at {scheduler!r} ({type(exc).__name__}: {exc}); start it with "
            f"'dask scheduler' on the head node and give its address, e.g. --scheduler tcp://head:8786"
        ) from None


def run_jobs_on_dask(
    config: "StudyConfig",
    jobs: "list[ParticipantJob]",
    inputs: list[list[dict] | None],
    scheduler: str,
    workers: int,
    finish: Callable[[int, Any, int], None],
    *,
    run_one: Callable[..., Any],
    on_error: Callable[..., Any],
) -> None:
    """Run every job as a Dask task; ``finish(index, outcome, n_done)`` is called as each one arrives.

    A task that fails (a lost worker, an exception outside the pipeline's own
    handling) becomes a QC error for that participant, never a stopped batch: ``run_one(config, job,
    inputs)`` is the task, ``on_error(config, job, exc, inputs)`` the outcome of one that failed.
    """
    if not jobs:
        return
    _, _, as_completed = _import_distributed()
    client, cluster = connect(scheduler, workers)
    try:
        cfg = client.scatter(config, broadcast=True)
        run = uuid.uuid4().hex[:12]  # task keys unique on a scheduler shared by several runs
        futures = client.map(_run_task, jobs, inputs, run_one=run_one, config=cfg, pure=False,
                             key=[f"sleepfuse-{run}-{i}-{job.participant}" for i, job in enumerate(jobs)])
        index = {f.key: k for k, f in enumerate(futures)}
        for n_done, fut in enumerate(as_completed(futures), start=1):
            k = index[fut.key]
            try:
                outcome = fut.result()
            except Exception as exc:  # noqa: BLE001 - one participant lost, not the study
                outcome = on_error(config, jobs[k], exc, inputs[k])
            fut.release()
            finish(k, outcome, n_done)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
