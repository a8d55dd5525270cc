"""Project files (`.lagwise`): one versioned JSON document holding a whole analysis.

A project holds the diary's raw table (embedded, the default, or linked by a relative path
with the file's SHA-256), how the table becomes a diary (item columns, time settings,
missing-value codes, preparation steps), the model specification, the estimator settings,
every estimate as a named run (models.runs) and free-text notes. The layout is documented in
resources/project-format.md.

Safety rules:
- saving is atomic: a temporary file is written beside the target, flushed, synced to disk
  and then moved over the target with `os.replace`; a failed save leaves the previous file
  byte-identical and raises ProjectError saying why; nothing is written that `open_project`
  would refuse;
- opening reads JSON only (nothing in a file is executed) and checks every field's type and
  size; a damaged, truncated, wrong-type or newer-version file raises ProjectError;
- older format versions are upgraded by the explicit functions in `UPGRADES`.

The package, by concern:
    document  Project, ProjectData, data sources (embed, link, relink), the project's diary
    table     the raw table <-> JSON
    estimates the data fingerprint; a new estimate kept as a run (models.runs)
    reader    open_project: bounded bytes, strict JSON, every field checked
    upgrade   older format versions -> the current one
    store     save_project: document -> JSON -> check -> models.atomic.write_atomic
    recovery  autosave files
The strict readers of single values (models.jsonread) and the values' own from_json/to_json
(ModelSpec, FitOptions, FitResult, TimeSettings) are outside the package: the project only
says where in its document each value sits.
"""

from lagwise.models.diary import TIME_MODES
from lagwise.models.errors import ProjectError
from lagwise.models.jsonread import (
    MAX_DEPTH, MAX_INTEGER, MAX_ITEMS, MAX_LIST, MAX_NAME, MAX_STATES, MAX_TEXT,
)
from lagwise.models.project.document import (
    FORMAT, FORMAT_VERSION, SUFFIX, LinkedDataChanged, LinkedDataMissing, Project, ProjectData,
    ProjectVersionTooNew, embed_file, embed_table, file_sha256, is_project_file,
    lagwise_version, link_file, project_diary, project_table, relink_data, utc_now,
)
from lagwise.models.project.estimates import (
    data_fingerprint, project_fingerprint, table_digest, with_estimate,
)
from lagwise.models.project.reader import MAX_FILE_BYTES, load_project_diary, open_project
from lagwise.models.project.recovery import (
    Recovery, discard_recovery, find_recoveries, find_recovery, recovery_dir, recovery_path,
    write_recovery,
)
from lagwise.models.project.store import save_project
from lagwise.models.project.table import (
    MAX_COLUMNS, MAX_ROWS, TABLE_KINDS, table_from_json, table_to_json,
)
from lagwise.models.project.upgrade import UPGRADES, upgrade, upgrade_0_to_1, upgrade_1_to_2

__all__ = [
    "FORMAT", "FORMAT_VERSION", "SUFFIX", "MAX_FILE_BYTES", "MAX_DEPTH", "MAX_TEXT", "MAX_NAME",
    "MAX_ROWS", "MAX_COLUMNS", "MAX_STATES", "MAX_ITEMS", "MAX_LIST", "MAX_INTEGER",
    "TABLE_KINDS", "TIME_MODES", "ProjectError", "ProjectVersionTooNew", "LinkedDataMissing",
    "LinkedDataChanged", "ProjectData", "Project", "embed_file", "embed_table", "link_file",
    "file_sha256", "project_table", "relink_data", "project_diary", "load_project_diary",
    "is_project_file", "save_project", "open_project", "table_to_json", "table_from_json",
    "upgrade_0_to_1", "upgrade_1_to_2", "UPGRADES", "data_fingerprint", "project_fingerprint",
    "table_digest", "with_estimate", "upgrade", "Recovery", "recovery_dir", "recovery_path",
    "write_recovery", "find_recovery", "find_recoveries", "discard_recovery", "utc_now",
    "lagwise_version",
]
