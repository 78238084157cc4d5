"""Case files -> validated :class:`Case` objects, suites and scans."""

from benchsuite.registry.case import ActiveSpace, Basis, Case, PublishedValue, Scan
from benchsuite.registry.registry import Registry, Suite, SuiteEntry, builtin_data_dir

__all__ = ["ActiveSpace", "Basis", "Case", "PublishedValue", "Registry", "Scan", "Suite",
           "SuiteEntry", "builtin_data_dir"]
