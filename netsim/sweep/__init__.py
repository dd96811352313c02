"""netsim.sweep: resumable, parallel parameter sweeps over a scenario, stored in SQLite.

Describing a sweep
------------------
In the scenario file::

    [sweep]
    combine = "grid"                 # or "zip": the i-th values of all axes go together
    repeats = 3                      # independent seeds per combination
    seed = 7                         # base seed (default 0)
    pairs = 500                      # stop rule for every point: pairs | time_s | precision

    [sweep.vary]
    "links[*].length_km" = [10, 20, 40]
    "sites[role=repeater].t2_s" = "log:0.01:10:7"
    "defaults.link.attenuation_db_per_km" = { from = 0.18, to = 0.3, points = 5 }

or on the command line: ``netsim sweep FILE --vary 'links[2].length_km=lin:5:50:10'`` (repeatable;
it replaces a file axis with the same key). Keys: ``sites[...]``, ``links[...]``,
``demands[...]`` with a selector ``[*]`` (every entry), ``[INDEX]`` (zero-based) or
``[KEY=VALUE]`` (e.g. ``[role=repeater]``, ``[name=Ashford-Brindle]`` for a link's two ends),
and ``defaults.site``, ``defaults.link``, ``protocol``; then a numeric key of that table
(:mod:`netsim.sweep.keypath`). Values: a list, ``"A,B,C"``, ``"lin:FROM:TO:N"``,
``"log:FROM:TO:N"`` or ``{from, to, points, scale = "linear" | "log"}``
(:mod:`netsim.sweep.spec`). Every point's overrides are applied to a deep copy of the scenario
data and validated again by ``netsim.scenario.load_data`` before any point runs.

Seeds and identity
------------------
A point's identity is the SHA-256 of its parameters and repeat index (not its position); its
engine seed comes from ``SeedSequence(base_seed, spawn_key=identity)``. Results therefore do
not depend on order, worker count or executor.

Reading a store (the API for reports)
-------------------------------------
>>> from netsim.sweep import open_store                      # doctest: +SKIP
>>> with open_store("results/chain3/sweep.sqlite") as store:  # doctest: +SKIP
...     store.meta()      # {'format', 'schema_version', 'scenario_hash', 'spec_hash', 'spec', ...}
...     store.points()    # [{'point_id', 'ordinal', 'parameters': {key: value}, 'repeat', 'seed',
...                       #   'status', 'started_utc', 'finished_utc', 'duration_s', 'attempts',
...                       #   'error'}, ...]   (optionally points(status="done"))
...     store.metrics()   # [{'point_id', 'repeat', 'parameters', 'kind', 'name', 'metric',
...                       #   'value'}, ...]   (optionally metrics(kind="demand", metric=...))

``kind`` is ``demand``, ``link``, ``site`` or ``run``; metric names follow the run result's keys
(nested keys dotted; a ``X_ci95`` pair stored as ``X_ci95_low`` and ``X_ci95_high``). The schema
is documented in :mod:`netsim.sweep.store`. A missing, foreign or corrupt file raises
:class:`netsim.errors.StoreError` with a one-line message.

Which parameter matters most
----------------------------
:func:`rank_parameters` (:mod:`netsim.sweep.sensitivity`) varies the uncertain parameters of a
scenario together and ranks them by Sobol' indices or Morris screening per demand and figure.

Running
-------
``run_sweep(make_plan(scenario, vary), make_executor(point_function, workers, cluster),
store_path=...)``; the point function defaults to :func:`netsim.sweep.worker.engine_point`.
"""

from netsim.sweep.executors import DaskPool, LocalPool, make_executor
from netsim.sweep.plan import SweepPlan, make_plan
from netsim.sweep.runner import SweepSummary, default_store_path, run_sweep
from netsim.sweep.sensitivity import Sensitivity, rank_parameters
from netsim.sweep.spec import Point, SweepSpec, build_spec
from netsim.sweep.store import SweepStore, open_store
from netsim.sweep.worker import PointTask, engine_point

__all__ = [
    "DaskPool",
    "LocalPool",
    "Point",
    "PointTask",
    "Sensitivity",
    "SweepPlan",
    "SweepSpec",
    "SweepStore",
    "SweepSummary",
    "build_spec",
    "default_store_path",
    "engine_point",
    "make_executor",
    "make_plan",
    "open_store",
    "rank_parameters",
    "run_sweep",
]
