"""The back end: schedule the IR into scans, shift records, TAP cycles and output files."""
