"""The long-running watcher: event intake, the debouncer, the refresh worker and the log."""
