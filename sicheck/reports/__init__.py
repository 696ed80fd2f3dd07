"""Imperative shell: writing the review out (JSON, workbook, terminal)."""
