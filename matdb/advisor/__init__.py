"""matdb.advisor: see DEVELOPERS.md for the package map."""
