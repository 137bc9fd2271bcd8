"""matdb.analysis: see DEVELOPERS.md for the package map."""
