"""Local copies of Leaflet and its marker-cluster plugin for the map (nothing is downloaded).

The package ships Leaflet 1.9.3 (the version folium loads) and leaflet.markercluster 1.5.3
with their licence files in ``vendor/`` (see ``vendor/README.md``). A self-contained map
inlines Leaflet's script and style (with its images as data URLs) from the folder named by
``AQUITARDMAP_WEB_ASSETS`` when set, else from the package's copy, else from a copy
installed on the machine (Debian's ``libjs-leaflet``, a global npm ``leaflet``). The
marker-cluster plugin is always inlined from the package (every map clusters its holes).
"""

from __future__ import annotations

import base64
import os
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

#: Environment variable naming a folder that holds ``leaflet.js`` (or ``leaflet.min.js``),
#: ``leaflet.css`` and Leaflet's ``images/`` for self-contained maps.
ASSETS_ENV = "AQUITARDMAP_WEB_ASSETS"

VENDOR_DIR = Path(__file__).with_name("vendor")
#: The package's own copy of Leaflet (``vendor/leaflet``): looked in before the system.
PACKAGE_ASSET_DIRS: tuple[Path, ...] = (VENDOR_DIR / "leaflet",)
#: The package's copy of leaflet.markercluster (script and its base style).
MARKERCLUSTER_DIR = VENDOR_DIR / "markercluster"

#: Where a system-wide copy of Leaflet is looked for when no folder is given:
#: Debian's ``libjs-leaflet`` package, then a global npm install of ``leaflet``.
SYSTEM_ASSET_DIRS: tuple[Path, ...] = (
    Path("/usr/share/javascript/leaflet"),
    Path("/usr/lib/node_modules/leaflet/dist"),
    Path("/usr/local/lib/node_modules/leaflet/dist"),
)


class WebAssetsNotFound(FileNotFoundError):
    """No local copy of Leaflet was found, so a self-contained map cannot be written."""


@dataclass(frozen=True)
class WebAssets:
    """Local Leaflet files to inline into a self-contained map."""

    leaflet_js: Path
    leaflet_css: Path


def find_web_assets(search_dirs: Sequence[str | Path] | None = None) -> WebAssets:
    """Find a local Leaflet (JavaScript + CSS); nothing is downloaded.

    Looks in ``search_dirs`` when given, otherwise in the folder named by the environment
    variable ``AQUITARDMAP_WEB_ASSETS`` (and its ``leaflet/`` and ``dist/`` subfolders),
    then in the package's own copy (:data:`PACKAGE_ASSET_DIRS`), then in
    :data:`SYSTEM_ASSET_DIRS` (Debian's ``libjs-leaflet``, a global npm ``leaflet``).
    Raises :class:`WebAssetsNotFound` listing where it looked.
    """
    if search_dirs is None:
        dirs: list[Path] = []
        env = os.environ.get(ASSETS_ENV)
        if env:
            dirs += [Path(env), Path(env) / "leaflet", Path(env) / "dist"]
        dirs += [*PACKAGE_ASSET_DIRS, *SYSTEM_ASSET_DIRS]
    else:
        dirs = [Path(d) for d in search_dirs]
    for d in dirs:
        css = d / "leaflet.css"
        for js_name in ("leaflet.min.js", "leaflet.js"):
            if (d / js_name).is_file() and css.is_file():
                return WebAssets(d / js_name, css)
    looked = ", ".join(str(d) for d in dirs) or "(nowhere)"
    raise WebAssetsNotFound(
        "A self-contained map needs a local copy of Leaflet 1.x (leaflet.js or leaflet.min.js "
        f"plus leaflet.css); none was found. Looked in: {looked}. Reinstall aquitardmap (its "
        "package ships Leaflet), install Debian's libjs-leaflet package, or set "
        f"{ASSETS_ENV} to a folder that holds the files."
    )


_SOURCE_MAP = re.compile(r"/[*/]#\s*sourceMappingURL=[^\n]*")
_CSS_URL = re.compile(r"url\(\s*['\"]?([^'\")]+)['\"]?\s*\)")
_MIME = {".png": "image/png", ".svg": "image/svg+xml", ".gif": "image/gif"}


def inline_css(assets: WebAssets) -> str:
    """Leaflet's CSS with its images turned into data URLs (and no source-map comment)."""
    css = _SOURCE_MAP.sub("", assets.leaflet_css.read_text(encoding="utf-8"))

    def to_data_url(match: re.Match[str]) -> str:
        ref = match.group(1)
        if ref.startswith(("data:", "#")):
            return match.group(0)
        image = assets.leaflet_css.parent / ref
        if not image.is_file() or image.suffix.lower() not in _MIME:
            return "none"
        payload = base64.b64encode(image.read_bytes()).decode("ascii")
        return f'url("data:{_MIME[image.suffix.lower()]};base64,{payload}")'

    return _CSS_URL.sub(to_data_url, css).replace("</style", "<\\/style")


def _script_text(path: Path) -> str:
    """A script file, safe to put inside a ``<script>`` element (no source-map comment)."""
    js = _SOURCE_MAP.sub("", path.read_text(encoding="utf-8"))
    return js.replace("</script", "<\\/script")


def inline_js(assets: WebAssets) -> str:
    """Leaflet's script, safe to put inside a ``<script>`` element."""
    return _script_text(assets.leaflet_js)


def markercluster_js() -> str:
    """The package's leaflet.markercluster script, safe inside a ``<script>`` element."""
    return _script_text(MARKERCLUSTER_DIR / "leaflet.markercluster.js")


def markercluster_css() -> str:
    """The plugin's base style (cluster animation); the symbols are styled in page.css."""
    css = _SOURCE_MAP.sub("", (MARKERCLUSTER_DIR / "MarkerCluster.css").read_text("utf-8"))
    return css.replace("</style", "<\\/style")


#: A ``<script src=...>`` or ``<link href=...>``: what a self-contained page must not have.
EXTERNAL_REF = re.compile(r"<(?:script|link)\b[^>]*\b(?:src|href)\s*=", re.IGNORECASE)
