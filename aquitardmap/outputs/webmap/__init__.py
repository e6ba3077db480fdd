"""The interactive map planners open: ``map.html`` built from the files of one run folder.

The map is a folium (Leaflet) page. It reads only what the run folder holds, by the names in
:mod:`aquitardmap.outputs.names`, and shows what is there:

* a title bar (project, run date, package version, CRS; under "About this run" the input
  files with their SHA-256 hashes, how the zones were drawn with the probability method the
  run used, and how well the probabilities held up at the holes) and a caution bar that the
  map never covers;
* every grid as a shaded layer, one at a time, chosen in a panel grouped by meaning, with
  an opacity slider and a legend in physical units (:mod:`aquitardmap.outputs.presentation`);
* the flagged zones (window / thin / fast / pierced; window and thin in a likely and a
  possible tier, the possible one lighter with a dash-dot outline) with a tooltip saying
  kind, tier, area, probability, thickness, the holes proving a window or thin clay near
  it and the reason;
* the boreholes, coloured by what they prove, grouped by zoom (holes proving a window or
  thin clay never grouped), with a popup giving the log as a strip diagram and its values,
  built in the browser from compact per-hole data when it opens;
* a background: web map tiles, none, or a shaded relief of the project's DEM
  (``[map] background``);
* the study-area outline, a scale bar, and a click read-out of coordinates (WGS 84 and the
  project CRS) and of the main grids' values at that cell.

Everything a user typed (borehole ids, unit names, logs, reasons, the project name) is
HTML-escaped before it reaches the page (:mod:`aquitardmap.outputs.webmap.markup`).

Modules: ``build`` (:func:`~aquitardmap.outputs.webmap.build.write_map`, the page put
together), ``overlays`` (grid images sized to the screen, and legends), ``relief`` (the
DEM's shaded relief), ``features`` (zones, the boreholes' page data and popups, outline),
``striplog`` (the SVG log), ``page`` (title, caution, panel, script), ``assets`` (the
Leaflet and marker-cluster files shipped in ``vendor/``), ``markup`` (escaping). Scripts:
``holes.js`` (boreholes, clusters, popups), ``page.js`` (panel, read-out, opening view).
"""
