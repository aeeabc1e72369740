/* geo-reach map page: builds the map, the view and layer panel and the legend from the JSON data
 * block (#gr-data) with Leaflet.  Static: the same file for every map, never generated.
 * Every text from the data is put on screen with textContent (text nodes), never as markup. */
(function () {
  'use strict';
  var D = JSON.parse(document.getElementById('gr-data').textContent);
  var F = D.frame;
  var PANES = {shade: 405, water: 415, dists: 420, weak: 425, net: 430, prop: 435, change: 440, top: 445,
               pts: 450, labels: 590, badges: 605, hubs: 610};
  var PICK_ORDER = ['top', 'change', 'prop', 'net', 'weak', 'water', 'shade'];
  var state = {view: 'today', on: {}, shade: null};
  var renderers = {};

  // ------------------------------------------------------------------ small helpers
  function el(tag, cls, text) {
    var e = document.createElement(tag);
    if (cls) { e.className = cls; }
    if (text !== undefined && text !== null) { e.textContent = String(text); }
    return e;
  }
  function svgEl(tag, attrs) {
    var e = document.createElementNS('http://www.w3.org/2000/svg', tag);
    for (var k in attrs) { if (Object.prototype.hasOwnProperty.call(attrs, k)) { e.setAttribute(k, attrs[k]); } }
    return e;
  }
  function group3(s) {
    var out = '';
    while (s.length > 3) { out = ',' + s.slice(-3) + out; s = s.slice(0, -3); }
    return s + out;
  }
  function fmtNum(v, d) {
    var t = Math.abs(v).toFixed(d), p = t.split('.');
    var s = group3(p[0]) + (p.length > 1 ? '.' + p[1] : '');
    return (v < 0 && Number(t) !== 0 ? '\u2212' : '') + s;
  }
  function fmt(v, spec) {
    if (v === null || v === undefined) { return spec.none || null; }
    if (typeof v === 'string') { return v; }
    var d = spec.d || 0, s;
    if (spec.pct) { return fmtNum(v * 100, d) + ' %'; }
    s = fmtNum(v, d);
    if (spec.sign && v > 0 && Number(Math.abs(v).toFixed(d)) !== 0) { s = '+' + s; }
    return spec.u ? s + ' ' + spec.u : s;
  }

  // a column of values: a list, {v: one value for all}, {k: texts, i: index per feature (-1 = none)}, or absent
  function val(col, i) {
    if (col === undefined || col === null) { return null; }
    if (Array.isArray(col)) { return col[i] === undefined ? null : col[i]; }
    if (col.k) { return col.i[i] < 0 ? null : col.k[col.i[i]]; }
    return col.v;
  }

  // ------------------------------------------------------------------ geometry
  function decode(g, kind) {
    var xy = g.xy, k = 0, x = 0, y = 0, s = F.step, lon0 = F.lon0, lat0 = F.lat0, i, j;
    function pt() { x += xy[k++]; y += xy[k++]; return L.latLng(lat0 + y * s, lon0 + x * s); }
    if (kind !== 'line' && kind !== 'fill') {
      var pts = [];
      for (i = 0; i < xy.length / 2; i++) { pts.push(pt()); }
      return pts;
    }
    var parts = [];
    for (i = 0; i < g.n.length; i++) {
      var p = new Array(g.n[i]);
      for (j = 0; j < g.n[i]; j++) { p[j] = pt(); }
      parts.push(p);
    }
    if (kind === 'fill') {
      var polys = [], ri = 0;
      for (i = 0; i < g.r.length; i++) { polys.push(parts.slice(ri, ri + g.r[i])); ri += g.r[i]; }
      parts = polys;
    }
    if (!g.f) { return parts.map(function (p1) { return [p1]; }); }
    var feats = [], pi = 0;
    for (i = 0; i < g.f.length; i++) { feats.push(parts.slice(pi, pi + g.f[i])); pi += g.f[i]; }
    return feats;
  }
  function style(st, pane) {
    var o = {renderer: renderers[pane], pane: 'gr-' + pane, interactive: false, lineJoin: 'round',
             lineCap: 'round'};
    o.color = st.c || '#000000';
    o.weight = st.w === undefined ? 2 : st.w;
    o.stroke = o.weight > 0;
    o.opacity = st.o === undefined ? 1 : st.o;
    if (st.dash) { o.dashArray = st.dash; }
    o.fill = !!st.fc && st.fo !== 0;
    if (o.fill) { o.fillColor = st.fc; o.fillOpacity = st.fo === undefined ? 1 : st.fo; }
    return o;
  }
  function bboxOf(rings) {
    var b = [Infinity, Infinity, -Infinity, -Infinity];
    for (var r = 0; r < rings.length; r++) {
      for (var i = 0; i < rings[r].length; i++) {
        var p = rings[r][i];
        if (p.lng < b[0]) { b[0] = p.lng; } if (p.lat < b[1]) { b[1] = p.lat; }
        if (p.lng > b[2]) { b[2] = p.lng; } if (p.lat > b[3]) { b[3] = p.lat; }
      }
    }
    return b;
  }
  function inRing(ring, ll) {
    var inside = false;
    for (var i = 0, j = ring.length - 1; i < ring.length; j = i++) {
      var a = ring[i], b = ring[j];
      if ((a.lat > ll.lat) !== (b.lat > ll.lat) &&
          ll.lng < (b.lng - a.lng) * (ll.lat - a.lat) / (b.lat - a.lat) + a.lng) { inside = !inside; }
    }
    return inside;
  }
  function segDist(p, a, b) {
    var dx = b.x - a.x, dy = b.y - a.y, t = 0, l2 = dx * dx + dy * dy;
    if (l2 > 0) { t = Math.max(0, Math.min(1, ((p.x - a.x) * dx + (p.y - a.y) * dy) / l2)); }
    var x = a.x + t * dx - p.x, y = a.y + t * dy - p.y;
    return Math.sqrt(x * x + y * y);
  }

  // ------------------------------------------------------------------ popups and tooltips
  function popupEl(l, i) {
    var p = l.popup, box = el('div', 'gr-pop');
    var head = p.headcol ? val(l.cols[p.headcol], i) : p.head;
    if (head) { box.appendChild(el('div', 'gr-pop-head', head)); }
    if (p.title && val(l.cols[p.title], i) !== null) {
      box.appendChild(el('div', 'gr-pop-title', val(l.cols[p.title], i)));
    }
    var tbl = el('table');
    p.rows.forEach(function (r) {
      var v = fmt(val(l.cols[r[1]], i), r[2]);
      if (v === null) { return; }
      var tr = el('tr');
      tr.appendChild(el('th', null, r[0]));
      tr.appendChild(el('td', null, v));
      tbl.appendChild(tr);
    });
    if (tbl.childNodes.length) { box.appendChild(tbl); }
    return box;
  }
  function popupOpts() {
    return {maxWidth: 340, autoPanPaddingTopLeft: L.point(20, 20), autoPanPaddingBottomRight: L.point(20, 20)};
  }

  // ------------------------------------------------------------------ the map
  var map = L.map('gr-map', {zoomSnap: 0, zoomDelta: 0.5, wheelPxPerZoomLevel: 90, preferCanvas: true,
                             attributionControl: true, zoomControl: true, maxZoom: 19});
  Object.keys(PANES).forEach(function (k) {
    map.createPane('gr-' + k).style.zIndex = PANES[k];
    renderers[k] = L.canvas({pane: 'gr-' + k, padding: 0.3, tolerance: 3});
  });
  map.getPane('gr-labels').style.pointerEvents = 'none';
  L.control.scale({imperial: false, position: 'bottomleft'}).addTo(map);
  if (D.basemap) {
    L.tileLayer(D.basemap.url, {attribution: D.basemap.attribution, maxZoom: 19}).addTo(map);
  }

  // ------------------------------------------------------------------ layers
  var layers = D.layers.map(function (l) { return {d: l, objs: null, on: false, feats: null, boxes: null}; });

  function hubIcon(st) {
    var sz = 18, box = el('span', 'gr-hub');
    box.appendChild(shapeSvg(st.shape, st.fc, sz));
    return L.divIcon({className: 'gr-hub-icon', html: box, iconSize: [sz, sz], iconAnchor: [sz / 2, sz / 2]});
  }
  function shapeSvg(shape, fill, sz) {
    var svg = svgEl('svg', {width: sz, height: sz, viewBox: '0 0 20 20'});
    var stroke = fill === '#ffffff' ? '#1e1e1e' : '#ffffff';
    var a = {fill: fill, stroke: stroke, 'stroke-width': '1.6', 'stroke-linejoin': 'round'};
    var pts = {
      triangle: '10,1.5 19,18 1,18',
      star: '10,0.8 12.6,7 19.3,7.3 14.1,11.6 15.8,18.8 10,14.8 4.2,18.8 5.9,11.6 0.7,7.3 7.4,7',
      cross: '7,1 13,1 13,7 19,7 19,13 13,13 13,19 7,19 7,13 1,13 1,7 7,7',
      x: '4.3,0.8 10,6.5 15.7,0.8 19.2,4.3 13.5,10 19.2,15.7 15.7,19.2 10,13.5 4.3,19.2 0.8,15.7 6.5,10 0.8,4.3'
    };
    if (pts[shape]) { a.points = pts[shape]; svg.appendChild(svgEl('polygon', a)); } else {
      a.x = 2; a.y = 2; a.width = 16; a.height = 16; svg.appendChild(svgEl('rect', a));
    }
    return svg;
  }
  function badgeIcon(text, st) {
    var b = el('span', 'gr-badge' + (st.key ? ' gr-badge-key' : ''), text);
    b.style.borderColor = st.c;
    var w = 10 + 7 * String(text).length;
    return L.divIcon({className: 'gr-badge-icon', html: b, iconSize: [w, 20], iconAnchor: [w / 2, 10]});
  }

  function build(L_) {
    var l = L_.d, objs = [], i;
    if (l.type === 'line' || l.type === 'fill') {
      var feats = decode(l.geom, l.type);
      L_.feats = feats;
      var byCls = {};
      feats.forEach(function (parts, i2) {
        if (!parts.length) { return; }
        var c = l.cls[i2];
        (byCls[c] = byCls[c] || []).push.apply(byCls[c], l.type === 'line' ? parts : parts);
      });
      Object.keys(byCls).sort(function (a, b) { return a - b; }).forEach(function (c) {
        var o = style(l.styles[c], l.pane);
        objs.push(l.type === 'line' ? L.polyline(byCls[c], o) : L.polygon(byCls[c], o));
      });
    } else if (l.type === 'label') {
      L_.pts = decode(l.geom, 'point');
      L_.pts.forEach(function (ll, i2) {
        var t = val(l.cols[l.label], i2);
        if (!t) { return; }
        var w = 8 + 7 * t.length;
        objs.push(L.marker(ll, {pane: 'gr-labels', interactive: false, keyboard: false,
          icon: L.divIcon({className: l.css || 'gr-label', html: el('span', null, t), iconSize: [w, 16],
                           iconAnchor: [w / 2, 8]})}));
      });
    } else if (l.type === 'cluster') {
      L_.pts = decode(l.geom, 'point');
    } else {
      var pts = decode(l.geom, 'point');
      L_.pts = pts;
      for (i = 0; i < pts.length; i++) {
        var m, st = l.styles[l.cls[i]];
        if (l.type === 'hub') {
          m = L.marker(pts[i], {icon: hubIcon(st), pane: 'gr-hubs', keyboard: false});
        } else if (l.type === 'badge') {
          m = L.marker(pts[i], {icon: badgeIcon(val(l.cols[l.badge], i), st), pane: 'gr-badges', keyboard: false});
        } else {
          var o = style(st, l.pane);
          o.radius = l.size ? l.size[i] : 5;
          o.interactive = true;
          o.bubblingMouseEvents = false;
          m = L.circleMarker(pts[i], o);
        }
        bindInfo(m, L_, i);
        objs.push(m);
      }
    }
    L_.objs = objs;
  }
  function bindInfo(m, L_, i) {
    var l = L_.d;
    if (l.popup) { m.bindPopup(function () { return popupEl(l, i); }, popupOpts()); }
    if (l.tip && val(l.cols[l.tip], i)) {
      m.bindTooltip(function () { return el('span', 'gr-tip', val(l.cols[l.tip], i)); },
                    {direction: 'top', offset: [0, -6], opacity: 0.95});
    }
  }

  function groupOn(gid) {
    var g = groupById[gid];
    return g.mode === 'shade' ? state.shade === gid : !!state.on[gid];
  }
  function visible(L_) {
    return groupOn(L_.d.group) && (L_.d.view === null || L_.d.view === state.view);
  }
  function refresh() {
    layers.forEach(function (L_) {
      var want = visible(L_);
      if (want && !L_.objs) { build(L_); }
      if (want !== L_.on && L_.objs) {
        L_.objs.forEach(function (o) { if (want) { o.addTo(map); } else { map.removeLayer(o); } });
      }
      L_.on = want;
    });
    updatePanel();
    rescale();
    updateLabels();
    updateClusters();
  }

  // ------------------------------------------------------------------ picking lines and areas
  function pick(ll) {
    var z = map.getZoom(), p = map.project(ll, z);
    var degPerPx = 360 / (256 * Math.pow(2, z));
    for (var k = 0; k < PICK_ORDER.length; k++) {
      for (var n = layers.length - 1; n >= 0; n--) {
        var L_ = layers[n], l = L_.d;
        if (!L_.on || !l.pick || l.pane !== PICK_ORDER[k] || !L_.feats) { continue; }
        if (!L_.boxes) { L_.boxes = L_.feats.map(function (f) { return bboxOf(l.type === 'fill' ? f.map(function (q) { return q[0] || []; }) : f); }); }
        var best = -1, bestD = Infinity, i, j, q;
        if (l.type === 'line') {
          var tolPx = 5 + 0.5 * Math.max.apply(null, l.styles.map(function (s) { return s.w || 1; }));
          var tol = tolPx * degPerPx * 1.5;
          for (i = 0; i < L_.feats.length; i++) {
            var b = L_.boxes[i];
            if (ll.lng < b[0] - tol || ll.lng > b[2] + tol || ll.lat < b[1] - tol || ll.lat > b[3] + tol) { continue; }
            for (q = 0; q < L_.feats[i].length; q++) {
              var part = L_.feats[i][q], prev = map.project(part[0], z);
              for (j = 1; j < part.length; j++) {
                var cur = map.project(part[j], z), d = segDist(p, prev, cur);
                if (d < bestD) { bestD = d; best = i; }
                prev = cur;
              }
            }
          }
          if (best >= 0 && bestD <= tolPx) { return {L_: L_, i: best}; }
        } else {
          for (i = L_.feats.length - 1; i >= 0; i--) {
            var bb = L_.boxes[i];
            if (ll.lng < bb[0] || ll.lng > bb[2] || ll.lat < bb[1] || ll.lat > bb[3]) { continue; }
            for (q = 0; q < L_.feats[i].length; q++) {
              var rings = L_.feats[i][q], inside = inRing(rings[0], ll);
              for (j = 1; inside && j < rings.length; j++) { if (inRing(rings[j], ll)) { inside = false; } }
              if (inside) { return {L_: L_, i: i}; }
            }
          }
        }
      }
    }
    return null;
  }
  map.on('click', function (e) {
    var hit = pick(e.latlng);
    if (hit) { L.popup(popupOpts()).setLatLng(e.latlng).setContent(popupEl(hit.L_.d, hit.i)).openOn(map); }
  });

  // ------------------------------------------------------------------ settlement names, placed where there is room
  var labelLayer = L.layerGroup().addTo(map);
  function updateLabels() {
    labelLayer.clearLayers();
    var size = map.getSize(), placed = [], tried = 0, shown = 0, bounds = map.getBounds();
    var MAX_LABELS = Math.round(60 * size.x * size.y / (960 * 720)), PAD = 3;
    function free(b) {
      if (b[0] < 0 || b[1] < 0 || b[2] > size.x || b[3] > size.y) { return false; }
      for (var q = 0; q < placed.length; q++) {
        var c = placed[q];
        if (b[0] < c[2] && b[2] > c[0] && b[1] < c[3] && b[3] > c[1]) { return false; }
      }
      return true;
    }
    function padded(b) { return [b[0] - PAD, b[1] - PAD, b[2] + PAD, b[3] + PAD]; }
    // hubs, rank badges and district names keep their room
    layers.forEach(function (x) {
      if (!x.on || !x.pts || (x.d.type !== 'hub' && x.d.type !== 'badge' && x.d.type !== 'label')) { return; }
      x.pts.forEach(function (ll, i) {
        var q = map.latLngToContainerPoint(ll), t = x.d.type === 'hub' ? '' : String(val(x.d.cols[x.d.badge || x.d.label], i));
        var hw = x.d.type === 'hub' ? 10 : (x.d.type === 'badge' ? 6 + 3.5 * t.length : 4 + 3.5 * t.length);
        var hh = x.d.type === 'label' ? 8 : 10;
        placed.push([q.x - hw, q.y - hh, q.x + hw, q.y + hh]);
      });
    });
    // candidates: hub names first, then settlements by people (largest first)
    var cands = [];
    layers.forEach(function (x) {
      if (!x.on || !x.pts) { return; }
      if (x.d.type === 'hub' && x.d.tip) {
        x.pts.forEach(function (ll, i) { cands.push([ll, val(x.d.cols[x.d.tip], i), 10 + PAD + 1, 'gr-label gr-label-hub']); });
      }
    });
    layers.forEach(function (x) {
      if (!x.on || x.d.type !== 'point' || !x.d.label) { return; }
      var k = x.scale || 1;
      x.d.order.forEach(function (i) {
        cands.push([x.pts[i], val(x.d.cols[x.d.label], i), (x.d.size ? x.d.size[i] : 5) * k, 'gr-label']);
      });
    });
    for (var n = 0; n < cands.length && tried < 1500 && shown < MAX_LABELS; n++) {
      var ll = cands[n][0], t = cands[n][1], r = cands[n][2];
      if (!t || !bounds.contains(ll)) { continue; }
      tried++;
      var p = map.latLngToContainerPoint(ll), w = 7 * t.length + 6, h = 15;
      var right = [p.x + r + 2, p.y - h / 2, p.x + r + 2 + w, p.y + h / 2];
      var left = [p.x - r - 2 - w, p.y - h / 2, p.x - r - 2, p.y + h / 2];
      var box = free(padded(right)) ? right : (free(padded(left)) ? left : null);
      if (!box) { continue; }
      shown++;
      placed.push(padded(box));
      placed.push([p.x - r, p.y - r, p.x + r, p.y + r]);
      labelLayer.addLayer(L.marker(ll, {pane: 'gr-labels', interactive: false, keyboard: false,
        icon: L.divIcon({className: cands[n][3] + (box === left ? ' gr-label-left' : ''), html: el('span', null, t),
                         iconSize: [w, h], iconAnchor: [p.x - box[0], h / 2]})}));
    }
  }
  map.on('moveend', updateLabels);

  // ------------------------------------------------------------------ keep dense layers readable at every zoom
  // Lines: a layer with `ink` metres of line per square metre covers ink * width * (metres per pixel) of the
  // screen; widths shrink (not below 0.6 px) so that it covers at most MAX_LINE_COVER.  Dots: radii shrink
  // so that the dots in view cover at most MAX_DOT_COVER of the map.
  var MAX_LINE_COVER = 0.15, MAX_DOT_COVER = 0.06;
  function rescale() {
    var z = map.getZoom(), lat = map.getCenter().lat;
    var mpp = 40075016.686 * Math.cos(lat * Math.PI / 180) / (256 * Math.pow(2, z));
    var size = map.getSize(), area = size.x * size.y, bounds = map.getBounds();
    layers.forEach(function (L_) {
      var l = L_.d;
      if (!L_.on || !L_.objs) { return; }
      if (l.type === 'line' && l.ink) {
        var wmax = MAX_LINE_COVER / (l.ink * mpp);
        L_.objs.forEach(function (o) {
          var w = o.grBaseWeight || (o.grBaseWeight = o.options.weight);
          o.setStyle({weight: Math.max(0.6, Math.min(w, wmax))});
        });
      } else if (l.type === 'point' && l.size) {
        var cover = 0;
        L_.pts.forEach(function (ll, i) { if (bounds.contains(ll)) { cover += Math.PI * l.size[i] * l.size[i]; } });
        var k = cover > 0 ? Math.min(1, Math.sqrt(MAX_DOT_COVER * area / cover)) : 1;
        L_.objs.forEach(function (o, i) { o.setRadius(Math.max(1.5, l.size[i] * k)); });
        L_.scale = k;
      }
    });
  }
  map.on('zoomend', rescale);   // before 'moveend', which places the labels

  // ------------------------------------------------------------------ network issues, grouped by screen cell
  var clusterLayer = L.layerGroup().addTo(map);
  function updateClusters() {
    clusterLayer.clearLayers();
    layers.forEach(function (L_) {
      if (!L_.on || L_.d.type !== 'cluster') { return; }
      var l = L_.d, cells = {}, keys = [], z = map.getZoom(), CELL = 56;
      L_.pts.forEach(function (ll, i) {
        var p = map.project(ll, z), key = Math.floor(p.x / CELL) + ':' + Math.floor(p.y / CELL);
        if (!cells[key]) { cells[key] = []; keys.push(key); }
        cells[key].push(i);
      });
      keys.forEach(function (key) {
        var idx = cells[key], st = l.styles[0];
        if (idx.length === 1) {
          var o = style(st, 'pts');
          o.radius = 5; o.interactive = true; o.bubblingMouseEvents = false;
          var m = L.circleMarker(L_.pts[idx[0]], o);
          bindInfo(m, L_, idx[0]);
          clusterLayer.addLayer(m);
          return;
        }
        var b = L.latLngBounds(idx.map(function (i) { return L_.pts[i]; }));
        var span = el('span', 'gr-cluster', String(idx.length));
        span.style.background = st.fc;
        var d = 22 + 4 * String(idx.length).length;
        var c = L.marker(b.getCenter(), {pane: 'gr-badges', keyboard: false,
          icon: L.divIcon({className: 'gr-cluster-icon', html: span, iconSize: [d, d], iconAnchor: [d / 2, d / 2]})});
        c.on('click', function () {
          if (b.getNorthEast().equals(b.getSouthWest()) || map.getZoom() >= map.getMaxZoom() - 0.5) {
            var box = el('div', 'gr-pop');
            box.appendChild(el('div', 'gr-pop-head', idx.length + ' network issues here'));
            idx.slice(0, 12).forEach(function (i) { box.appendChild(el('div', null, val(l.cols[l.popup.title], i))); });
            L.popup(popupOpts()).setLatLng(b.getCenter()).setContent(box).openOn(map);
          } else {
            map.fitBounds(b.pad(0.3), {maxZoom: map.getMaxZoom()});
          }
        });
        clusterLayer.addLayer(c);
      });
    });
  }
  map.on('zoomend', updateClusters);

  // ------------------------------------------------------------------ the panel: views, layers and their legends
  var groupById = {};
  D.groups.forEach(function (g) { groupById[g.id] = g; });
  var panel = document.getElementById('gr-panel');
  var groupRows = {};

  function swatch(e) {
    var s = el('span', 'gr-sw gr-sw-' + e.sw);
    if (e.c) { s.setAttribute('data-colour', e.c); }
    if (e.fam) { s.setAttribute('data-fam', e.fam); }
    if (e.sw === 'fill' || e.sw === 'dot') { s.style.background = e.c; }
    else if (e.sw === 'line' || e.sw === 'dash' || e.sw === 'thin') {
      s.style.borderTopColor = e.c;
      if (e.w) { s.style.borderTopWidth = e.w + 'px'; }
    } else if (e.sw === 'outline') { s.style.borderColor = e.c; }
    else if (e.sw === 'halo') { s.style.background = e.c; }
    else if (e.sw === 'badge') { s.textContent = '1'; s.style.borderColor = e.c; }
    else if (e.sw === 'size') { s.style.width = s.style.height = (2 * e.r) + 'px'; }
    else if (e.sw === 'shape') { s.appendChild(shapeSvg(e.shape, e.c, 16)); }
    return s;
  }
  function legendList(g) {
    var ul = el('ul', 'gr-leg');
    g.legend.forEach(function (e) {
      var li = el('li');
      li.appendChild(swatch(e));
      li.appendChild(el('span', 'gr-leg-text', e.t));
      ul.appendChild(li);
    });
    return ul;
  }
  function inView(gid) {
    return layers.some(function (L_) {
      return L_.d.group === gid && (L_.d.view === null || L_.d.view === state.view);
    });
  }
  function buildPanel() {
    panel.appendChild(el('h2', null, 'View'));
    var views = el('div', 'gr-views');
    D.views.forEach(function (v) {
      var lab = el('label', 'gr-view'), inp = el('input');
      inp.type = 'radio'; inp.name = 'gr-view'; inp.value = v.id; inp.checked = v.id === state.view;
      inp.addEventListener('change', function () { state.view = v.id; refresh(); });
      lab.appendChild(inp);
      lab.appendChild(el('span', 'gr-view-name', v.name));
      views.appendChild(lab);
    });
    panel.appendChild(views);
    panel.appendChild(el('p', 'gr-view-text'));
    var shades = D.groups.filter(function (g) { return g.mode === 'shade'; });
    if (shades.length) {
      panel.appendChild(el('h2', null, 'Shading'));
      shades.concat([{id: null, title: 'None', legend: []}]).forEach(function (g) {
        var row = el('div', 'gr-grp'), lab = el('label'), inp = el('input');
        inp.type = 'radio'; inp.name = 'gr-shade'; inp.checked = state.shade === g.id;
        inp.addEventListener('change', function () { state.shade = g.id; refresh(); });
        lab.appendChild(inp);
        lab.appendChild(el('span', 'gr-grp-title', g.title));
        row.appendChild(lab);
        if (g.id) {
          row.setAttribute('data-group', g.id);
          row.appendChild(legendList(g));
          if (g.note) { row.appendChild(el('p', 'gr-note', g.note)); }
          groupRows[g.id] = row;
        }
        panel.appendChild(row);
      });
    }
    panel.appendChild(el('h2', null, 'Layers'));
    D.groups.forEach(function (g) {
      if (g.mode === 'shade') { return; }
      var row = el('div', 'gr-grp'), lab = el('label'), inp = el('input');
      row.setAttribute('data-group', g.id);
      inp.type = 'checkbox'; inp.checked = !!state.on[g.id];
      inp.addEventListener('change', function () { state.on[g.id] = inp.checked; refresh(); });
      lab.appendChild(inp);
      lab.appendChild(el('span', 'gr-grp-title', g.title));
      row.appendChild(lab);
      row.appendChild(legendList(g));
      if (g.note) { row.appendChild(el('p', 'gr-note', g.note)); }
      groupRows[g.id] = row;
      panel.appendChild(row);
    });
  }
  function updatePanel() {
    var v = D.views.filter(function (x) { return x.id === state.view; })[0];
    panel.querySelector('.gr-view-text').textContent = v ? v.text : '';
    Object.keys(groupRows).forEach(function (gid) {
      var row = groupRows[gid], there = inView(gid), on = groupOn(gid);
      row.style.display = there ? '' : 'none';
      row.classList.toggle('gr-off', !on);
      row.querySelector('.gr-leg').style.display = there && on ? '' : 'none';
      var note = row.querySelector('.gr-note');
      if (note) { note.style.display = there && on ? '' : 'none'; }
    });
  }

  // ------------------------------------------------------------------ start: today's view, the study area filling the window
  document.getElementById('gr-title').textContent = D.title;
  document.title = D.title;
  document.getElementById('gr-caution-text').textContent = D.caution;
  D.groups.forEach(function (g) {
    if (g.mode === 'shade') { if (g.on && state.shade === null) { state.shade = g.id; } } else { state.on[g.id] = g.on; }
  });
  buildPanel();
  map.fitBounds(D.bounds, {padding: [14, 14], animate: false});
  refresh();
  window.geoReachMap = {map: map, data: D, state: state, refresh: refresh, pick: pick};
  requestAnimationFrame(function () {
    requestAnimationFrame(function () {
      window.geoReachMap.readyMs = performance.now();
      document.documentElement.setAttribute('data-gr-ready', '1');
    });
  });
})();
