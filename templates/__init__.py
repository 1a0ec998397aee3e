"""Jinja2 page templates, shipped as package data."""
