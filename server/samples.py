"""The sample buses shipped inside the package: listing them, finding one by name, seeding a store with them.

Seeding is a one-off step (`pairline seed`, or `pairline serve` for its single process): several workers that
share one database start without it.
"""

import json
import logging
from pathlib import Path

from pairline.engine import ENGINE_VERSION
from pairline.engine.plan import load_plan, plan_to_dict
from pairline.server.store import PlanStore

from pairline import data_dir

SAMPLES_DIR = data_dir("sample_buses")

log = logging.getLogger("pairline.server")


class UnknownSampleError(ValueError):
    def __init__(self, name: str, allowed: list[str]):
        self.name = name
        self.allowed = allowed
        super().__init__(f"There is no sample bus '{name}'; allowed: {', '.join(allowed)}.")


def sample_files(directory: Path = SAMPLES_DIR) -> list[Path]:
    """Every sample bus file, sorted by name (its name without .json is the sample's slug)."""
    return sorted(directory.glob("*.json"))


def sample_file(name: str, directory: Path = SAMPLES_DIR) -> Path:
    """The file of the sample bus `name` (its slug, with or without .json)."""
    files = {path.stem: path for path in sample_files(directory)}
    slug = name.removesuffix(".json")
    if slug not in files:
        raise UnknownSampleError(name, sorted(files))
    return files[slug]


def seed_samples(store: PlanStore, directory: Path = SAMPLES_DIR) -> int:
    """Put every valid sample bus into the store's sample list; an invalid file is logged and skipped."""
    loaded: list[str] = []
    for position, path in enumerate(sample_files(directory)):
        try:
            plan = load_plan(json.loads(path.read_text(encoding="utf-8")))
        except (OSError, ValueError) as exc:  # BusInputError and JSONDecodeError are ValueErrors
            log.warning("sample bus %s skipped: %s", path.name, exc)
            continue
        store.put_sample(path.stem, plan_to_dict(plan), engine_version=ENGINE_VERSION, position=position)
        loaded.append(path.stem)
    store.retain_samples(loaded)
    return len(loaded)
