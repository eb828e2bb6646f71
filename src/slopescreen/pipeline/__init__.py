"""The one place that knows the order of the stages.

:func:`run` takes a validated :class:`~slopescreen.scenario.Scenario`, reads
its inputs, runs each stage the scenario asks for and writes the products.
Products are first written into a hidden staging folder inside the output
folder and moved into place only when every stage has succeeded, with
``manifest.json`` last: a failed run leaves no half-written product, and the
inputs are only ever read.

Modules: ``order`` (:func:`run`, the stages it plans and those that did not
run), ``inputs`` (reading and checking the rasters, the soil-unit index),
``staging`` (the staging folder and the product list), one module per stage
(``terrain_stage``, ``stability_stage``, ``clusters_stage``,
``report_stage``) and ``records`` (the manifest).
"""

from .clusters_stage import CLUSTER_FIELDS, SIZE_FIELDS
from .inputs import Inputs, Product, RunResult, check, read_inputs, unit_index_map
from .order import STAGE_PRODUCTS, planned_stages, run, stages_not_run
from .records import CONVENTIONS
from .stability_stage import STORM_FLAGS

__all__ = ["CLUSTER_FIELDS", "CONVENTIONS", "Inputs", "Product", "RunResult", "SIZE_FIELDS",
           "STAGE_PRODUCTS", "STORM_FLAGS", "check", "planned_stages", "read_inputs", "run",
           "stages_not_run", "unit_index_map"]
