"""matdb.design: see DEVELOPERS.md for the package map."""
