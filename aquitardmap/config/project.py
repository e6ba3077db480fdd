"""Read and validate ``project.toml``: the stack of units, the grid and the thresholds.

The configuration is data only: it is parsed with :mod:`tomllib`, never evaluated, and every
path it names is resolved inside the project folder. A path that escapes the folder is
refused. Each table has its reader in :mod:`aquitardmap.config.sections` and its settings
class in :mod:`aquitardmap.config.settings`; :func:`read_project` reads them all and lists
every problem of the file at once.

The smallest ``project.toml`` names the project, its CRS, the cell size and a stack with an
aquitard above an aquifer; every other key has a documented default
(``demo_region/project.toml`` is a full example)::

    [project]
    name = "Ostrel Valley"
    crs = "EPSG:32632"

    [grid]
    cell_size_m = 50

    [[units]]
    code = "CLAY"
    role = "aquitard"

    [[units]]
    code = "GRAVEL"
    role = "aquifer"

Zones come in two tiers (:class:`ScreeningThresholds`): ``p_window_threshold`` and
``p_thin_threshold`` set the *likely* tier, ``p_window_possible_threshold`` and
``p_thin_possible_threshold`` the *possible* tier, the risk tolerance (what the holes cannot
rule out)::

    [screening]
    p_window_possible_threshold = 0.2
    p_thin_possible_threshold = 0.2
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pyproj import CRS

from aquitardmap.config import sections, settings
from aquitardmap.config.document import ConfigDocument, locate_key
from aquitardmap.config.materials import MaterialRule
from aquitardmap.errors import ProblemList

PROJECT_FILE = "project.toml"
#: Inputs a project cannot run without (unless its boreholes live in its store).
REQUIRED_FILES = ("collars", "intervals")
#: The tables (and arrays of tables) ``project.toml`` may hold.
SECTIONS = ("project", "grid", "units", "kriging", "hydraulics", "screening", "qa", "files",
            "materials", "drilling", "compute", "variograms", "map")


@dataclass(frozen=True)
class Project:
    """A validated project: where its files are and every setting of the run."""

    root: Path
    name: str
    crs: CRS
    cell_size_m: float
    buffer_m: float
    units: tuple[settings.Unit, ...]
    kriging: settings.KrigingSettings = field(default_factory=settings.KrigingSettings)
    hydraulics: settings.HydraulicSettings = field(default_factory=settings.HydraulicSettings)
    screening: settings.ScreeningThresholds = field(default_factory=settings.ScreeningThresholds)
    qa: settings.QASettings = field(default_factory=settings.QASettings)
    files: dict[str, Path] = field(default_factory=dict)
    compute: settings.ComputeSettings = field(default_factory=settings.ComputeSettings)
    config_sha256: str = ""
    materials: tuple[MaterialRule, ...] = ()
    drilling: settings.DrillingSettings = field(default_factory=settings.DrillingSettings)
    map: settings.MapSettings = field(default_factory=settings.MapSettings)
    max_grid_cells: int = settings.MAX_GRID_CELLS

    @property
    def unit_codes(self) -> tuple[str, ...]:
        return tuple(u.code for u in self.units)

    def unit(self, code: str) -> settings.Unit:
        for u in self.units:
            if u.code == code:
                return u
        raise KeyError(code)

    @property
    def column_units(self) -> tuple[settings.Unit, ...]:
        """Units above the protected aquifer (the first unit whose role is ``aquifer``)."""
        out = []
        for u in self.units:
            if u.role == "aquifer":
                break
            out.append(u)
        return tuple(out)

    @property
    def aquitard_units(self) -> tuple[settings.Unit, ...]:
        """Aquitard units above the protected aquifer, top to bottom."""
        return tuple(u for u in self.column_units if u.role == "aquitard")

    @property
    def aquifer_unit(self) -> settings.Unit:
        return next(u for u in self.units if u.role == "aquifer")

    def file(self, key: str) -> Path | None:
        """Path of input ``key`` (``collars``, ``dem``, ...) or None if it is absent."""
        p = self.files.get(key)
        return p if p is not None and p.exists() else None



def setting_location(project: Project, table: str, key: str) -> tuple[int, int]:
    """(line, column) of ``key`` in ``[table]`` of the project's ``project.toml`` (the table
    header when the key is absent, (0, 0) when neither is there): for messages about a
    setting that only a later stage can judge."""
    try:
        text = (project.root / PROJECT_FILE).read_text(encoding="utf-8", errors="replace")
    except OSError:
        return (0, 0)
    return locate_key(text, key, table)


def _load(root: Path, path: Path, problems: ProblemList) -> tuple[bytes, str, dict[str, Any]]:
    """The bytes, text and parsed tables of ``project.toml``; a missing folder or file, text
    that is not UTF-8 or not TOML ends the read at once."""
    if not root.is_dir():
        problems.add(str(root), 0, 0, "project folder not found")
        problems.raise_if_any()
    if not path.is_file():
        problems.add(path, 0, 0, "project.toml not found in the project folder")
        problems.raise_if_any()
    raw = path.read_bytes()
    try:
        text = raw.decode("utf-8").removeprefix("\ufeff")  # a byte-order mark is accepted
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        problems.add(path, line, 0, "file is not valid UTF-8 text")
        problems.raise_if_any()
    try:
        cfg = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+), column (\d+)", str(exc))
        line, col = (int(m.group(1)), int(m.group(2))) if m else (0, 0)
        problems.add(path, line, col, f"not valid TOML: {str(exc).split(' (at')[0]}")
        problems.raise_if_any()
    return raw, text, cfg


def _report_unknown_sections(doc: ConfigDocument, cfg: dict[str, Any]) -> None:
    for key in cfg:
        if key not in SECTIONS:
            where = doc.locate("", key)
            if where == (0, 0):
                where = doc.locate(key)
            doc.add(where, f"unknown section or key {key!r}; expected one of "
                    f"{', '.join(sorted(SECTIONS))}")


def _check_required_files(problems: ProblemList, files: dict[str, Path]) -> None:
    store_file = files.get("store")
    if store_file is not None and store_file.is_file():
        return  # the project's boreholes live in its store (aquitardmap.inputs.store)
    for key in REQUIRED_FILES:
        if key in files and not files[key].exists():
            problems.add(files[key], 0, 0, f"required input file {files[key].name} not found "
                         "in the project folder")


def read_project(folder: str | Path) -> Project:
    """Read ``folder/project.toml`` and return a validated :class:`Project`.

    Raises:
        InputError: listing every problem found, each with file, line and column.
    """
    root = Path(folder)
    path = root / PROJECT_FILE
    problems = ProblemList()
    raw, text, cfg = _load(root, path, problems)
    doc = ConfigDocument(path, text, problems)
    _report_unknown_sections(doc, cfg)
    name, crs = sections.read_project_table(doc, cfg)
    cell_size_m, buffer_m, max_cells = sections.read_grid(doc, cfg)
    units = sections.read_units(doc, cfg)
    kriging = sections.read_kriging(doc, cfg, units)
    hydraulics = sections.read_hydraulics(doc, cfg)
    screening = sections.read_screening(doc, cfg)
    qa = sections.read_qa(doc, cfg)
    drilling = sections.read_drilling(doc, cfg, root)
    compute = sections.read_compute(doc, cfg)
    map_settings = sections.read_map(doc, cfg)
    files = sections.read_files(doc, cfg, root)
    doc.report_unknown_keys()
    materials = sections.read_materials(doc, cfg, {u.code for u in units})
    _check_required_files(problems, files)
    problems.raise_if_any()
    return Project(
        root=root.resolve(), name=name, crs=crs, cell_size_m=cell_size_m, buffer_m=buffer_m,
        units=units, kriging=kriging, hydraulics=hydraulics, screening=screening, qa=qa,
        files=files, config_sha256=hashlib.sha256(raw).hexdigest(), materials=materials,
        drilling=drilling, compute=compute, max_grid_cells=max_cells,
        map=map_settings,
    )
