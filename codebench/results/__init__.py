"""Results data: the SQLite store, its run lock, counting stored batches, the CSV table.

Only the coordinator writes the store (one transaction per batch); every
count is recomputed from the stored batches in batch order
(:mod:`codebench.results.tally`), so a table never depends on how a run was
scheduled or interrupted.
"""
