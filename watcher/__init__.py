"""tocsin's file side: reading job tables and data columns, lossless writing of tocsin's sheets into
workbook packages, one refresh, the long-running watcher and the ``tocsin`` command."""
