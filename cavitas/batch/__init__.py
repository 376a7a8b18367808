"""Batch processing: many inputs, one output folder each, resumable, local or on Dask.

For research use only; not for diagnosis.
"""

from ._inputs import BatchInput, expand_inputs, output_name
from ._run import BatchResult, run_batch

__all__ = ["BatchInput", "BatchResult", "expand_inputs", "output_name", "run_batch"]
