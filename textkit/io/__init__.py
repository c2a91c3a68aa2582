"""Files in and out: survey readers, the survey config, atomic output writers.

Takes paths; gives a :class:`SurveyConfig`, a :class:`SurveyData` (the survey
frame with its roles checked) and writers that put a whole output folder in
place at once. The only stage that touches the file system; it imports only
:mod:`textkit.errors`.
"""

from .._lazy import lazy_exports

__getattr__, __dir__ = lazy_exports(__name__, {
    "SurveyConfig": "config", "load_config": "config", "config_from_mapping": "config",
    "read_table": "readers", "read_survey": "readers", "SurveyData": "readers", "answered_mask": "readers",
    "write_outputs": "output", "csv_writer": "output", "parquet_writer": "output", "text_writer": "output",
    "json_writer": "output", "file_sha256": "output",
    "Sheet": "workbook", "workbook_writer": "workbook", "workbook_bytes": "workbook", "write_file": "workbook",
    "read_coding_file": "workbook", "safe_cell": "output", "safe_frame": "output", "check_hand_code_ids": "readers",
})
