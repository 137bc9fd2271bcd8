"""matdb.data: see DEVELOPERS.md for the package map."""
