/* aquitardmap planners' map: layer panel, legends, opacity, click read-out.
   aqmStart(map, cfg) is called once the map and its layers exist. */
function aqmStart(map, cfg) {
  "use strict";
  var panel = document.getElementById("aqm-panel");

  function asControl(el, position) {
    var Box = L.Control.extend({
      onAdd: function () {
        L.DomEvent.disableClickPropagation(el);
        L.DomEvent.disableScrollPropagation(el);
        el.hidden = false;
        return el;
      }
    });
    new Box({ position: position }).addTo(map);
  }
  L.control.scale({ imperial: false, maxWidth: 160 }).addTo(map);  // metric only
  if (panel) {
    asControl(panel, "topright");
    var fitPanel = function () { panel.style.maxHeight = (map.getSize().y - 24) + "px"; };
    map.on("resize", fitPanel);
    fitPanel();
  }
  // The boreholes: drawn here from their compact data (holes.js).
  if (cfg.holes && cfg.layers.holes) { cfg.layers.holes.layer = aqmHoles.layer(map, cfg.holes); }

  function setVisible(id, on) {
    var el = id ? document.getElementById(id) : null;
    if (el) { el.hidden = !on; }
  }

  // One shaded grid at a time.
  var current = -1;
  function showGrid(i) {
    cfg.grids.forEach(function (g, j) {
      if (j === i) {
        if (!map.hasLayer(g.layer)) { map.addLayer(g.layer); }
      } else if (map.hasLayer(g.layer)) {
        map.removeLayer(g.layer);
      }
      setVisible(g.legend, j === i);
    });
    current = i;
  }

  // Zones, boreholes, outline, background: on/off; boreholes stay on top of zones.
  function setLayer(key, on) {
    var item = cfg.layers[key];
    if (!item) { return; }
    if (on && !map.hasLayer(item.layer)) { map.addLayer(item.layer); }
    if (!on && map.hasLayer(item.layer)) { map.removeLayer(item.layer); }
    setVisible(item.legend, on);
    var holes = cfg.layers.holes;
    if (on && key !== "holes" && holes && map.hasLayer(holes.layer) && holes.layer.bringToFront) {
      holes.layer.bringToFront();
    }
    if (key === "basemap" && on && item.layer.bringToBack) { item.layer.bringToBack(); }
  }

  function opacity(value) {
    cfg.grids.forEach(function (g) { g.layer.setOpacity(value / 100); });
    var out = document.getElementById("aqm-opacity-value");
    if (out) { out.textContent = value + " %"; }
  }

  if (panel) {
    panel.querySelectorAll('input[name="aqm-grid"]').forEach(function (r) {
      r.addEventListener("change", function () {
        if (r.checked) { showGrid(parseInt(r.value, 10)); }
      });
    });
    panel.querySelectorAll("input[data-aqm-layer]").forEach(function (box) {
      box.addEventListener("change", function () {
        setLayer(box.getAttribute("data-aqm-layer"), box.checked);
      });
    });
    var slider = document.getElementById("aqm-opacity");
    if (slider) {
      slider.addEventListener("input", function () { opacity(parseInt(slider.value, 10)); });
    }
    var fold = document.getElementById("aqm-fold");
    if (fold) {
      fold.addEventListener("click", function () {
        var collapsed = panel.classList.toggle("aqm-collapsed");
        fold.textContent = collapsed ? "show" : "hide";
        fold.setAttribute("aria-expanded", collapsed ? "false" : "true");
      });
      if (window.innerWidth < 700) { fold.click(); }
    }
  }

  // The opening view: the whole study area, beside the layer panel (on the right).
  function fitExtent() {
    if (!cfg.extent) { return; }
    map.invalidateSize({ animate: false });
    var right = 20;
    if (panel && !panel.classList.contains("aqm-collapsed")) {
      right += Math.min(panel.offsetWidth, map.getSize().x / 2);
    }
    map.fitBounds(cfg.extent, { paddingTopLeft: [20, 20], paddingBottomRight: [right, 40],
                                animate: false });
  }
  fitExtent();

  var checked = panel ? panel.querySelector('input[name="aqm-grid"]:checked') : null;
  showGrid(checked ? parseInt(checked.value, 10) : -1);
  Object.keys(cfg.layers).forEach(function (key) {
    var box = panel ? panel.querySelector('input[data-aqm-layer="' + key + '"]') : null;
    setLayer(key, box ? box.checked : true);
  });
  opacity(cfg.opacity);

  // Click anywhere: where it is, and what the main grids say there.
  function poly(c, u, v) {
    return c[0] + c[1] * u + c[2] * v + c[3] * u * u + c[4] * u * v + c[5] * v * v
      + c[6] * u * u * u + c[7] * u * u * v + c[8] * u * v * v + c[9] * v * v * v;
  }
  function hemi(v, pos, neg) { return Math.abs(v).toFixed(5) + "° " + (v < 0 ? neg : pos); }
  function decode(b64) {
    var bin = atob(b64), bytes = new Uint8Array(bin.length);
    for (var k = 0; k < bin.length; k++) { bytes[k] = bin.charCodeAt(k); }
    return new Float32Array(bytes.buffer);
  }
  var readout = cfg.readout;
  if (readout) {
    readout.items.forEach(function (it) {
      it.data = decode(it.b64);
      if (it.sd_b64) { it.sd = decode(it.sd_b64); }
    });
  }
  function fmt(v, digits) {
    if (v === 0) { return "0"; }
    var a = Math.abs(v);
    if (a >= 1e-3 && a < 1e6) {
      var d = Math.max(0, digits - 1 - Math.floor(Math.log10(a)));
      return v.toFixed(d);
    }
    return v.toExponential(digits - 1);
  }
  function valueText(it, v, sd) {
    if (!isFinite(v)) { return "no data"; }
    if (it.classes) { return it.classes[String(Math.round(v))] || "no data"; }
    if (it.years) {
      var days = v * 365.25;
      if (days < 1) { return "under 1 day"; }
      if (v < 1) { return Math.round(days) + " days"; }
      return fmt(v, 2) + " years";
    }
    var text = it.percent ? Math.round(v * 100) + " %" : fmt(v, 3) + " " + it.units;
    if (sd !== undefined && isFinite(sd)) { text += " ± " + fmt(sd, 2) + " " + it.units; }
    return text;
  }
  map.on("click", function (e) {
    var lat = e.latlng.lat, lon = e.latlng.lng;
    var html = "<div class='aqm-here'><b>Here</b><br>" + hemi(lat, "N", "S") + ", "
      + hemi(lon, "E", "W") + " (WGS 84)";
    var x = lon, y = lat;
    if (cfg.fit) {
      var u = (lon - cfg.fit.lon0) / cfg.fit.su, v = (lat - cfg.fit.lat0) / cfg.fit.sv;
      x = poly(cfg.fit.cx, u, v);
      y = poly(cfg.fit.cy, u, v);
      html += "<br>x " + x.toFixed(1) + " m, y " + y.toFixed(1) + " m (" + cfg.fit.crs + ")";
    }
    if (readout && (cfg.fit || readout.geographic)) {
      var col = Math.floor((x - readout.x0) / readout.dx);
      var row = Math.floor((readout.y0 - y) / readout.dy);
      if (col >= 0 && row >= 0 && col < readout.nx && row < readout.ny) {
        var k = row * readout.nx + col, rows = "";
        readout.items.forEach(function (it) {
          rows += "<tr><td>" + it.label + "</td><td><b>"
            + valueText(it, it.data[k], it.sd ? it.sd[k] : undefined) + "</b></td></tr>";
        });
        html += "<table>" + rows + "</table><span class='aqm-note'>Values of the "
          + readout.cell + " grid cell; estimates, not measurements.</span>";
      } else {
        html += "<br><span class='aqm-note'>Outside the mapped grid.</span>";
      }
    }
    L.popup({ maxWidth: 360 }).setLatLng(e.latlng).setContent(html + "</div>").openOn(map);
  });

  window.aqm = { map: map, cfg: cfg, showGrid: showGrid, setLayer: setLayer, fit: fitExtent,
                 current: function () { return current; },
                 readyMs: (window.performance && performance.now) ? performance.now() : null };
}
