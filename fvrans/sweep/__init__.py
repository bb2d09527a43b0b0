"""Parameter sweeps: a base case, varied settings, a sampling plan, collected outputs; runs in
this process or on a dask.distributed cluster, one row per run in a results table.

- ``spec.py``: the spec (TOML file or :class:`Sweep` object) and its checks
- ``plan.py``: the design points (factorial, Latin hypercube, Sobol)
- ``runner.py``: running the design points, run folders, resuming, the ``fvrans sweep`` command
- ``collect.py``: the outputs of one run folder
- ``table.py``: the results table (CSV and JSON)
"""

from fvrans.sweep.collect import collect_outputs
from fvrans.sweep.plan import DesignPoint, design_points
from fvrans.sweep.runner import execute_run, run_key, run_sweep, sweep_command
from fvrans.sweep.spec import Output, Parameter, Sweep, load_sweep, sweep_from_dict
from fvrans.sweep.table import ResultsTable, write_table

__all__ = [
    "DesignPoint",
    "Output",
    "Parameter",
    "ResultsTable",
    "Sweep",
    "collect_outputs",
    "design_points",
    "execute_run",
    "load_sweep",
    "run_key",
    "run_sweep",
    "sweep_command",
    "sweep_from_dict",
    "write_table",
]
