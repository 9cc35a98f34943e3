"""Alerts: a job rings when its next-period forecast turns to event (raised) or back (cleared), DESIGN.md §13.

* :mod:`watcher.alert.state`   the alert record of a job and the decision (pure)
* :mod:`watcher.alert.message` the alert as JSON and as a plain-text mail, with the caution
* :mod:`watcher.alert.deliver` the channels: the ``--notify`` command and SMTP mail
* :mod:`watcher.alert.options` the command-line options and the dispatcher built from them
* :mod:`watcher.alert.ring`    one job in one refresh: decide, deliver, the new record

Only the light modules are re-exported here: the command builds its parser from ``options``, and
importing this package comes first. ``deliver`` (smtplib, ssl, subprocess: 60 ms) and ``message`` and
``ring`` (the sheet layout for the caution text, with numpy and the scorecard: 0.4 s; both measured
in a process that has built the command's parser) are imported from their own modules by the refresh.
"""
from watcher.alert.errors import AlertError, AlertOptionError, AlertSettingError
from watcher.alert.options import add_alert_arguments, dispatcher_from_args
from watcher.alert.state import (
    BEST,
    CHANNELS,
    CLEARED,
    EVENT,
    NO_EVENT,
    OFF,
    RAISED,
    Decision,
    Reading,
    alert_method,
    alert_setting,
    decide,
    next_reading,
    settle,
)

__all__ = ["BEST", "CHANNELS", "CLEARED", "EVENT", "NO_EVENT", "OFF", "RAISED", "AlertError",
           "AlertOptionError", "AlertSettingError", "Decision", "Reading", "add_alert_arguments",
           "alert_method", "alert_setting", "decide", "dispatcher_from_args", "next_reading", "settle"]
