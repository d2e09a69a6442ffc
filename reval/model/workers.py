"""Where segment and fold fits run: local worker processes (`[model] jobs`), or a Dask distributed cluster
(`[model] scheduler`), through joblib's backend switch so the fitting code is the same either way.

Only the fits travel; their results come back to this process, which alone writes the project's DuckDB file.
Dask is an optional extra (`pip install 'reval[cluster]'`) and is imported only when a scheduler is named."""
from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

from reval.errors import UserError

CONNECT_SECONDS = 10


@contextmanager
def fit_workers(scheduler: str | None) -> Iterator[None]:
    """Inside, joblib's `Parallel` runs on the cluster at `scheduler`; with None, on local processes."""
    if scheduler is None:
        yield
        return
    try:
        import joblib
        from dask.distributed import Client
    except ImportError as error:
        raise UserError(f"Fitting on {scheduler} needs Dask: pip install 'reval[cluster]' ({error}).") from error
    try:
        client = Client(scheduler, timeout=CONNECT_SECONDS)
    except OSError as error:
        raise UserError(f"Cannot reach the Dask scheduler at {scheduler}: {error}") from error
    with client, joblib.parallel_backend("dask"):
        yield
