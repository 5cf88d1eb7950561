/* geosample map.html: draws the design block with Leaflet (no network, no other library).
   Every text from the design is put into the page with textContent, never as HTML. */
(function () {
  "use strict";

  function block(id) { return JSON.parse(document.getElementById(id).textContent); }
  var D = block("geosample-design");
  var G = block("geosample-layers");
  var O = block("geosample-options");

  // ------------------------------------------------------------------ helpers
  function el(tag, cls, text) {
    var e = document.createElement(tag);
    if (cls) { e.className = cls; }
    if (text !== undefined && text !== null) { e.textContent = String(text); }
    return e;
  }
  function table(title, rows) {
    var box = el("div", "gs-popup");
    box.appendChild(el("b", null, title));
    var t = el("table");
    rows.forEach(function (r) {
      if (r[1] === null || r[1] === undefined || r[1] === "") { return; }
      var tr = el("tr");
      tr.appendChild(el("th", null, r[0]));
      tr.appendChild(el("td", null, r[1]));
      t.appendChild(tr);
    });
    box.appendChild(t);
    return box;
  }
  function clock(iso) {  // "2027-06-14T09:05:00-05:00" -> "09:05 (UTC-05:00)"
    if (!iso) { return ""; }
    var off = iso.slice(19);
    return iso.slice(11, 16) + (off ? " (UTC" + (off === "Z" ? "+00:00" : off) + ")" : "");
  }
  function hhmm(iso) { return iso ? iso.slice(11, 16) : ""; }
  function decodeRing(a) {
    var out = [], la = 0, lo = 0, s = G.scale;
    for (var i = 0; i < a.length; i += 2) { la += a[i]; lo += a[i + 1]; out.push([la / s, lo / s]); }
    return out;
  }
  function decode(polys) { return polys.map(function (p) { return p.map(decodeRing); }); }

  // ------------------------------------------------------------------ map
  var map = L.map("gs-map", {zoomControl: false, maxZoom: 20, zoomSnap: 0.25, zoomDelta: 1,
                             attributionControl: true});
  L.control.zoom({position: "topleft"}).addTo(map);
  L.control.scale({position: "bottomleft"}).addTo(map);
  map.createPane("gs-routes").style.zIndex = 410;
  map.createPane("gs-reserves").style.zIndex = 415;
  map.createPane("gs-marks").style.zIndex = 420;
  var routeCanvas = L.canvas({pane: "gs-routes", tolerance: 6});
  var reserveCanvas = L.canvas({pane: "gs-reserves", tolerance: 2});  // below the sites: never hides one
  var markCanvas = L.canvas({pane: "gs-marks", tolerance: 4});

  // One popup for the whole map, kept clear of the controls (see openAt).
  var popup = L.popup({maxWidth: 320, autoPan: true, className: "gs-popup-box"});
  var corners = map._controlCorners;
  function controlPadding() {
    var size = map.getSize(), mb = map.getContainer().getBoundingClientRect();
    var top = 0, bottom = 0;
    ["topleft", "topright"].forEach(function (c) {
      var r = corners[c].getBoundingClientRect();
      if (r.height > 0) { top = Math.max(top, r.bottom - mb.top); }
    });
    ["bottomleft", "bottomright"].forEach(function (c) {
      var r = corners[c].getBoundingClientRect();
      if (r.height > 0) { bottom = Math.max(bottom, mb.bottom - r.top); }
    });
    return {top: top + 6, bottom: bottom + 6, height: size.y};
  }
  function openAt(latlng, content) {
    legendDetails.open = false;
    if (layerControl) { layerControl.collapse(); }
    var p = controlPadding();
    popup.options.autoPanPaddingTopLeft = L.point(8, p.top);
    popup.options.autoPanPaddingBottomRight = L.point(8, p.bottom);
    popup.options.maxHeight = Math.max(120, p.height - p.top - p.bottom - 40);
    popup.setLatLng(latlng).setContent(content).openOn(map);
  }

  // ------------------------------------------------------------------ outlines
  var base = L.featureGroup().addTo(map);
  var waterLayer = null;
  if (G.water.length) {
    waterLayer = L.polygon(decode(G.water), {color: O.water_edge, weight: 1.5, fillColor: "#FFFFFF",
                                             fillOpacity: 1, smoothFactor: 0.5, interactive: false}).addTo(base);
  }
  var strataLayers = [];
  D.strata.forEach(function (s, i) {
    if (!G.strata[i] || !G.strata[i].length) { return; }
    var edge = O.has_water ? "#333333" : O.water_edge;
    var lyr = L.polygon(decode(G.strata[i]), {color: edge, weight: O.has_water ? 0.8 : 1.2, fillColor: s.colour,
                                              fillOpacity: 0.75, smoothFactor: 0.5});
    lyr.on("click", function (e) {
      openAt(e.latlng, table(s.name, [["Stratum code", s.code], ["Area", s.area_km2.toFixed(3) + " km\u00b2"],
                                      ["Weight", s.weight.toFixed(3)], ["Primary sites", s.n]]));
    });
    lyr.addTo(base);
    strataLayers.push(lyr);
  });
  var closedGroup = null;
  if (G.closed.length) {
    closedGroup = L.featureGroup().addTo(map);
    L.polygon(decode(G.closed), {color: "#222222", weight: 1.2, dashArray: "4 3", fillColor: O.closed_colour,
                                 fillOpacity: 0.9, className: "gs-closed", smoothFactor: 0.5})
      .on("click", function (e) {
        openAt(e.latlng, table("Closed", [["", "Excluded from the frame: no site is drawn here."]]));
      }).addTo(closedGroup);
  }
  var waterBounds = base.getBounds();
  if (!waterBounds.isValid()) {
    var pts = D.sites.map(function (s) { return [s.lat, s.lon]; });
    waterBounds = pts.length ? L.latLngBounds(pts) : L.latLngBounds([[0, 0], [0, 0]]);
  }

  // ------------------------------------------------------------------ marks (canvas)
  // A canvas circle marker that can also be a box or a diamond and carries a short label.
  var Mark = L.CircleMarker.extend({
    _updatePath: function () {
      var r = this._renderer, ctx = r._ctx, o = this.options, p = this._point;
      if (!r._drawing || this._empty()) { return; }
      if (o.shape === "box") {
        var w = this._radius, h = o.boxHeight / 2;
        ctx.beginPath();
        ctx.rect(Math.round(p.x - w), Math.round(p.y - h), 2 * w, 2 * h);
        r._fillStroke(ctx, this);
      } else if (o.shape === "diamond") {
        var d = this._radius;
        ctx.beginPath();
        ctx.moveTo(p.x, p.y - d); ctx.lineTo(p.x + d, p.y); ctx.lineTo(p.x, p.y + d); ctx.lineTo(p.x - d, p.y);
        ctx.closePath();
        r._fillStroke(ctx, this);
      } else {
        r._updateCircle(this);
      }
      if (o.label) {
        ctx.save();
        ctx.setLineDash([]);
        ctx.fillStyle = o.labelColour || "#111111";
        ctx.font = "bold " + (o.fontSize || 12) + "px system-ui, -apple-system, 'Segoe UI', Roboto, Arial, sans-serif";
        ctx.textAlign = "center";
        ctx.textBaseline = "middle";
        ctx.fillText(o.label, p.x, p.y + 1);
        ctx.restore();
      }
    }
  });
  var measure = document.createElement("canvas").getContext("2d");
  measure.font = "bold 10px system-ui, -apple-system, 'Segoe UI', Roboto, Arial, sans-serif";

  var dayInfo = {};
  // Dashed lines are slow to draw on canvas (a 5,000-site design: most of the first paint), and with
  // many days together the dashes tell nothing apart: with more than MANY_DAYS days, "all days" draws
  // the routes solid; one day alone keeps its dash pattern.
  var MANY_DAYS = 20, plain = D.days.length > MANY_DAYS;
  D.days.forEach(function (d) { dayInfo[d.day] = d; });
  var routeGroup = L.featureGroup().addTo(map);
  var siteGroup = L.featureGroup().addTo(map);
  var reserveGroup = L.featureGroup();
  var accessGroup = L.featureGroup();
  var routesByDay = {}, sitesByDay = {}, reservesByStratum = {}, allRoutes = [], allSites = [], allReserves = [];

  D.routes.forEach(function (r) {
    var st = dayInfo[r.day] || {colour: "#000000", dash: null};
    var line = L.polyline(r.coords, {renderer: routeCanvas, color: st.colour, weight: 3.5, opacity: 0.9,
                                     dashArray: plain ? null : st.dash, smoothFactor: 0.5});
    line.gsRoute = r;
    (routesByDay[r.day] = routesByDay[r.day] || []).push(line);
    allRoutes.push(line);
  });
  D.sites.forEach(function (s) {
    var m;
    if (s.role === "primary") {
      var st = dayInfo[s.day] || {colour: "#333333"};
      m = new Mark([s.lat, s.lon], {renderer: markCanvas, radius: 11, weight: 3, color: st.colour, opacity: 1,
                                    fill: true, fillColor: "#FFFFFF", fillOpacity: 1, label: s.label});
      if (s.day !== null) { (sitesByDay[s.day] = sitesByDay[s.day] || []).push(m); }
      allSites.push(m);
    } else {
      var half = Math.ceil(measure.measureText(s.label).width / 2) + 3;
      m = new Mark([s.lat, s.lon], {renderer: reserveCanvas, radius: half, shape: "box", boxHeight: 14,
                                    weight: 1.5, dashArray: "2 2", color: "#444444", opacity: 1, fill: true,
                                    fillColor: "#FFFFFF", fillOpacity: 0.9, label: s.label, fontSize: 10,
                                    labelColour: "#333333"});
      m.gsHalf = half;
      m.options.gsLabelled = true;
      (reservesByStratum[s.stratum] = reservesByStratum[s.stratum] || []).push(m);
      allReserves.push(m);
    }
    m.gsSite = s;
  });
  D.access.forEach(function (a) {
    var m = new Mark([a.lat, a.lon], {renderer: markCanvas, radius: 8, shape: "diamond", weight: 2,
                                      color: "#FFFFFF", opacity: 1, fill: true, fillColor: "#111111",
                                      fillOpacity: 1});
    m.gsAccess = a;
    m.addTo(accessGroup);
  });
  if (D.access.length) { accessGroup.addTo(map); }

  function sitePopup(s) {
    var rows = [["Stratum", s.stratum]];
    if (s.role === "primary") {
      rows.push(["Role", "primary"], ["Date", s.date], ["Planned time", clock(s.planned_time)],
                ["Day, stop", s.day ? "day " + s.day + ", stop " + s.order : ""]);
    } else {
      rows.push(["Role", "reserve " + s.label + " (rank " + s.rank + ")"],
                ["Use", "only to replace a primary of this stratum, in rank order"]);
    }
    rows.push(["Lat, lon (WGS 84)", s.lat.toFixed(6) + ", " + s.lon.toFixed(6)],
              ["x, y (m)", s.x.toFixed(1) + ", " + s.y.toFixed(1)]);
    return table(s.id, rows);
  }
  function routePopup(r) {
    var rows = [["Access point", r.access || "(none)"], ["Sites", r.sites.length],
                ["Length over water", (r.length_m / 1000).toFixed(1) + " km"]];
    if (r.start && r.end) {
      rows.push(["Leave, back", hhmm(r.start) + ", " + hhmm(r.end)]);
      if (r.first_to_lab_h !== null) {
        rows.push(["First sample to lab", r.first_to_lab_h.toFixed(1) + " h" +
                   (r.holding_h ? " (limit " + r.holding_h + " h)" : "")]);
      }
    }
    rows.push(["Holding time", r.holding_ok ? "met" : "NOT met"]);
    r.notes.forEach(function (n) { rows.push(["Note", n]); });
    return table(r.name, rows);
  }
  function accessPopup(a) {
    return table(a.name, [["Lat, lon (WGS 84)", a.lat.toFixed(6) + ", " + a.lon.toFixed(6)],
                          ["x, y (m)", a.x.toFixed(1) + ", " + a.y.toFixed(1)],
                          ["Moved to the water", a.snapped_m ? a.snapped_m.toFixed(0) + " m" : ""]]);
  }
  // Popups are built when a mark is tapped, from the design data.
  function onMark(e) {
    var m = e.layer;
    if (m.gsSite) { openAt(m.getLatLng(), sitePopup(m.gsSite)); }
    else if (m.gsAccess) { openAt(m.getLatLng(), accessPopup(m.gsAccess)); }
    else if (m.gsRoute) { openAt(e.latlng, routePopup(m.gsRoute)); }
  }
  [routeGroup, siteGroup, reserveGroup, accessGroup].forEach(function (g) { g.on("click", onMark); });
  var tip = L.tooltip({direction: "top", offset: [0, -12]});
  function onOver(e) {
    var m = e.layer, text = m.gsSite ? m.gsSite.id + " \u00b7 " + (m.gsSite.role === "primary"
      ? "day " + m.gsSite.day + ", stop " + m.gsSite.label : "reserve " + m.gsSite.label)
      : m.gsAccess ? m.gsAccess.name : m.gsRoute ? m.gsRoute.name : "";
    tip.setLatLng(m.getLatLng ? m.getLatLng() : e.latlng).setContent(el("span", null, text));
    map.openTooltip(tip);
  }
  [routeGroup, siteGroup, reserveGroup, accessGroup].forEach(function (g) {
    g.on("mouseover", onOver);
    g.on("mouseout", function () { map.closeTooltip(tip); });
  });

  // ------------------------------------------------------------------ day picker
  var current = null;  // null: all days
  function fill(group, layers) {
    group.clearLayers();
    layers.forEach(function (l) { group.addLayer(l); });
  }
  var reservesWanted = false;  // the user's choice in the layer list (all days)
  var switching = false;
  function routeStyle(line, alone) {
    var st = dayInfo[line.gsRoute.day] || {dash: null};
    var dash = (plain && !alone) ? null : st.dash;
    if (line.options.dashArray !== dash) { line.setStyle({dashArray: dash}); }
  }
  function showDay(day, fit) {
    current = (day !== null && dayInfo[day]) ? day : null;
    switching = true;
    map.closePopup();
    if (current === null) {
      allRoutes.forEach(function (l) { routeStyle(l, false); });
      fill(routeGroup, allRoutes);
      fill(siteGroup, allSites);
      fill(reserveGroup, allReserves);
      if (reservesWanted) { reserveGroup.addTo(map); } else { map.removeLayer(reserveGroup); }
      if (fit) { fitWater(); }
    } else {
      var sites = sitesByDay[current] || [], strata = {}, res = [];
      sites.forEach(function (m) { strata[m.gsSite.stratum] = true; });
      D.strata.forEach(function (s) { if (strata[s.name]) { res = res.concat(reservesByStratum[s.name] || []); } });
      (routesByDay[current] || []).forEach(function (l) { routeStyle(l, true); });
      fill(routeGroup, routesByDay[current] || []);
      fill(siteGroup, sites);
      fill(reserveGroup, res);
      reserveGroup.addTo(map);
      if (fit) {
        var b = L.latLngBounds([]);
        (routesByDay[current] || []).forEach(function (l) { b.extend(l.getBounds()); });
        sites.forEach(function (m) { b.extend(m.getLatLng()); });
        // A day is fitted clear of the controls (its stops must not hide under them).
        var pad = controlPadding();
        if (b.isValid()) {
          map.fitBounds(b, {paddingTopLeft: [24, pad.top + 14], paddingBottomRight: [24, pad.bottom + 14],
                            maxZoom: 17, animate: false});
        }
      }
    }
    switching = false;
    updateReserveLabels();
    select.value = current === null ? "all" : String(current);
    prevBtn.disabled = !D.days.length || (current !== null && current === D.days[0].day);
    nextBtn.disabled = !D.days.length || (current !== null && current === D.days[D.days.length - 1].day);
  }
  // Reserve labels only when few enough are in view to be read (else small squares: zoom in to read them).
  var LABEL_LIMIT = 150;
  function reserveShape(m, labelled) {
    if (m.options.gsLabelled === labelled) { return; }
    m.options.gsLabelled = labelled;
    m.options.label = labelled ? m.gsSite.label : "";
    m.options.boxHeight = labelled ? 14 : 8;
    m.setRadius(labelled ? m.gsHalf : 4);
  }
  function updateReserveLabels() {
    if (!map.hasLayer(reserveGroup)) { return; }
    var b = map.getBounds(), n = 0, list = reserveGroup.getLayers();
    list.forEach(function (m) { if (b.contains(m.getLatLng())) { n += 1; } });
    list.forEach(function (m) { reserveShape(m, n <= LABEL_LIMIT); });
  }
  map.on("moveend", updateReserveLabels);
  reserveGroup.on("add", function (e) { if (e.target === reserveGroup) { updateReserveLabels(); } });
  reserveGroup.on("add", function () { if (!switching && current === null) { reservesWanted = true; } });
  reserveGroup.on("remove", function () { if (!switching && current === null) { reservesWanted = false; } });

  function dayFromHash() {
    var m = /(?:^#|&)day=(\d+)/.exec(window.location.hash);
    return m && dayInfo[+m[1]] ? +m[1] : null;
  }
  function setHash(day) {
    var h = day === null ? "" : "#day=" + day;
    if (window.location.hash === h) { return; }
    try { history.replaceState(null, "", h || window.location.pathname + window.location.search); }
    catch (err) { window.location.hash = h; }
  }
  var picker = L.control({position: "topright"});
  var select, prevBtn, nextBtn;
  picker.onAdd = function () {
    var box = el("div", "leaflet-bar gs-days");
    prevBtn = el("button", "gs-step", "\u2039");
    prevBtn.type = "button"; prevBtn.title = "Previous day"; prevBtn.setAttribute("aria-label", "Previous day");
    nextBtn = el("button", "gs-step", "\u203a");
    nextBtn.type = "button"; nextBtn.title = "Next day"; nextBtn.setAttribute("aria-label", "Next day");
    select = el("select", "gs-day-select");
    select.setAttribute("aria-label", "Field day");
    var all = el("option", null, "All days (" + D.days.length + ")");
    all.value = "all";
    select.appendChild(all);
    D.days.forEach(function (d) {
      var o = el("option", null, "Day " + d.day + " \u00b7 " + d.date + " \u00b7 " + d.sites + " site" +
                 (d.sites === 1 ? "" : "s"));
      o.value = String(d.day);
      select.appendChild(o);
    });
    box.appendChild(prevBtn); box.appendChild(select); box.appendChild(nextBtn);
    L.DomEvent.disableClickPropagation(box);
    L.DomEvent.on(select, "change", function () {
      var day = select.value === "all" ? null : +select.value;
      setHash(day);
      showDay(day, true);
    });
    function step(k) {
      var i = -1;
      D.days.forEach(function (d, j) { if (d.day === current) { i = j; } });
      var j = current === null ? (k > 0 ? 0 : D.days.length - 1) : i + k;
      if (j < 0 || j >= D.days.length) { return; }
      setHash(D.days[j].day);
      showDay(D.days[j].day, true);
    }
    L.DomEvent.on(prevBtn, "click", function () { step(-1); });
    L.DomEvent.on(nextBtn, "click", function () { step(1); });
    return box;
  };
  if (D.days.length) { picker.addTo(map); } else { select = el("select"); prevBtn = el("button"); nextBtn = el("button"); }
  window.addEventListener("hashchange", function () { showDay(dayFromHash(), true); });

  // ------------------------------------------------------------------ layer list (folded)
  var overlays = {"Water and strata": base};
  if (closedGroup) { overlays["Closed areas"] = closedGroup; }
  if (allReserves.length) { overlays["Reserves (" + allReserves.length + "; use in rank order)"] = reserveGroup; }
  if (D.access.length) { overlays["Access points"] = accessGroup; }
  if (O.tiles) {
    overlays["Basemap (needs a network)"] = L.tileLayer(O.tiles, {attribution: O.attribution, maxZoom: 20});
  }
  var layerControl = L.control.layers(null, overlays, {collapsed: true, position: "topright"}).addTo(map);

  // ------------------------------------------------------------------ location
  var you = L.featureGroup();
  var locate = L.control({position: "topleft"});
  var locBtn, locMsg, watching = false, firstFix = true;
  locate.onAdd = function () {
    var box = el("div", "leaflet-bar gs-locate");
    locBtn = el("a", "gs-locate-btn", "\u25ce");
    locBtn.href = "#";
    locBtn.title = "Show my location";
    locBtn.setAttribute("role", "button");
    locBtn.setAttribute("aria-label", "Show my location");
    locMsg = el("div", "gs-locate-msg");
    box.appendChild(locBtn);
    box.appendChild(locMsg);
    L.DomEvent.disableClickPropagation(box);
    L.DomEvent.on(locBtn, "click", function (e) {
      L.DomEvent.preventDefault(e);
      if (watching) {
        map.stopLocate();
        watching = false;
        map.removeLayer(you);
        locBtn.classList.remove("gs-on");
        locMsg.textContent = "";
        return;
      }
      watching = true;
      firstFix = true;
      locBtn.classList.add("gs-on");
      locMsg.textContent = "Finding your location\u2026";
      map.locate({watch: true, setView: false, enableHighAccuracy: true, maximumAge: 10000, timeout: 30000});
    });
    return box;
  };
  locate.addTo(map);
  map.on("locationfound", function (e) {
    you.clearLayers();
    L.circle(e.latlng, {radius: e.accuracy, color: "#1F6FD0", weight: 1, fillOpacity: 0.12,
                        interactive: false}).addTo(you);
    // Below the sites (their numbers stay readable), above the routes; the accuracy circle shows around.
    L.circleMarker(e.latlng, {renderer: routeCanvas, radius: 7, color: "#FFFFFF", weight: 2, fillColor: "#1F6FD0",
                              fillOpacity: 1, interactive: false, className: "gs-you-mark"}).addTo(you);
    you.addTo(map);
    locMsg.textContent = "\u00b1" + Math.round(e.accuracy) + " m";
    if (firstFix && !map.getBounds().contains(e.latlng)) {
      map.fitBounds(map.getBounds().extend(e.latlng), {animate: false});
    }
    firstFix = false;
    window.gsLocation = {lat: e.latlng.lat, lon: e.latlng.lng, accuracy: e.accuracy};
  });
  map.on("locationerror", function (e) {
    watching = false;
    locBtn.classList.remove("gs-on");
    locMsg.textContent = "Location not available: " + e.message;
  });

  // ------------------------------------------------------------------ legend (folded)
  var legendBox = document.getElementById("gs-legend");
  var legendDetails = legendBox.querySelector("details");
  var legend = L.control({position: "bottomright"});
  legend.onAdd = function () {
    L.DomEvent.disableClickPropagation(legendBox);
    L.DomEvent.disableScrollPropagation(legendBox);
    legendBox.style.display = "block";
    return legendBox;
  };
  legend.addTo(map);
  legendDetails.addEventListener("toggle", function () {
    if (legendDetails.open) { map.closePopup(); if (layerControl) { layerControl.collapse(); } }
  });
  map.attributionControl.setPosition("bottomleft");

  // ------------------------------------------------------------------ open
  function fitWater() { map.fitBounds(waterBounds, {padding: [6, 6], animate: false}); }
  showDay(dayFromHash(), true);

  // For the browser tests and for anyone scripting the page.
  window.geosampleMap = {
    map: map, design: D, waterBounds: waterBounds,
    day: function () { return current; },
    shown: function () {
      var out = {sites: [], reserves: [], routes: [], labelled: 0};
      if (map.hasLayer(siteGroup)) { siteGroup.eachLayer(function (m) { out.sites.push(m.gsSite.id); }); }
      if (map.hasLayer(reserveGroup)) {
        reserveGroup.eachLayer(function (m) {
          out.reserves.push(m.gsSite.id);
          if (m.options.label) { out.labelled += 1; }
        });
      }
      if (map.hasLayer(routeGroup)) { routeGroup.eachLayer(function (l) { out.routes.push(l.gsRoute.name); }); }
      return out;
    },
    point: function (lat, lon) { var p = map.latLngToContainerPoint([lat, lon]); return [p.x, p.y]; }
  };
})();
