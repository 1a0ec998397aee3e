"""Rule checks, one module per family; each takes an engine.bus.Bus and returns a list of Finding."""
