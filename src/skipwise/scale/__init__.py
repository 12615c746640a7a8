"""Files larger than memory and clusters: the dask engine (dask.dataframe + dask.distributed).

Only counts and small tables come back to the client; a worker holds one
partition.  See docs/scale.md.
"""

from skipwise.scale.cluster import SCHEDULER_ENV, dask_client, require_dask
from skipwise.scale.sources import DEFAULT_PARTITION_ROWS, Part, parquet_parts, read_part

__all__ = ["SCHEDULER_ENV", "dask_client", "require_dask", "DEFAULT_PARTITION_ROWS", "Part", "parquet_parts",
           "read_part"]
