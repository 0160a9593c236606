"""Widgets and modal screens of the terminal browser."""
