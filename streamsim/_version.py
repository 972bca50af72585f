"""The package version: a leaf module that imports nothing, so any room may read it."""
__version__ = "0.1.0"
#: the version of summary.json's key names (README "Renamed keys"): 2 = one name per quantity,
#: units last; a folder of version 1 gets the new names when `streamsim analyze` rewrites it
SUMMARY_SCHEMA_VERSION = 2
#: summary.json keys written by the run itself (not by an analysis block) of version 1 -> 2
RENAMED_RUN_SUMMARY_KEYS = {
    ("momentum", "drift_max"): ("momentum", "error_max"),
    ("momentum", "drift_max_relative"): ("momentum", "error_max_relative"),
}
