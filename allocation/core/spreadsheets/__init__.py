"""Spreadsheets in the layout Baton's exports write: the layout (one module for both
sides) and the reader that turns a CSV or XLSX into a proposed study document."""
