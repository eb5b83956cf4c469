"""Outputs of a plan: tables (pandas) and the machine-readable summary.

Nothing here solves or imports PuLP: every function takes a finished
:class:`~hubnet.solution.Solution`. Writing the files of a run folder is
:func:`hubnet.runfolder.write_run`.
"""

from hubnet.report.summary import summary_dict, summary_json
from hubnet.report.tables import (
    COLUMNS,
    TABLES,
    all_tables,
    describe_columns,
    hierarchy_table,
    hubs_table,
    legs_table,
    rank_size_exponent,
    rank_size_table,
    routes_table,
)

__all__ = [
    "COLUMNS",
    "TABLES",
    "all_tables",
    "describe_columns",
    "hierarchy_table",
    "hubs_table",
    "legs_table",
    "rank_size_exponent",
    "rank_size_table",
    "routes_table",
    "summary_dict",
    "summary_json",
]
