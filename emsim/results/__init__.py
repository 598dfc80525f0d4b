"""Results: stream a run to HDF5 while it goes, and read it back (live or finished)."""
from __future__ import annotations

from .reader import Results, open_results
from .writer import ResultWriter, check_writable

__all__ = ["ResultWriter", "Results", "check_writable", "open_results"]
