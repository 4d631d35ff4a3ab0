/* harbourwatch shift replay: slider, play/pause, speed, trail length, hindsight/as-seen switch,
   and "only what had happened by then". Data: the JSON block with id "hw-replay-data", see
   report/_data.py. The vessel symbol is our own: a dot for the position and a small "bow"
   dot ahead of it in the direction of travel; a large vessel also gets its estimated hull
   outline, an ellipse to scale along its heading (report/_hull.py says which heading). */
(function () {
  "use strict";
  var el = document.getElementById("hw-replay-data");
  if (!el) { return; }
  var cfg = JSON.parse(el.textContent);
  var map = window[cfg.map];
  var mapEl = map.getContainer();
  var slider = document.getElementById("hw-slider");
  var clock = document.getElementById("hw-clock");
  var playBtn = document.getElementById("hw-play");
  var speedSel = document.getElementById("hw-speed");
  var trailSel = document.getElementById("hw-trail");
  var uptoBox = document.getElementById("hw-upto");
  var span = cfg.t1 - cfg.t0;
  var KNOT = 1852.0 / 3600.0;  // metres per second in one knot
  var BOW_PX = 11;
  var HULL_N = 36;  // vertices of a hull ellipse, as report/_hull.py's HULL_RING_POINTS
  var WGS84_A = 6378137.0, WGS84_E2 = 0.00669437999014;  // WGS84 semi-major axis, e^2

  function decode(tr) {
    var p = tr.p, n = p.length / 3, t = new Float64Array(n), la = new Float64Array(n),
      lo = new Float64Array(n), a = 0, b = 0, c = 0;
    for (var i = 0; i < n; i++) {
      a += p[3 * i]; b += p[3 * i + 1]; c += p[3 * i + 2];
      t[i] = a; la[i] = b / 1e5; lo[i] = c / 1e5;
    }
    var out = { id: tr.id, live: !!tr.live, t: t, la: la, lo: lo, hd: null };
    if (tr.h) {  // a large vessel: outline headings (delta-encoded, modulo 360) and size
      var hd = new Float64Array(n), h = 0;
      for (var j = 0; j < n; j++) { h = (h + tr.h[j] + 360) % 360; hd[j] = h; }
      out.hd = hd;
      out.hull = tr.hull || null;
      if (tr.len) {  // as seen: hull length known then, delta-encoded whole metres
        var len = new Float64Array(n), l = 0;
        for (var q = 0; q < n; q++) { l += tr.len[q]; len[q] = l; }
        out.len = len;
      } else { out.len = null; }
      out.bl = tr.bl || 0;
    }
    return out;
  }
  var sets = { hindsight: cfg.hindsight.map(decode), as_seen: cfg.as_seen.map(decode) };
  var styles = {
    hindsight: { radius: 5, color: "#1b1b1b", weight: 1.5, fillColor: "#0072B2", fillOpacity: 1 },
    as_seen: { radius: 5, color: "#009E73", weight: 2.5, fillColor: "#ffffff", fillOpacity: 1 }
  };
  var bowStyle = {
    hindsight: { radius: 2.5, color: "#1b1b1b", weight: 1, fillColor: "#1b1b1b", fillOpacity: 1 },
    as_seen: { radius: 2.5, color: "#009E73", weight: 1, fillColor: "#009E73", fillOpacity: 1 }
  };
  var trailStyle = {
    hindsight: { color: "#1b1b1b", weight: 2, opacity: 0.8 },
    as_seen: { color: "#009E73", weight: 2, opacity: 0.9, dashArray: "3 4" }
  };
  var hullStyle = {
    hindsight: { color: "#1b1b1b", weight: 1.5, fillColor: "#0072B2", fillOpacity: 0.3 },
    as_seen: { color: "#009E73", weight: 2, dashArray: "4 3", fillColor: "#009E73", fillOpacity: 0.12 }
  };
  var histStyle = {
    hindsight: { color: "#0072B2", weight: 2, opacity: 0.75 },
    as_seen: { color: "#009E73", weight: 1.5, opacity: 0.7 }
  };
  var layer = L.layerGroup().addTo(map);
  var alertLayer = L.layerGroup().addTo(map);
  var mode = "hindsight", entries = [];

  function copy(o, extra) {
    var r = {}, k;
    for (k in o) { r[k] = o[k]; }
    for (k in extra) { r[k] = extra[k]; }
    return r;
  }
  function dm(v, width, hemis) {
    var th = Math.round(Math.abs(v) * 60000), deg = Math.floor(th / 60000), mm = th - deg * 60000;
    var d = String(deg); while (d.length < width) { d = "0" + d; }
    var m = (mm / 1000).toFixed(3); if (mm < 10000) { m = "0" + m; }
    return d + "\u00b0" + m + "'" + (v >= 0 ? hemis[0] : hemis[1]);
  }
  function tipFor(e) {
    var box = document.createElement("span"), id = document.createElement("span");
    id.className = "hw-tip-id";
    id.textContent = e.tr.id;
    box.appendChild(id);
    var lines = [];
    if (e.pos) {
      if (e.vel) {
        var c = String(Math.round(e.vel.course) % 360); while (c.length < 3) { c = "0" + c; }
        lines.push(e.vel.kn.toFixed(1) + " kn, course " + c + "\u00b0");
      }
      if (e.hullNow) {
        var hh = String(Math.round(e.hullNow.heading) % 360); while (hh.length < 3) { hh = "0" + hh; }
        lines.push("hull about " + Math.round(e.hullNow.length) + " m \u00d7 " +
          Math.round(e.hullNow.beam) + " m, heading " + hh + "\u00b0");
      }
      lines.push(dm(e.pos[0], 2, "NS") + " " + dm(e.pos[1], 3, "EW"));
      lines.push(fmt(cur));
    }
    lines.forEach(function (t) { box.appendChild(document.createElement("br")); box.appendChild(document.createTextNode(t)); });
    return box;
  }
  function build() {
    layer.clearLayers();
    entries = sets[mode].map(function (tr) {
      var e = { tr: tr, on: false, histOn: false, histI: -2, pos: null, vel: null };
      e.mk = L.circleMarker([tr.la[0], tr.lo[0]], copy(styles[mode], { className: "hw-vessel" }));
      e.bow = L.circleMarker([tr.la[0], tr.lo[0]],
        copy(bowStyle[mode], { className: "hw-bow", interactive: false }));
      e.mk.bindTooltip(function () { return tipFor(e); });
      e.trail = L.polyline([], copy(trailStyle[mode], { className: "hw-trail", interactive: false }));
      var hs = histStyle[mode];
      if (mode === "hindsight" && !tr.live) { hs = copy(hs, { color: "#E69F00", dashArray: "7 5" }); }
      e.hist = L.polyline([], copy(hs, { className: "hw-hist", interactive: false }));
      if (tr.hd) {
        e.hull = L.polygon([], copy(hullStyle[mode], { className: "hw-hull", interactive: false }));
        e.hullOn = false;
        e.hullNow = null;
      }
      return e;
    });
  }
  function lastAtOrBefore(t, s) {
    var lo = 0, hi = t.length - 1;
    if (hi < 0 || s < t[0]) { return -1; }
    while (lo < hi) {
      var mid = (lo + hi + 1) >> 1;
      if (t[mid] <= s) { lo = mid; } else { hi = mid - 1; }
    }
    return lo;
  }
  function position(tr, s) {
    var i = lastAtOrBefore(tr.t, s);
    if (i < 0) { return null; }
    var n = tr.t.length;
    if (mode === "hindsight") {
      if (s > tr.t[n - 1]) { return null; }
      if (i === n - 1) { return [tr.la[i], tr.lo[i]]; }
      var f = (s - tr.t[i]) / (tr.t[i + 1] - tr.t[i]);
      return [tr.la[i] + f * (tr.la[i + 1] - tr.la[i]), tr.lo[i] + f * (tr.lo[i + 1] - tr.lo[i])];
    }
    // as seen: hold the last estimate known at s, no look-ahead
    if (s - tr.t[i] > cfg.max_gap) { return null; }
    return [tr.la[i], tr.lo[i]];
  }
  function velocity(tr, s) {
    // over about 30 s: positions are rounded to 1e-5 degrees (about 1 m)
    var i = lastAtOrBefore(tr.t, s), n = tr.t.length, a, b;
    if (mode === "hindsight") {
      a = Math.max(0, lastAtOrBefore(tr.t, s - 15));
      b = Math.min(n - 1, Math.max(lastAtOrBefore(tr.t, s + 15), a + 1));
    } else { b = i; a = Math.max(0, Math.min(i - 1, lastAtOrBefore(tr.t, s - 30))); }
    if (a < 0 || b >= n || tr.t[b] <= tr.t[a]) { return null; }
    var dt = tr.t[b] - tr.t[a];
    var d = map.distance([tr.la[a], tr.lo[a]], [tr.la[b], tr.lo[b]]);
    var dn = tr.la[b] - tr.la[a], de = (tr.lo[b] - tr.lo[a]) * Math.cos(tr.la[a] * Math.PI / 180);
    var course = (Math.atan2(de, dn) * 180 / Math.PI + 360) % 360;
    return { kn: d / dt / KNOT, course: course };
  }
  function segmentsUpTo(tr, i, tail) {  // samples 0..i (+ tail), split at as-seen gaps
    var segs = [], seg = [];
    for (var j = 0; j <= i; j++) {
      if (j > 0 && mode === "as_seen" && tr.t[j] - tr.t[j - 1] > cfg.max_gap) { segs.push(seg); seg = []; }
      seg.push([tr.la[j], tr.lo[j]]);
    }
    if (tail) { seg.push(tail); }
    segs.push(seg);
    return segs;
  }
  function trail(tr, s, here, len) {
    var i = lastAtOrBefore(tr.t, s), segs = [], seg = [here];
    for (var j = i; j >= 0 && tr.t[j] >= s - len; j--) {
      if (j < i && tr.t[j + 1] - tr.t[j] > cfg.max_gap && mode === "as_seen") {
        segs.push(seg); seg = [];
      }
      seg.push([tr.la[j], tr.lo[j]]);
    }
    segs.push(seg);
    return segs;
  }
  /* the outline's size and heading at s: hindsight interpolates the heading between
     samples (the shorter way round), as seen holds the last sample like the position */
  function hullAt(tr, s) {
    var i = lastAtOrBefore(tr.t, s);
    if (i < 0) { return null; }
    if (mode === "as_seen") {
      var len = tr.len ? tr.len[i] : 0;
      if (!(len > 0)) { return null; }
      return { length: len, beam: len * tr.bl, heading: tr.hd[i] };
    }
    if (!tr.hull) { return null; }
    var h = tr.hd[i];
    if (i + 1 < tr.t.length && s > tr.t[i]) {
      var f = (s - tr.t[i]) / (tr.t[i + 1] - tr.t[i]);
      var d = ((tr.hd[i + 1] - h + 540) % 360) - 180;
      h = (h + f * d + 360) % 360;
    }
    return { length: tr.hull[0], beam: tr.hull[1], heading: h };
  }
  /* ellipse of length x beam around p along heading (degrees true), in metres on the WGS84
     ellipsoid's local radii of curvature; vertex 0 is the bow end, HULL_N / 2 the stern */
  function hullRing(p, hl) {
    var phi = p[0] * Math.PI / 180, sp = Math.sin(phi), w = 1 - WGS84_E2 * sp * sp;
    var mLat = WGS84_A * (1 - WGS84_E2) / (w * Math.sqrt(w)) * Math.PI / 180;
    var mLon = WGS84_A / Math.sqrt(w) * Math.cos(phi) * Math.PI / 180;
    var h = hl.heading * Math.PI / 180, sh = Math.sin(h), ch = Math.cos(h), ring = [];
    for (var k = 0; k < HULL_N; k++) {
      var a = 2 * Math.PI * k / HULL_N, al = 0.5 * hl.length * Math.cos(a),
        ac = 0.5 * hl.beam * Math.sin(a);
      ring.push([p[0] + (al * ch - ac * sh) / mLat, p[1] + (al * sh + ac * ch) / mLon]);
    }
    return ring;
  }
  function bowAt(p, vel) {
    if (!vel) { return p; }
    var c = vel.course * Math.PI / 180, pt = map.latLngToLayerPoint(p);
    var ll = map.layerPointToLatLng([pt.x + BOW_PX * Math.sin(c), pt.y - BOW_PX * Math.cos(c)]);
    return [ll.lat, ll.lng];
  }
  var local = null;
  if (cfg.tz && window.Intl) {
    try {
      local = new Intl.DateTimeFormat("en-GB", { timeZone: cfg.tz, hour: "2-digit",
        minute: "2-digit", second: "2-digit", hourCycle: "h23", timeZoneName: "short" });
    } catch (err) { local = null; }
  }
  /* HH:MM:SS UTC (the date is in the page heading), local time in brackets with --display-tz */
  function fmt(s) {
    var d = new Date(Math.floor(cfg.t0 + s) * 1000);
    var text = d.toISOString().slice(11, 19) + " UTC";
    var day = d.toISOString().slice(0, 10);
    if (day !== cfg.day) { text = day + " " + text; }
    if (local) { text += " (" + local.format(d) + ")"; }
    return text;
  }
  var alertMarks = (cfg.alerts || []).map(function (a) {
    var mk = L.circleMarker([a.lat, a.lon], { radius: 7, color: "#1b1b1b", weight: 1.5,
      fillColor: "#D55E00", fillOpacity: 0.95, className: "hw-alert-live" });
    var box = document.createElement("span"), b = document.createElement("b"),
      link = document.createElement("a");
    b.textContent = a.rule;
    link.href = a.href;
    link.textContent = "open incident page " + a.n;
    box.appendChild(b); box.appendChild(document.createElement("br")); box.appendChild(link);
    mk.bindPopup(box);
    return { a: a, mk: mk, on: false };
  });
  var cur = span;
  slider.value = span;
  function update() {
    var s = cur, upto = !uptoBox || uptoBox.checked;
    var len = trailSel ? parseFloat(trailSel.value) : cfg.trail;
    clock.textContent = fmt(s);
    mapEl.classList.toggle("hw-upto", upto);
    var shown = 0, raised = false;
    entries.forEach(function (e) {
      var i = lastAtOrBefore(e.tr.t, s);
      if (upto && i >= 0) {
        if (e.histI !== i) { e.hist.setLatLngs(segmentsUpTo(e.tr, i, null)); e.histI = i; }
        if (!e.histOn) { layer.addLayer(e.hist); e.histOn = true; }
      } else if (e.histOn) { layer.removeLayer(e.hist); e.histOn = false; e.histI = -2; }
      var p = position(e.tr, s);
      e.pos = p;
      var hl = (p !== null && e.hull) ? hullAt(e.tr, s) : null;
      if (e.hull) {
        e.hullNow = hl;
        if (hl) { e.hull.setLatLngs(hullRing(p, hl)); }
        if (hl && !e.hullOn) { layer.addLayer(e.hull); e.hullOn = true; raised = true; }
        if (!hl && e.hullOn) { layer.removeLayer(e.hull); e.hullOn = false; }
      }
      if (p === null) {
        if (e.on) { layer.removeLayer(e.mk); layer.removeLayer(e.bow); layer.removeLayer(e.trail); e.on = false; }
        return;
      }
      e.vel = velocity(e.tr, s);
      e.mk.setLatLng(p);
      e.bow.setLatLng(bowAt(p, e.vel));
      e.trail.setLatLngs(len > 0 ? trail(e.tr, s, p, len) : []);
      if (!e.on) { layer.addLayer(e.trail); layer.addLayer(e.bow); layer.addLayer(e.mk); e.on = true; }
      if (e.mk.isTooltipOpen()) { e.mk.setTooltipContent(tipFor(e)); }
      shown += 1;
    });
    alertMarks.forEach(function (m) {
      var want = upto && m.a.s <= s;
      if (want && !m.on) { alertLayer.addLayer(m.mk); m.on = true; }
      if (!want && m.on) { alertLayer.removeLayer(m.mk); m.on = false; }
    });
    if (raised) {  // a hull outline just drawn goes under every vessel symbol and alert mark
      entries.forEach(function (e) {
        if (e.on) { e.trail.bringToFront(); e.bow.bringToFront(); e.mk.bringToFront(); }
      });
      alertMarks.forEach(function (m) { if (m.on) { m.mk.bringToFront(); } });
    }
    slider.setAttribute("aria-valuetext", fmt(s) + ", " + shown + " vessels");
  }
  var playing = false, last = null;
  function frame(ts) {
    if (!playing) { return; }
    if (last !== null) {
      var v = cur + (ts - last) / 1000 * parseFloat(speedSel.value);
      if (v >= span) { v = span; setPlaying(false); }
      cur = v;
      slider.value = v;
      update();
    }
    last = ts;
    window.requestAnimationFrame(frame);
  }
  function setPlaying(on) {
    playing = on;
    playBtn.textContent = on ? "Pause" : "Play";
    playBtn.setAttribute("aria-pressed", on ? "true" : "false");
    last = null;
    if (on) {
      if (cur >= span) { cur = 0; slider.value = 0; }
      window.requestAnimationFrame(frame);
    }
  }
  playBtn.addEventListener("click", function () { setPlaying(!playing); });
  slider.addEventListener("input", function () { cur = parseFloat(slider.value); update(); });
  if (trailSel) { trailSel.addEventListener("change", update); }
  if (uptoBox) { uptoBox.addEventListener("change", update); }
  map.on("zoomend", update);
  document.querySelectorAll("input[name=hw-mode]").forEach(function (r) {
    r.addEventListener("change", function () {
      if (r.checked) { mode = r.value; build(); update(); }
    });
  });
  build();
  update();
  window.hwReplay = {
    positions: function () {
      return entries.filter(function (e) { return e.on; }).map(function (e) {
        var p = e.mk.getLatLng(); return [e.tr.id, p.lat, p.lng];
      });
    },
    /* [id, [[lat, lon], ...]] of every history line drawn now */
    drawn: function () {
      return entries.filter(function (e) { return e.histOn; }).map(function (e) {
        var flat = [];
        (function walk(a) { a.forEach(function (x) { if (x.lat !== undefined) { flat.push([x.lat, x.lng]); } else { walk(x); } }); })(e.hist.getLatLngs());
        return [e.tr.id, flat];
      });
    },
    /* [id, {length, beam, heading}, [[lat, lon], ...]] of every hull outline drawn now */
    hulls: function () {
      return entries.filter(function (e) { return e.hull && e.hullOn; }).map(function (e) {
        var ring = e.hull.getLatLngs()[0].map(function (x) { return [x.lat, x.lng]; });
        return [e.tr.id, e.hullNow, ring];
      });
    },
    mode: function () { return mode; },
    time: function () { return cur; },
    /* the tooltip text of vessel id at the current time ("" when it is not shown) */
    tip: function (id) {
      var t = "";
      entries.forEach(function (e) {
        if (e.tr.id === id && e.on) {
          t = Array.prototype.filter.call(tipFor(e).childNodes, function (c) { return c.nodeName !== "BR"; })
            .map(function (c) { return c.textContent; }).join("\n");
        }
      });
      return t;
    },
    goTo: function (s, id) {
      setPlaying(false);
      cur = Math.max(0, Math.min(span, s));
      slider.value = cur;
      update();
      var tr = null;
      sets.hindsight.forEach(function (x) { if (x.id === id) { tr = x; } });
      if (tr && tr.t.length) {
        var pts = [];
        for (var j = 0; j < tr.t.length; j++) { pts.push([tr.la[j], tr.lo[j]]); }
        map.fitBounds(L.latLngBounds(pts), { animate: false, maxZoom: 15, padding: [20, 20] });
      }
      entries.forEach(function (e) { if (e.tr.id === id && e.on) { e.mk.openTooltip(); } });
    }
  };
})();
