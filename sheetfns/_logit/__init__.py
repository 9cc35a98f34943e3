"""Internals of the logistic model: the design matrix, the Newton solver and the refit schemes."""
