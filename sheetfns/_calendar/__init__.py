"""Private internals of :mod:`sheetfns.partition`: the calendar of a date column (its frequency, the
steps between dates in periods, the periods that follow the last date, the business days missing)."""
from sheetfns._calendar.frequency import (
    FREQUENCIES,
    UNITS,
    detect,
    following,
    missing_business_days,
    steps,
)

__all__ = ["FREQUENCIES", "UNITS", "detect", "following", "missing_business_days", "steps"]
