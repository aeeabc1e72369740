"""Run a study: one code path for the whole analysis, split by purpose.

* :mod:`.inputs`: read what the study names (line specs, network, hubs,
  settlements, grid and rasters), once.
* :mod:`.steps`: :func:`analyse` one set of inputs (baseline or scenario):
  access, metrics, profile, surface.
* :mod:`.scenarios`: scenario inputs, the comparison with the baseline, the
  ranking.
* :mod:`.changes`: a scenario's network as the baseline's re-costed in place
  (closures, upgrades; ids kept) and where each hub went, so its nearest
  hubs are repaired from the baseline's instead of searched again.
* :mod:`.outputs`: the writers and the summary.
* :mod:`.run`: :func:`run_study` and :func:`run_surface`, which tie them
  together and write the results folder atomically.

Results are model estimates; local surveys, codes and licensed professional
practice decide.
"""

from .inputs import (Hubs, build_or_read, layer_ref, layer_specs, load_rasters, merge_hubs, read_hubs,
                     read_settlements, settlement_population, study_grid)
from .outputs import nodes_layer, summarise, write_outputs, write_surface_outputs
from .run import Progress, check_outdir, run_study, run_surface
from .changes import can_change_in_place, changed_network, hub_map
from .scenarios import compare, edges_layer, rank_scenarios, scenario_inputs
from .steps import ALL_STEPS, Analysis, analyse, path_frame

__all__ = [
    "Hubs", "build_or_read", "layer_ref", "layer_specs", "load_rasters", "merge_hubs", "read_hubs",
    "read_settlements", "settlement_population", "study_grid",
    "ALL_STEPS", "Analysis", "analyse", "path_frame",
    "compare", "edges_layer", "rank_scenarios", "scenario_inputs",
    "can_change_in_place", "changed_network", "hub_map",
    "nodes_layer", "summarise", "write_outputs", "write_surface_outputs",
    "Progress", "check_outdir", "run_study", "run_surface",
]
