"""Renderers: turn results into Rich tables for the terminal (no logic, no I/O beyond printing)."""
