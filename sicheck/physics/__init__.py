"""Functional core: pure, vectorised physics. Nothing here reads files or prints."""
