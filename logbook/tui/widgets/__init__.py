"""Reusable widgets of the interface (chart, form field)."""
