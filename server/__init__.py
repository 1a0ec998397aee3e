"""Pairline server side: the command line and the web planner (FastAPI app, SQLite store, forms, SVG drawings)."""
