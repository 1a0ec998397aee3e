"""Pairline engine: the bus plan, its rule checks and the reflection simulation. Pure; no web, no I/O."""

ENGINE_VERSION = "0.1.0"
