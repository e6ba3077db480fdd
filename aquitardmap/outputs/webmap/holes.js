/* aquitardmap planners' map: the boreholes, drawn from compact per-hole data.
   Each popup (strip log, values, interval table) is built when it opens; the text equals
   what aquitardmap.outputs.webmap.features.hole_popup_html writes in Python. Ordinary holes
   are clustered by zoom (leaflet.markercluster); holes that prove a window or thin clay
   are their own layer, drawn on top, never inside a cluster. */
var aqmHoles = (function () {
  "use strict";
  // Field positions of one record (features.HOLE_FIELDS).
  var LAT = 0, LON = 1, CAT = 2, ID = 3, STATUS = 4, THICK = 5, REACHED = 6, DEPTH_AQ = 7,
    GROUND = 8, TOTAL = 9, MISFIT = 10, PIERCES = 11, QA = 12, EXCLUDED = 13, LOG = 14;

  // Numbers as the Python side writes them (striplog.f1, striplog.g6, "%.1f", "%+.1f").
  function f1(v) { return (Math.floor(v * 10 + 0.5) / 10).toFixed(1); }
  function strip(m) { return m.indexOf(".") < 0 ? m : m.replace(/0+$/, "").replace(/\.$/, ""); }
  function g6(v) {
    if (v === 0) { return (1 / v < 0) ? "-0" : "0"; }
    if (!isFinite(v)) { return isNaN(v) ? "nan" : (v > 0 ? "inf" : "-inf"); }
    var e = v.toExponential(5), k = e.indexOf("e"), x = parseInt(e.slice(k + 1), 10);
    if (x >= -4 && x < 6) { return strip(v.toFixed(5 - x)); }
    return strip(e.slice(0, k)) + "e" + (x < 0 ? "-" : "+") + (Math.abs(x) < 10 ? "0" : "")
      + Math.abs(x);
  }
  function fixed1(v) { return v.toFixed(1); }  // v is already rounded to 0.1
  function signed1(v) { return ((v < 0 || (v === 0 && 1 / v < 0)) ? "-" : "+") + Math.abs(v).toFixed(1); }
  function fmtM(v) { return v === null ? "n/a" : fixed1(v) + " m"; }

  function tickStep(depth) {
    var steps = [1, 2, 5, 10, 20, 25, 50, 100, 200, 500, 1000];
    for (var i = 0; i < steps.length; i++) { if (depth / steps[i] <= 5) { return steps[i]; } }
    return Math.pow(10, Math.ceil(Math.log10(depth / 5)));
  }

  // striplog.strip_log_svg, the same drawing.
  function stripSvg(log, units, totalDepth, reached, title) {
    var heightPx = 160, topPx = 8.0, bottomPad = 18.0, colH = heightPx - topPx - bottomPad;
    var x0 = 34.0, w = 26.0, deepest = 0, i;
    for (i = 0; i < log.length; i += 3) { deepest = Math.max(deepest, log[i + 1]); }
    var depth = Math.max(deepest, totalDepth || 0.0), scale = colH / depth;
    function y(d) { return topPx + d * scale; }
    var parts = ['<svg xmlns="http://www.w3.org/2000/svg" class="aqm-strip" width="120" '
      + 'height="' + heightPx + '" viewBox="0 0 120 ' + heightPx + '" role="img">',
      "<title>" + title + "</title>",
      '<rect x="' + f1(x0) + '" y="' + f1(topPx) + '" width="' + f1(w) + '" height="'
      + f1(colH) + '" fill="#ffffff" stroke="#999" stroke-dasharray="2 2"/>'];
    var lastLabelY = -100.0;
    for (i = 0; i < log.length; i += 3) {
      var y0 = y(log[i]), y1 = y(log[i + 1]), unit = units[log[i + 2]];
      parts.push('<rect x="' + f1(x0) + '" y="' + f1(y0) + '" width="' + f1(w) + '" height="'
        + f1(Math.max(y1 - y0, 0.5)) + '" fill="' + unit[2] + '" stroke="#333" '
        + 'stroke-width="0.5"/>');
      var mid = (y0 + y1) / 2 + 3;
      if (y1 - y0 >= 8 && mid - lastLabelY >= 9) {
        parts.push('<text x="' + f1(x0 + w + 4) + '" y="' + f1(mid) + '" font-size="9">'
          + unit[0] + "</text>");
        lastLabelY = mid;
      }
    }
    var step = tickStep(depth), d = 0.0;
    while (d <= depth + 1e-9) {
      var yy = y(d);
      parts.push('<line x1="' + f1(x0 - 3) + '" y1="' + f1(yy) + '" x2="' + f1(x0) + '" y2="'
        + f1(yy) + '" stroke="#333" stroke-width="0.7"/>');
      parts.push('<text x="' + f1(x0 - 5) + '" y="' + f1(yy + 3) + '" font-size="8" '
        + 'text-anchor="end">' + g6(d) + " m</text>");
      d += step;
    }
    var base = y(depth);
    if (reached) {
      parts.push('<line x1="' + f1(x0) + '" y1="' + f1(base) + '" x2="' + f1(x0 + w) + '" y2="'
        + f1(base) + '" stroke="#333" stroke-width="1.2"/>');
    } else {
      var zig = [];
      for (i = 0; i < 7; i++) { zig.push(f1(x0 + i * w / 6) + "," + f1(base + (i % 2 ? 2.5 : -2.5))); }
      parts.push('<polyline points="' + zig.join(" ") + '" fill="none" stroke="#c0392b" '
        + 'stroke-width="1.2"/>');
      parts.push('<text x="' + f1(x0 + w / 2) + '" y="' + f1(base + 13) + '" font-size="8.5" '
        + 'fill="#c0392b" text-anchor="middle">hole ends</text>');
    }
    parts.push("</svg>");
    return parts.join("");
  }

  function thicknessText(status, t, category) {
    if (category === "window" && (t === null || t === 0)) {
      return "none (the hole reached the aquifer without passing through clay)";
    }
    if (t === null) { return "not known"; }
    if (status === 1) { return "≥ " + fixed1(t) + " m (hole stopped in clay)"; }
    if (status === 2) { return fixed1(t) + " m (not confirmed: the hole stopped above the clay)"; }
    return fixed1(t) + " m";
  }

  // features.hole_popup_html, the same text.
  function popupHtml(r, data) {
    var cat = data.cats[r[CAT]], category = cat[0], what = cat[3];
    if (category === "suspicious") {
      what = r[EXCLUDED] ? "Excluded from the estimates" : "Suspicious: QA-flagged";
    }
    var facts = ["Clay (aquitard) thickness: <b>" + thicknessText(r[STATUS], r[THICK], category)
      + "</b>"];
    facts.push("Reached the aquifer: " + (r[REACHED] && r[DEPTH_AQ] !== null
      ? "yes, at " + fixed1(r[DEPTH_AQ]) + " m" : r[REACHED] ? "yes" : "no"));
    facts.push("Ground elevation: " + fmtM(r[GROUND]));
    facts.push("Drilled depth: " + fmtM(r[TOTAL]));
    if (r[MISFIT] !== null) { facts.push("Collar minus DEM: " + signed1(r[MISFIT]) + " m"); }
    if (r[PIERCES]) {
      facts.push('<span class="aqm-flag">Pierces the clay into the aquifer: a possible '
        + "vertical conduit unless sealed.</span>");
    }
    if (r[QA]) { facts.push('<span class="aqm-flag">QA: ' + r[QA] + "</span>"); }
    if (r[EXCLUDED]) { facts.push('<span class="aqm-flag">Not used in the estimates.</span>'); }
    var log = r[LOG], svg = "", table = "";
    if (typeof log === "string") {
      table = log ? '<div class="aqm-log">' + log + "</div>" : "";
    } else if (log.length) {
      svg = stripSvg(log, data.units, r[TOTAL], r[REACHED], "Log of borehole " + r[ID]);
      var rows = "";
      for (var i = 0; i < log.length; i += 3) {
        var u = data.units[log[i + 2]];
        rows += "<tr><td>" + g6(log[i]) + "–" + g6(log[i + 1]) + " m</td><td>" + u[1] + " ["
          + u[0] + "]</td><td>" + f1(log[i + 1] - log[i]) + " m</td></tr>";
      }
      table = '<table class="aqm-ivs"><tr><th>Depth</th><th>Unit</th><th>Thickness</th></tr>'
        + rows + "</table>";
    }
    return '<div class="aqm-popup"><div class="aqm-popup-title">' + r[ID] + "</div>"
      + '<div class="aqm-popup-what">' + what + "</div>"
      + '<div class="aqm-popup-body">' + svg + '<div class="aqm-facts">' + facts.join("<br>")
      + "</div></div>" + table + "</div>";
  }

  function tooltipHtml(r, data) { return "<b>" + r[ID] + "</b>: " + data.cats[r[CAT]][3]; }

  function clusterIcon(cluster) {
    var n = cluster.getChildCount(), size = n < 10 ? 22 : n < 100 ? 26 : n < 1000 ? 30 : 34;
    return L.divIcon({ html: "<span>" + n + "</span>", className: "aqm-cluster",
                       iconSize: L.point(size, size) });
  }

  // The layer of the boreholes: clustered ordinary holes and, on top, the proving ones.
  function layer(map, data) {
    var proving = data.cats.map(function (c) { return c[0] === "window" || c[0] === "thin"; });
    var pane = map.getPane("aqmProving") || map.createPane("aqmProving");
    pane.style.zIndex = 640;
    // Clustering needs a highest zoom; a map without tiles has none of its own.
    if (map.options.maxZoom === undefined) { map.setMaxZoom(19); }
    var onTop = L.featureGroup(), clustered = null;
    if (typeof L.markerClusterGroup === "function") {
      clustered = L.markerClusterGroup({ iconCreateFunction: clusterIcon, chunkedLoading: true,
                                         showCoverageOnHover: false, maxClusterRadius: 50,
                                         disableClusteringAtZoom: 17 });
    }
    var renderer = L.canvas({ pane: "aqmProving" }), plain = [];
    data.rows.forEach(function (r) {
      var cat = data.cats[r[CAT]], top = proving[r[CAT]];
      var opts = { radius: 5.5, weight: 1.5, fill: true, fillOpacity: 0.95, fillColor: cat[1],
                   color: cat[2], bubblingMouseEvents: false };
      if (top) { opts.renderer = renderer; opts.pane = "aqmProving"; }
      var m = L.circleMarker([r[LAT], r[LON]], opts);
      m.bindPopup(function () { return popupHtml(r, data); },
                  { maxWidth: 380, className: "aqm-pop" });
      m.bindTooltip(function () { return tooltipHtml(r, data); }, { className: "aqm-tip" });
      if (top || !clustered) { onTop.addLayer(m); } else { plain.push(m); }
    });
    var group = L.featureGroup();
    if (clustered) { clustered.addLayers(plain); group.addLayer(clustered); }
    group.addLayer(onTop);
    group.proving = onTop;
    group.clustered = clustered;
    return group;
  }

  return { layer: layer, popupHtml: popupHtml, tooltipHtml: tooltipHtml, stripSvg: stripSvg,
           g6: g6, f1: f1 };
}());
