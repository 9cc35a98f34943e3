"""One refresh of one workbook: the job table, the column reader, the computation, the sheet layout and
the report. Knows nothing of watching folders or of the command line."""
