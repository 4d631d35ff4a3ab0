"""Archive campaigns: months of feeds reviewed in time chunks on dask.distributed.

:func:`run_campaign` cuts an archive of plot feeds into overlapping UTC
chunks, reviews each chunk with the library's review run on a dask cluster
(a local one by default), joins the trajectories across chunk boundaries,
and writes the combined tables (Parquet, GeoParquet), a DuckDB catalogue
and an index page. :func:`find` queries the catalogue.

Modules, following the data: ``archive`` (discovery, file scans, chunks),
``task`` (one chunk on a worker, result keys), ``schedule`` (dask),
``health`` (radar health per station and chunk), ``join`` (across
boundaries), ``alerts`` (the campaign's alerts), ``catalogue`` (tables and
DuckDB), ``page`` (``index.html``), ``find`` (queries), ``run`` (the whole).
"""

from __future__ import annotations

from harbourwatch.campaign.find import find, format_rows
from harbourwatch.campaign.run import CampaignSummary, ChunkOutcome, run_campaign
from harbourwatch.campaign.task import peak_rss_mb

__all__ = ["run_campaign", "CampaignSummary", "ChunkOutcome", "find", "format_rows", "peak_rss_mb"]
