"""Internals of the logistic model: the result types, one estimation with its checks, the Newton
solver, the design matrix and the refit schemes (``sheetfns.logistic`` is the public face)."""
