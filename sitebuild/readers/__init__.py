"""Readers for the files people actually get: spreadsheets, compressed and legacy-encoded
text, folders of exports, SQLite, plus the tidying every format shares (decimal commas,
dates, messy labels, row filters). :mod:`sitebuild.ingest` calls in through small hooks.
"""
