"""The plant archive in HDF5: asset tree, one file per run, a catalogue for trends.

An archive is a folder (for example ``demo-works.shaftwatch/``) that any HDF5 tool can
read; docs/archive-schema.md describes every group, dataset and attribute, the
crash-safety rules, the writer lock and the versioning.

Main entry points: :func:`create_archive`, :func:`open_archive` and the
:class:`Archive` they return.
"""

from .catalogue import TREND_VALUES, CatalogueRow
from .ingest import ImportResult
from .integrity import Problem, RebuildResult
from .plant import MachineInfo, PointInfo, SiteInfo
from .runfile import SUMMARY_UNITS, RunInfo
from .schema import SCHEMA_VERSION, NewerSchemaError
from .store import Archive, create_archive, open_archive

__all__ = ["SCHEMA_VERSION", "SUMMARY_UNITS", "TREND_VALUES", "Archive", "CatalogueRow",
           "ImportResult", "MachineInfo", "NewerSchemaError", "PointInfo", "Problem",
           "RebuildResult", "RunInfo", "SiteInfo", "create_archive", "open_archive"]
