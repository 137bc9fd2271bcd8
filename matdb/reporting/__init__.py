"""matdb.reporting: see DEVELOPERS.md for the package map."""
