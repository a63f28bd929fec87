"""Audience files scored in bulk: ``upshot score``, in one process or on a Dask cluster.

:func:`score_file` reads a CSV or Parquet audience in chunks, decides every customer
through the service's own decision path, commits every decision to the decision log and
only then renames the finished output into place. :func:`service.batch.cluster.dask_runner`
(needs the ``dask`` extra) runs the parts on a Dask cluster instead of in this process.
"""

from __future__ import annotations

from service.batch.files import OutputFile, Part, output_format, plan_parts
from service.batch.run import (
    CHUNK_ROWS,
    PART_ROWS,
    Audience,
    InProcess,
    Runner,
    Summary,
    score_file,
)

__all__ = [
    "CHUNK_ROWS",
    "PART_ROWS",
    "Audience",
    "InProcess",
    "OutputFile",
    "Part",
    "Runner",
    "Summary",
    "output_format",
    "plan_parts",
    "score_file",
]
