"""Figure functions. Each takes result objects (plus ``ax=``/``fig=``) and returns a matplotlib Figure.

Plotting never recomputes: every number drawn comes from a core result object.
"""
