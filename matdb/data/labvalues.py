"""Lab-measured values live in three modules, each with one job (import those, not this one):

* :mod:`matdb.data.lab_input` -- what people type, parsed and checked (plausibility limits
  shared with the seed loader);
* :mod:`matdb.data.lab_store` -- appending, preferring, retracting and the history of
  values, each write one transaction;
* :mod:`matdb.data.exchange` -- CSV/JSON export and the import that reads it back.

Values derived through the physics (Br from a surface field, chi from a float gap) are in
:mod:`matdb.analysis.inversions`.
"""
