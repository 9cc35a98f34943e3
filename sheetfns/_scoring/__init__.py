"""Internals of the scores: shared validation, the definition of each categorical score, categorical
and probability scores, significance tests and the score registry (``sheetfns.scores`` is the public
face)."""
