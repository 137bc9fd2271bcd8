"""One file per schema revision; ``python -m matdb.migrate revision -m "..."`` adds one."""
