"""Pairline web planner: FastAPI app, SQLite store, form handling and SVG drawings. Thin over the engine."""
