"""Measured shots: read them, decode them, and see where the device departs from its model.

``shots.py`` reads records (01, b8, r8, npy); ``experiment.py`` ties them to a point and its
description file and turns them into detection events; ``decoding.py`` decodes with model or data
weights; ``correlations.py`` (fractions, two-point estimates), ``graph.py`` (the model's graph, re-weighted),
``attribution.py`` (fault sources) and ``departures.py`` (everything for one data set) compare the data
with the model; ``tables.py`` writes the results; ``record.py`` stores measured points beside simulated
ones; ``synthetic.py`` makes records from a circuit whose noise departs from the model.
"""
