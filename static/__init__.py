"""Stylesheet and scripts served under /static, shipped as package data."""
