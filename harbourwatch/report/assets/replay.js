/* harbourwatch shift replay: slider, play/pause, speed, hindsight/as-seen switch.
   Data: the JSON block with id "hw-replay-data", see report/_data.py. */
(function () {
  "use strict";
  var el = document.getElementById("hw-replay-data");
  if (!el) { return; }
  var cfg = JSON.parse(el.textContent);
  var map = window[cfg.map];
  var slider = document.getElementById("hw-slider");
  var clock = document.getElementById("hw-clock");
  var playBtn = document.getElementById("hw-play");
  var speedSel = document.getElementById("hw-speed");
  var span = cfg.t1 - cfg.t0;

  function decode(tr) {
    var p = tr.p, n = p.length / 3, t = new Float64Array(n), la = new Float64Array(n),
      lo = new Float64Array(n), a = 0, b = 0, c = 0;
    for (var i = 0; i < n; i++) {
      a += p[3 * i]; b += p[3 * i + 1]; c += p[3 * i + 2];
      t[i] = a; la[i] = b / 1e5; lo[i] = c / 1e5;
    }
    return { id: tr.id, live: !!tr.live, t: t, la: la, lo: lo };
  }
  var sets = { hindsight: cfg.hindsight.map(decode), as_seen: cfg.as_seen.map(decode) };
  var styles = {
    hindsight: { radius: 5, color: "#1b1b1b", weight: 1.5, fillColor: "#0072B2", fillOpacity: 1 },
    as_seen: { radius: 5, color: "#009E73", weight: 2.5, fillColor: "#ffffff", fillOpacity: 1 }
  };
  var trailStyle = {
    hindsight: { color: "#1b1b1b", weight: 2, opacity: 0.8 },
    as_seen: { color: "#009E73", weight: 2, opacity: 0.9, dashArray: "3 4" }
  };
  var layer = L.layerGroup().addTo(map);
  var mode = "hindsight", entries = [];

  function label(id) {
    var s = document.createElement("span");
    s.className = "hw-tip-id";
    s.textContent = id;
    return s;
  }
  function build() {
    layer.clearLayers();
    entries = sets[mode].map(function (tr) {
      var o = {}, k;
      for (k in styles[mode]) { o[k] = styles[mode][k]; }
      o.className = "hw-vessel";
      var mk = L.circleMarker([tr.la[0], tr.lo[0]], o);
      mk.bindTooltip(label(tr.id));
      var to = {};
      for (k in trailStyle[mode]) { to[k] = trailStyle[mode][k]; }
      to.className = "hw-trail";
      to.interactive = false;
      var trail = L.polyline([], to);
      return { tr: tr, mk: mk, trail: trail, on: false };
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
  function trail(tr, s, here) {
    var i = lastAtOrBefore(tr.t, s), segs = [], seg = [here];
    for (var j = i; j >= 0 && tr.t[j] >= s - cfg.trail; j--) {
      if (j < i && tr.t[j + 1] - tr.t[j] > cfg.max_gap && mode === "as_seen") {
        segs.push(seg); seg = [];
      }
      seg.push([tr.la[j], tr.lo[j]]);
    }
    segs.push(seg);
    return segs;
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
  var cur = parseFloat(slider.value);
  function update() {
    var s = cur;
    clock.textContent = fmt(s);
    var shown = 0;
    entries.forEach(function (e) {
      var p = position(e.tr, s);
      if (p === null) {
        if (e.on) { layer.removeLayer(e.mk); layer.removeLayer(e.trail); e.on = false; }
        return;
      }
      e.mk.setLatLng(p);
      e.trail.setLatLngs(trail(e.tr, s, p));
      if (!e.on) { layer.addLayer(e.trail); layer.addLayer(e.mk); e.on = true; }
      shown += 1;
    });
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
    }
  };
})();
