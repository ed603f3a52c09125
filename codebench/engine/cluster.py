"""Where a sweep runs when it outgrows one machine: the ``[cluster]`` settings.

Three ways to reach Dask workers, exactly one per sweep:

- ``scheduler``: the address of a running Dask scheduler (``tcp://host:8786``);
- ``local_workers``: a Dask cluster of that many worker processes started on
  this machine for the run (and closed after it);
- ``batch_system``: a cluster whose workers are jobs of a batch system
  (SLURM, PBS, SGE, LSF, HTCondor, Moab, OAR) started through dask-jobqueue;
  ``options`` are passed unchanged to its cluster class, ``jobs`` fixes how
  many jobs are requested, or ``adapt_minimum``/``adapt_maximum`` let the
  cluster grow and shrink with the work.

This module only describes and validates; :mod:`codebench.engine.dask_executor`
connects. Keeping Dask out of here lets sweep files be checked on machines
without it.
"""

from __future__ import annotations

import importlib.util
import re
from typing import Any

from codebench.errors import CodebenchError, ConfigError, not_allowed
from codebench.records import CLUSTER_WAYS, ClusterSpec

#: ``batch_system`` names and the dask-jobqueue classes they start.
BATCH_SYSTEMS = {
    "slurm": "SLURMCluster",
    "pbs": "PBSCluster",
    "sge": "SGECluster",
    "lsf": "LSFCluster",
    "htcondor": "HTCondorCluster",
    "moab": "MoabCluster",
    "oar": "OARCluster",
}

CLUSTER_KEYS = (
    "scheduler",
    "local_workers",
    "threads_per_worker",
    "batch_system",
    "jobs",
    "adapt_minimum",
    "adapt_maximum",
    "options",
    "connect_timeout",
)
_ADDRESS = re.compile(r"(?:(?P<scheme>tcp|tls|ucx|ws|wss)://)?(?P<host>[A-Za-z0-9_.\-]+|\[[0-9A-Fa-f:.]+\]):(?P<port>\d+)")
ADDRESS_ALLOWED = "a Dask scheduler address HOST:PORT such as 'tcp://head-node:8786' (port 1 to 65535)"


def scheduler_address(value: object, path: str) -> str:
    """A scheduler address as given on the command line or in ``[cluster]``.

    >>> scheduler_address("tcp://10.1.2.3:8786", "--scheduler")
    'tcp://10.1.2.3:8786'
    >>> scheduler_address("head:8786", "--scheduler")
    'tcp://head:8786'
    """
    match = _ADDRESS.fullmatch(value.strip()) if isinstance(value, str) else None
    if match is None or not 1 <= int(match["port"]) <= 65535:
        raise ConfigError(not_allowed(path, value, ADDRESS_ALLOWED))
    return f"{match['scheme'] or 'tcp'}://{match['host']}:{int(match['port'])}"


def parse_cluster(table: object) -> ClusterSpec:
    """Validate a ``[cluster]`` table; every error names its key."""
    if not isinstance(table, dict):
        raise ConfigError(not_allowed("cluster", table, "a table ([cluster])"))
    unknown = [key for key in table if key not in CLUSTER_KEYS]
    if unknown:
        raise ConfigError(f"cluster.{unknown[0]} is not a known key; allowed keys: {', '.join(CLUSTER_KEYS)}.")
    ways = [w for w in CLUSTER_WAYS if w in table]
    if len(ways) != 1:
        raise ConfigError(not_allowed("cluster", ", ".join(ways) or "none of them",
                                      "exactly one of scheduler, local_workers, batch_system"))
    way = ways[0]
    _only_with(table, way, "threads_per_worker", ("local_workers",))
    _only_with(table, way, "connect_timeout", ("scheduler", "batch_system"))
    for key in ("jobs", "adapt_minimum", "adapt_maximum", "options"):
        _only_with(table, way, key, ("batch_system",))
    spec: dict[str, Any] = {}
    if way == "scheduler":
        spec["scheduler"] = scheduler_address(table["scheduler"], "cluster.scheduler")
    elif way == "local_workers":
        spec["local_workers"] = _count(table, "local_workers", 1)
        spec["threads_per_worker"] = _count(table, "threads_per_worker", 1, default=1)
    else:
        spec.update(_batch_system(table))
    if "connect_timeout" in table:
        value = table["connect_timeout"]
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0 < value <= 3600:
            raise ConfigError(not_allowed("cluster.connect_timeout", value, "a number of seconds in (0, 3600]"))
        spec["connect_timeout"] = float(value)
    return ClusterSpec(**spec)


def _batch_system(table: dict[str, Any]) -> dict[str, Any]:
    name = table["batch_system"]
    if name not in BATCH_SYSTEMS:
        raise ConfigError(not_allowed("cluster.batch_system", name, "one of " + ", ".join(BATCH_SYSTEMS)))
    out: dict[str, Any] = {"batch_system": name}
    adaptive = "adapt_minimum" in table or "adapt_maximum" in table
    if adaptive == ("jobs" in table):
        raise ConfigError(not_allowed("cluster.jobs", table.get("jobs", "absent"),
                                      "given alone, or replaced by adapt_minimum and adapt_maximum"))
    if adaptive and not ("adapt_minimum" in table and "adapt_maximum" in table):
        given, absent = ("adapt_minimum", "adapt_maximum") if "adapt_minimum" in table else ("adapt_maximum",
                                                                                               "adapt_minimum")
        raise ConfigError(f"cluster.{absent} is missing; {given} and {absent} go together.")
    if adaptive:
        low = _count(table, "adapt_minimum", 0)
        high = _count(table, "adapt_maximum", 1)
        if high < low:
            raise ConfigError(not_allowed("cluster.adapt_maximum", high, f"at least adapt_minimum ({low})"))
        out.update(adapt_minimum=low, adapt_maximum=high)
    else:
        out["jobs"] = _count(table, "jobs", 1)
    options = table.get("options", {})
    if not isinstance(options, dict):
        raise ConfigError(not_allowed("cluster.options", options, "a table ([cluster.options]) of "
                                      f"arguments for dask_jobqueue.{BATCH_SYSTEMS[name]}"))
    _check_options(name, options)
    out["options"] = dict(options)
    return out


#: Options whose type is checked here (dask-jobqueue's own errors do not name them).
_COUNT_OPTIONS = ("cores", "processes")
_TEXT_OPTIONS = ("memory", "walltime", "queue", "account", "project")


def _check_options(batch_system: str, options: dict[str, Any]) -> None:
    for key in _COUNT_OPTIONS:
        value = options.get(key, 1)
        if isinstance(value, bool) or not isinstance(value, int) or value < 1:
            raise ConfigError(not_allowed(f"cluster.options.{key}", value, "an integer >= 1"))
    for key in _TEXT_OPTIONS:
        if key in options and not isinstance(options[key], str):
            raise ConfigError(not_allowed(f"cluster.options.{key}", options[key], "a string"))
    if importlib.util.find_spec("dask_jobqueue") is None:
        return  # names are checked when the cluster starts (where the package must be present)
    from codebench.engine.jobqueue_options import check_option_names

    check_option_names(BATCH_SYSTEMS[batch_system], options)


def _only_with(table: dict[str, Any], way: str, key: str, ways: tuple[str, ...]) -> None:
    if key in table and way not in ways:
        raise ConfigError(not_allowed(f"cluster.{key}", table[key], f"absent unless {' or '.join(ways)} is given"))


def _count(table: dict[str, Any], key: str, least: int, default: int | None = None) -> int:
    value = table.get(key, default)
    if isinstance(value, bool) or not isinstance(value, int) or value < least:
        raise ConfigError(not_allowed(f"cluster.{key}", value, f"an integer >= {least}"))
    return value


INSTALL_HINT = "install the cluster extra: pip install -e '.[cluster]' (in a checkout of codebench)"


def require_packages(spec: ClusterSpec) -> None:
    """Refuse, before anything is started or written, a cluster whose Dask packages are missing."""
    needed = ["distributed"] + (["dask_jobqueue"] if spec.batch_system is not None else [])
    missing = [name for name in needed if importlib.util.find_spec(name) is None]
    if missing:
        raise CodebenchError(f"running on a Dask cluster needs {' and '.join(missing)}: {INSTALL_HINT}")
