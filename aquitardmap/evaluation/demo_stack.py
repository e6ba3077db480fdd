"""The demo stack of units, shared by both region generators, and its ``project.toml`` text.

Every generated region (:mod:`aquitardmap.evaluation.synthetic`,
:mod:`aquitardmap.evaluation.independent`) has the demo's stack: ``SAND`` cover; ``UMC``,
``LMC``, ``LAM`` aquitards; ``GRAV`` aquifer, with the settings of the demo project.
"""

from __future__ import annotations

__all__ = [
    "AQUIFER_UNIT",
    "CLAY_UNITS",
    "COVER_UNIT",
    "DEMO_STACK_TOML",
    "K_TRUE_M_S",
    "SETTINGS_TOML",
    "STACK",
    "project_toml_text",
]

#: The stack of every synthetic region, top to bottom.
STACK = ("SAND", "UMC", "LMC", "LAM", "GRAV")
COVER_UNIT = "SAND"
CLAY_UNITS = ("UMC", "LMC", "LAM")
AQUIFER_UNIT = "GRAV"

#: True hydraulic conductivity of each unit (m/s). Lab values of clay samples scatter
#: log-normally around these. Intact marine clay 1e-11 to 1e-9 m/s (Freeze & Cherry 1979,
#: Table 2.2, from memory); clean sand and gravel values are common practice.
K_TRUE_M_S = {"SAND": 1e-4, "UMC": 5e-10, "LMC": 2e-10, "LAM": 1e-9, "GRAV": 1e-3}

#: The demo's stack of units as ``project.toml`` text (also used by the tests).
DEMO_STACK_TOML = """\
[[units]]
code = "SAND"
name = "Surficial sand"
role = "cover"
effective_porosity = 0.30
k_default_m_s = 1e-4
k_method = "hazen"

[[units]]
code = "UMC"
name = "Upper marine clay"
role = "aquitard"
effective_porosity = 0.40
k_default_m_s = 5e-10
k_method = "kozeny_carman"

[[units]]
code = "LMC"
name = "Lower marine clay"
role = "aquitard"
effective_porosity = 0.40
k_default_m_s = 2e-10
k_method = "kozeny_carman"

[[units]]
code = "LAM"
name = "Laminated lake clay"
role = "aquitard"
effective_porosity = 0.35
k_default_m_s = 1e-9
k_method = "kozeny_carman"
anisotropy_kh_kv = 4.0

[[units]]
code = "GRAV"
name = "Buried sand and gravel aquifer"
role = "aquifer"
effective_porosity = 0.25
k_default_m_s = 1e-3
k_method = "hazen"
"""

#: The settings sections of a generated region's ``project.toml`` (after the stack).
SETTINGS_TOML = """
[kriging]
variogram_model = "spherical"
n_lags = 12
max_neighbours = 64

[hydraulics]
groundwater_temp_c = 8.0
vertical_gradient = 1.0

[screening]
window_thickness_m = 1.0
thin_thickness_m = 5.0
fast_travel_time_yr = 50.0

[qa]
dem_misfit_m = 3.0
exclude_boreholes = []
"""

_PROJECT_TABLES = """\
[project]
name = "{name}"
crs = "{crs}"

[grid]
cell_size_m = {cell_size_m:g}
buffer_m = 250

"""


def project_toml_text(name: str, *, comment: str, crs: str, cell_size_m: float) -> str:
    """Text of a generated region's ``project.toml``.

    ``comment`` (``#`` lines, each ending in a newline) heads it; then a blank line, the
    ``[project]`` table (``name``, ``crs``), the ``[grid]`` table (``cell_size_m`` in metres,
    a 250 m buffer), :data:`DEMO_STACK_TOML` and :data:`SETTINGS_TOML`.
    """
    return (comment + "\n"
            + _PROJECT_TABLES.format(name=name, crs=crs, cell_size_m=cell_size_m)
            + DEMO_STACK_TOML + SETTINGS_TOML)
