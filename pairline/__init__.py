"""Pairline: plan and check RS-485 / RS-422 multidrop buses.

The installed package maps the repository's top-level folders under this one import name:
`pairline.engine` (engine/), `pairline.server` (server/), and the data packages `pairline.templates`,
`pairline.static` and `pairline.sample_buses`, which ship inside the wheel and are read with importlib.resources.
"""

from importlib import resources
from pathlib import Path


def data_dir(package: str) -> Path:
    """The folder of one of Pairline's data packages ("templates", "static", "sample_buses") on disk."""
    return Path(str(resources.files(f"pairline.{package}")))
