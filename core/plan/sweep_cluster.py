"""The sweep on a Dask distributed cluster (optional extra ``acqplan[cluster]``).

Imported only when a sweep is given a ``Client`` or a scheduler address. The orbit files
are read once here and registered as a worker plugin: Dask runs the plugin's ``setup``
once on every worker (and on every worker that joins later), which writes the files into
that worker's own folder. The units sent to the workers name only those shipped copies
(relative names under a folder that does not exist here), so a worker never reads a path
of this machine. The rows are those of :func:`core.plan.sweep.run_unit`, equal to the
local pool's for the same seeds.
"""

from __future__ import annotations

import hashlib
import tempfile
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path

from distributed import Client, WorkerPlugin, as_completed, get_worker

from ..ground.errors import Cancelled, InputError
from .spec import OrbitSpec, Scenario
from .sweep import CancelFn, ProgressFn, SweepRow, SweepSpec, run_unit, tick, units

SHIPPED_PREFIX = "acqplan-orbits-"
_NOWHERE = Path("/nonexistent-acqplan-shipped-orbit-files")


class OrbitFilesPlugin(WorkerPlugin):
    """Writes the sweep's orbit files into the worker's folder, once per worker."""

    def __init__(self, name: str, files: Sequence[tuple[str, bytes]]):
        self.name = name
        self.files = tuple(files)          # (shipped relative name, content)
        self.directory: str | None = None

    def setup(self, worker) -> None:
        root = Path(getattr(worker, "local_directory", None) or tempfile.gettempdir())
        folder = root / self.name
        for rel, content in self.files:
            path = folder / rel
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(content)
        self.directory = str(folder)


def shipped_form(scenario: Scenario) -> tuple[Scenario, list[tuple[str, bytes]], str]:
    """The scenario naming only shipped copies of its files (orbit files, mapping and, for
    a drive, the route and horizon files), the files, and a key that changes with their
    content (a new sweep with other files ships them again)."""
    files: list[tuple[str, bytes]] = []

    def ship(folder: str, path: Path) -> str:
        rel = f"{folder}/{path.name}"      # the file's own name, in case a reader looks at it
        files.append((rel, path.read_bytes()))
        return rel

    names = [ship(str(i), p) for i, p in enumerate(scenario.resolved_orbit_files())]
    mapping = scenario.resolved_mapping()
    m_rel = None if mapping is None else ship("mapping", mapping)
    shipped = replace(scenario, orbits=OrbitSpec(tuple(names), m_rel), base_dir=_NOWHERE, path=None)
    route = getattr(scenario, "route", None)
    if route is not None:
        def local(name: str | None, folder: str) -> str | None:
            if name is None:
                return None
            p = Path(name).expanduser()
            return ship(folder, p if p.is_absolute() else Path(scenario.base_dir) / p)

        stretches = tuple(replace(st, horizon_file=local(st.horizon_file, f"horizon{i}"))
                          for i, st in enumerate(route.stretches))
        shipped = replace(shipped, route=replace(route, file=local(route.file, "route"),
                                                 horizon_file=local(route.horizon_file, "horizon"),
                                                 stretches=stretches))
    digest = hashlib.sha256()
    for rel, content in files:
        digest.update(rel.encode() + b"\0" + hashlib.sha256(content).digest())
    return shipped, files, SHIPPED_PREFIX + digest.hexdigest()[:16]


def use_shipped_files(scenario: Scenario, key: str) -> Scenario:
    """On a worker: the scenario pointed at this worker's copies of the files."""
    plugin = get_worker().plugins.get(key)
    if plugin is None or getattr(plugin, "directory", None) is None:
        raise InputError("the orbit files were not shipped to this worker", field="--scheduler")
    return replace(scenario, base_dir=Path(plugin.directory))


def run_on_dask(scenario: Scenario, spec: SweepSpec, client: Client | None, scheduler: str | None,
                progress: ProgressFn | None, cancel: CancelFn | None) -> tuple[list[SweepRow], int, str]:
    own = client is None
    if own:
        try:
            client = Client(scheduler, timeout="10s")
        except (OSError, TimeoutError, ValueError) as err:
            raise InputError(f"cannot reach the Dask scheduler at {scheduler}: {err}",
                             field="--scheduler") from None
    assert client is not None
    futures: list = []
    try:
        shipped, files, key = shipped_form(scenario)
        client.register_plugin(OrbitFilesPlugin(key, files), name=key)
        n = max(1, len(client.scheduler_info().get("workers", {})))
        futures = [client.submit(run_unit, u, pure=False) for u in units(shipped, spec, n, shipped=key)]
        rows: list[SweepRow] = []
        for f in as_completed(futures):
            rows += f.result()
            tick(progress, len(rows), spec.n_combinations)
            if cancel is not None and cancel():
                raise Cancelled("sweep cancelled")
        futures = []
        return rows, n, str(client.scheduler.address)
    finally:
        if futures:                    # cancelled, interrupted or failed
            client.cancel(futures)
        if own:
            client.close()


__all__ = ["OrbitFilesPlugin", "run_on_dask", "shipped_form", "use_shipped_files"]
