"""One file per schema revision; ``python -m matdb.data.migrate revision -m "..."`` adds one."""
