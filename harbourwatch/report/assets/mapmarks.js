/* harbourwatch map marks: a scale bar in nautical miles, a north arrow, and the map
   refitted to its frame when the page is printed. Data: the JSON block "hw-page-data"
   ({map: name of the L.map variable, fit: [[lat, lon], [lat, lon]] to show}). */
(function () {
  "use strict";
  var el = document.getElementById("hw-page-data");
  if (!el) { return; }
  var cfg = JSON.parse(el.textContent);
  var map = window[cfg.map];
  if (!map) { return; }
  var NM = 1852.0;  // metres in one international nautical mile
  var NICE = [0.01, 0.02, 0.05, 0.1, 0.2, 0.25, 0.5, 1, 2, 5, 10, 20, 50, 100, 200, 500];
  var MAX_PX = 130;

  var Scale = L.Control.extend({
    options: { position: "bottomleft" },
    onAdd: function () {
      var box = L.DomUtil.create("div", "hw-scale");
      box.setAttribute("aria-label", "scale bar");
      this.bar = L.DomUtil.create("div", "hw-scale-bar", box);
      this.text = L.DomUtil.create("div", "hw-scale-text", box);
      return box;
    }
  });
  var North = L.Control.extend({
    options: { position: "topleft" },
    onAdd: function () {
      var box = L.DomUtil.create("div", "hw-north");
      box.setAttribute("role", "img");
      box.setAttribute("aria-label", "north is up");
      box.innerHTML = '<svg width="26" height="38" viewBox="0 0 26 38" aria-hidden="true">' +
        '<path d="M13 2 L22 26 L13 21 L4 26 Z" fill="#1b1b1b"/>' +
        '<path d="M13 2 L13 21 L4 26 Z" fill="#ffffff" stroke="#1b1b1b" stroke-width="1"/>' +
        '<text x="13" y="37" text-anchor="middle" font-size="11" font-weight="700">N</text></svg>';
      return box;
    }
  });
  var scale = new Scale().addTo(map);
  new North().addTo(map);

  function label(nm) {
    var m = nm * NM;
    var metres = m < 1000 ? Math.round(m) + " m" : (m / 1000).toFixed(1) + " km";
    return (nm < 0.1 ? nm.toFixed(2) : String(nm)) + " NM (" + metres + ")";
  }
  function update() {
    var size = map.getSize();
    if (!size.x) { return; }
    var y = size.y / 2;
    var a = map.containerPointToLatLng([10, y]), b = map.containerPointToLatLng([10 + MAX_PX, y]);
    var nm = map.distance(a, b) / NM;
    var best = NICE[0];
    for (var i = 0; i < NICE.length; i++) { if (NICE[i] <= nm) { best = NICE[i]; } }
    var px = Math.max(8, Math.round(MAX_PX * best / nm));
    scale.bar.style.width = px + "px";
    scale.text.textContent = label(best);
    scale.bar.setAttribute("data-nm", String(best));
    scale.bar.setAttribute("data-px", String(px));
  }
  map.on("zoomend moveend resize", update);
  update();

  function fitFrame() {
    map.invalidateSize({ animate: false, pan: false });
    map.fitBounds(cfg.fit, { animate: false });
    update();
  }
  window.addEventListener("beforeprint", fitFrame);
  window.addEventListener("afterprint", fitFrame);
  if (window.matchMedia) {
    var mq = window.matchMedia("print");
    if (mq.addEventListener) { mq.addEventListener("change", fitFrame); }
  }
  window.hwPage = {
    fitFrame: fitFrame,
    map: map,
    /* true when every point of cfg.episode lies inside the map's current view */
    episodeInView: function () {
      var view = map.getBounds();
      return (cfg.episode || []).every(function (seg) {
        return seg.every(function (p) { return view.contains(p); });
      });
    },
    scaleMetresPerPixel: function () {
      return parseFloat(scale.bar.getAttribute("data-nm")) * NM /
        parseFloat(scale.bar.getAttribute("data-px"));
    }
  };
})();
