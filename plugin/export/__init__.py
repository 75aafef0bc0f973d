"""Exporting: the case file, result files, probe CSV, pictures and animations."""
