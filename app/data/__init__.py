"""Reading replication files, profiling them, and building design matrices (pure: no web or storage)."""
