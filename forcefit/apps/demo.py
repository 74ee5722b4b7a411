"""The bundled demo data: where it lives and how each dataset is loaded."""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..errors import InputError
from ..reading.coordinates import Calibration
from ..reading.loaders import load_tracks
from ..reading.perspective import PlaneMapping
from ..track import Track

TEXT_SUFFIXES = (".csv", ".tsv", ".txt", ".dat", ".json", ".xlsx", ".parquet")


def demo_folder(folder: str | Path | None = None) -> Path:
    """The ``datasets_demo`` folder: ``folder`` if given, else beside the package or here."""
    candidates = (
        [Path(folder)] if folder is not None
        else [Path(__file__).resolve().parents[1] / "datasets_demo", Path.cwd() / "datasets_demo"]
    )
    for candidate in candidates:
        if (candidate / "manifest.json").is_file():
            try:
                return candidate.resolve().relative_to(Path.cwd())
            except ValueError:
                return candidate
    raise InputError(
        f"no demo data found (looked for manifest.json in {', '.join(map(str, candidates))}). "
        "Run forcefit demo from the project folder, or pass --data DIR."
    )


@dataclass(frozen=True)
class DemoDataset:
    """One entry of the demo manifest: a file (or a folder of runs) and how to load it."""

    title: str
    paths: tuple[Path, ...]
    load_options: dict[str, Any]
    expected: dict[str, Any]
    runs: tuple[dict[str, Any], ...] = field(default_factory=tuple)
    fit_options: dict[str, Any] = field(default_factory=dict)

    @property
    def is_class_set(self) -> bool:
        """True for a folder of runs meant to be graded together."""
        return bool(self.runs)

    def load(self, path: Path) -> list[Track]:
        """Load one of this dataset's files with its recorded options."""
        options = dict(self.load_options)
        if "calibration" in options:
            calibration = dict(options["calibration"])
            calibration["origin"] = tuple(calibration.get("origin", (0.0, 0.0)))
            options["calibration"] = Calibration(**calibration)
        if "plane_mapping" in options:       # {"marks": [[x, y], ...], "rectangle": [w, h], "unit": ...}
            plane = options["plane_mapping"]
            width, height = plane["rectangle"]
            options["plane_mapping"] = PlaneMapping.from_rectangle(plane["marks"], width=width, height=height,
                                                                   unit=plane["unit"])
        return load_tracks(path, **options)


def demo_datasets(folder: str | Path | None = None) -> list[DemoDataset]:
    """The datasets listed in the demo manifest, in its order."""
    root = demo_folder(folder)
    manifest = json.loads((root / "manifest.json").read_text(encoding="utf-8"))
    datasets = []
    for entry in manifest["datasets"]:
        if "folder" in entry:
            paths = tuple(sorted(p for p in (root / entry["folder"]).iterdir()
                                 if p.suffix.lower() in TEXT_SUFFIXES))
        else:
            paths = (root / entry["file"],)
        datasets.append(DemoDataset(
            title=entry["title"], paths=paths, load_options=entry.get("load", {}),
            expected=entry.get("expected", {}), runs=tuple(entry.get("runs", ())),
            fit_options=entry.get("fit", {}),
        ))
    return datasets
