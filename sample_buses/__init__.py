"""Invented example buses and their expected verdicts, shipped as package data."""
