"""Private internals of the value model: the Student t distribution function and least squares on
accumulated normal equations (see :mod:`sheetfns.valuemodel`)."""
