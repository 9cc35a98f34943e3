"""Internals of the scores: shared validation, categorical and probability scores, significance tests
and the score registry (``sheetfns.scores`` is the public face)."""
