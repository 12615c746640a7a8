"""Survey file input/output: SPSS, Stata, CSV, Excel and Parquet, with labels and missing codes."""

from skipwise.io.atomic import atomic_output
from skipwise.io.meta import SurveyMeta, get_meta, set_meta
from skipwise.io.readers import SUPPORTED_EXTENSIONS, read_survey
from skipwise.io.writers import MetadataWarning, write_survey

__all__ = [
    "SurveyMeta", "get_meta", "set_meta", "read_survey", "write_survey", "atomic_output",
    "SUPPORTED_EXTENSIONS", "MetadataWarning",
]
