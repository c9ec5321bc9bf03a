"""Relay-ladder designer: IEC 60063 values, topologies, optimiser, settings <-> ohms.

Public API (see each module):

* :func:`design_ladder` -> :class:`LadderDesign`
* :func:`settings_impedance_ohm`, :func:`open_impedance_ohm`
* :func:`nearest_setting`
* :func:`parts_list`, :func:`settings_rows`, :func:`wiring_diagram`
* :func:`board_ladder_block`, :func:`write_board_ladder`
* :func:`exhaustive_best`, :func:`branch_and_bound` (the search itself; its seed in
  ``localsearch``)
* ``calibrate``: the parts fitted to meter readings, the table rebuilt
* :func:`seen_termination_ohm`, :func:`suggest_transformer_ratio` (remote ladder)
* :func:`predicted_null_loss` (with a solved antenna model)
* :func:`parse_ladder` (the ``[ladder]`` station section)
"""

from nullsteer.ladder.design import (LadderDesign, Setting, design_ladder, evaluate,
                                     nearest_setting, open_impedance_ohm,
                                     settings_impedance_ohm, with_values)
from nullsteer.ladder.eseries import SERIES, ESeries, get_series
from nullsteer.ladder.network import Parasitics
from nullsteer.ladder.nullloss import NullLoss, predicted_null_loss
from nullsteer.ladder.optimise import (Candidates, SearchResult, binary_weighted,
                                       branch_and_bound, default_candidates, exhaustive_best)
from nullsteer.ladder.outputs import (PARTS_CAUTION, board_ladder_block, design_from_board_block,
                                      parts_list,
                                      settings_rows, wiring_diagram, write_board_ladder)
from nullsteer.ladder.remote import (RemoteSpec, ladder_range_ohm, reactance_warnings,
                                     seen_termination_ohm, suggest_transformer_ratio)
from nullsteer.ladder.spec import LadderSpec, parse_ladder
from nullsteer.ladder.topology import TOPOLOGIES, LadderValues, Topology, get_topology

__all__ = [
    "LadderDesign", "Setting", "design_ladder", "evaluate", "nearest_setting",
    "open_impedance_ohm", "settings_impedance_ohm", "with_values", "SERIES", "ESeries",
    "get_series", "Parasitics", "NullLoss", "predicted_null_loss", "Candidates",
    "SearchResult", "binary_weighted", "branch_and_bound", "default_candidates",
    "exhaustive_best", "PARTS_CAUTION", "board_ladder_block", "design_from_board_block", "parts_list", "settings_rows",
    "wiring_diagram", "write_board_ladder", "RemoteSpec", "ladder_range_ohm",
    "reactance_warnings", "seen_termination_ohm", "suggest_transformer_ratio", "LadderSpec",
    "parse_ladder", "TOPOLOGIES", "LadderValues", "Topology", "get_topology",
]
