"""A run of a scenario: the stages in order (``order``), one module per stage, the manifest."""

from .clusters_stage import CLUSTER_FIELDS, SIZE_FIELDS
from .inputs import Inputs, Product, RunResult, check, read_inputs
from .order import Stage, plan, planned_stages, run, stages_not_run
from .records import CONVENTIONS

__all__ = ["CLUSTER_FIELDS", "CONVENTIONS", "Inputs", "Product", "RunResult", "SIZE_FIELDS",
           "Stage", "check", "plan", "planned_stages", "read_inputs", "run", "stages_not_run"]
