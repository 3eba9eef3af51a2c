/* stressmap map page.
 *
 * Talks only to the service's documented /api/v1 endpoints (same origin). Draws on one Leaflet
 * canvas renderer: graticule, plate outline (boundary kinds as line styles), predicted SHmax ticks
 * (fixed pixel length, coloured by the regime index A-phi on the cividis table), measured
 * indicators as hollow ticks whose outline width grows with the misfit, and ensemble spread as
 * +-1 sigma fans. Ticks are re-requested for the visible part of the plate at a node spacing
 * that keeps about the same number of pixels between ticks at every zoom.
 *
 * The access token lives in a variable of this page only (never in storage, cookies or URLs).
 */
(function () {
  'use strict';

  const S = JSON.parse(document.getElementById('page-settings').textContent);
  const API = S.api;
  const TICK_PX = 18;          // predicted tick length, pixels
  const IND_TICK_PX = 24;      // indicator tick length, pixels
  const FAN_PX = 14;           // ensemble fan radius, pixels
  const SPACING_PX = 44;       // target distance between ticks, pixels
  const MIN_SPACING_KM = 2;    // never finer than this
  const MAX_NODES = 3000;      // grid nodes per tick request
  const KM_PER_DEG = 111.195;  // mean Earth radius 6371 km
  const POLL_LIMIT = 1200;     // job polls (x 0.5 s) before giving up

  const $ = (id) => document.getElementById(id);
  const state = {
    token: '',
    sources: [],
    source: null,
    groups: [],
    weights: {},
    plateBounds: null,
    field: null,           // last tick field: {features, key}
    ticks: [],             // drawn ticks: {lon, lat, azimuth, regimeIndex}
    indicators: null,      // last comparison FeatureCollection
    ensembles: {},         // source id -> [{id, label}]
    ensemble: null,        // shown ensemble FeatureCollection
    point: null,           // last queried point {lon, lat, properties}
    screen: null,          // last screening result
    firstDrawMs: null,
    fieldRequests: 0,
    busy: 0,
  };

  // ------------------------------------------------------------------ map and layers
  const renderer = L.canvas({padding: 0.3});
  const map = L.map('map', {renderer: renderer, preferCanvas: true, worldCopyJump: false,
    zoomSnap: 0.25, minZoom: 1, maxZoom: 12, attributionControl: Boolean(S.tile_url)});
  map.setView([0, 0], 2);
  if (S.tile_url) {
    L.tileLayer(S.tile_url, {attribution: S.tile_attribution || ''}).addTo(map);
  }
  L.control.scale({metric: true, imperial: false, maxWidth: 160}).addTo(map);
  const layers = {
    graticule: L.layerGroup().addTo(map),
    outline: L.layerGroup().addTo(map),
    spread: L.layerGroup(),
    ticks: L.layerGroup().addTo(map),
    indicators: L.layerGroup().addTo(map),
    point: L.layerGroup().addTo(map),
  };

  // ------------------------------------------------------------------ helpers
  function setStatus(text, isError) {
    const el = $('status');
    el.textContent = text || '';
    el.classList.toggle('error', Boolean(isError));
  }

  async function withBusy(label, fn) {
    state.busy += 1;
    setStatus(label + '...');
    try {
      const out = await fn();
      setStatus('');
      return out;
    } catch (err) {
      if (err.name === 'AbortError') return undefined;
      setStatus(label + ' failed: ' + err.message, true);
      return undefined;
    } finally {
      state.busy -= 1;
    }
  }

  async function api(path, opts) {
    opts = opts || {};
    const headers = {};
    if (state.token) headers.Authorization = 'Bearer ' + state.token;
    let body;
    if (opts.json !== undefined) {
      headers['Content-Type'] = 'application/json';
      body = JSON.stringify(opts.json);
    }
    const resp = await fetch(API + path, {method: opts.method || (body ? 'POST' : 'GET'),
      headers: headers, body: body, signal: opts.signal});
    if (!resp.ok) {
      let detail = resp.status + ' ' + resp.statusText;
      try {
        const p = await resp.json();
        detail = p.detail || p.title || detail;
        if (Array.isArray(p.errors) && p.errors.length) {
          detail += ' (' + p.errors.slice(0, 3).map((e) => (e.field ? e.field + ': ' : '') +
            (e.row ? 'row ' + e.row + ', ' : '') + e.message).join('; ') + ')';
        }
      } catch (e) { /* not a problem document */ }
      if (resp.status === 401) detail += ' - enter the access token below';
      const err = new Error(detail);
      err.status = resp.status;
      throw err;
    }
    if (opts.blob) return resp.blob();
    return resp.json();
  }

  const wrapLon = (lon) => ((((lon + 180) % 360) + 360) % 360) - 180;
  const fmt = (v, digits) => (v === null || v === undefined || Number.isNaN(v)) ? '-' :
    (typeof v === 'number' ? v.toFixed(digits) : String(v));

  function colourFor(regimeIndex) {
    const t = S.colour_table;
    const [lo, hi] = S.regime_index_range;
    const f = Math.min(Math.max((regimeIndex - lo) / (hi - lo), 0), 1);
    return t[Math.round(f * (t.length - 1))];
  }

  /** Ends of a centred tick of `px` pixels at (lat, lon) along `azimuthDeg` (Web Mercator is
   * conformal, so a screen direction is the true azimuth). Unrounded projection. */
  function tickEnds(lat, lon, azimuthDeg, px) {
    const z = map.getZoom();
    const p = map.project([lat, lon], z);
    const a = azimuthDeg * Math.PI / 180;
    const d = L.point(Math.sin(a) * px / 2, -Math.cos(a) * px / 2);
    return [map.unproject(p.subtract(d), z), map.unproject(p.add(d), z)];
  }

  function weightsObject() {
    const out = {};
    for (const g of state.groups) out[g] = state.weights[g];
    return out;
  }
  const weightsText = () => state.groups.map((g) => g + ':' + state.weights[g]).join(',');
  const weightsAreDefault = () => state.groups.every((g) => state.weights[g] === 1);

  // ------------------------------------------------------------------ graticule
  function drawGraticule() {
    layers.graticule.clearLayers();
    const z = map.getZoom();
    const step = z < 3 ? 30 : z < 4.5 ? 10 : z < 6 ? 5 : z < 8 ? 2 : 1;
    const b = map.getBounds();
    const style = {color: '#ffffff', weight: 1, opacity: 0.7, interactive: false};
    const w = Math.floor(b.getWest() / step) * step, e = Math.ceil(b.getEast() / step) * step;
    const s = Math.max(Math.floor(b.getSouth() / step) * step, -85);
    const n = Math.min(Math.ceil(b.getNorth() / step) * step, 85);
    for (let lon = w; lon <= e; lon += step) {
      layers.graticule.addLayer(L.polyline([[s, lon], [n, lon]], style));
    }
    for (let lat = s; lat <= n; lat += step) {
      const pts = [];
      for (let lon = w; lon <= e; lon += Math.max(step / 4, 0.5)) pts.push([lat, lon]);
      layers.graticule.addLayer(L.polyline(pts, style));
    }
    // degree labels: meridians along the top edge of the view, parallels along the left edge,
    // kept clear of the zoom buttons (top left), the scale bar (bottom left) and the edges
    const size = map.getSize();
    const topLat = map.containerPointToLatLng([0, 4]).lat;
    const leftLon = map.containerPointToLatLng([6, 0]).lng;
    for (let lon = w; lon <= e; lon += step) {
      const x = map.latLngToContainerPoint([topLat, lon]).x;
      if (x > 70 && x < size.x - 30) addGraticuleLabel([topLat, lon], lonText(lon), 'top');
    }
    for (let lat = s; lat <= n; lat += step) {
      const y = map.latLngToContainerPoint([lat, leftLon]).y;
      if (y > 90 && y < size.y - 45) addGraticuleLabel([lat, leftLon], latText(lat), 'left');
    }
  }

  function lonText(lon) {
    const x = ((lon + 180) % 360 + 360) % 360 - 180;  // wrapped to [-180, 180)
    return x === 0 || x === -180 ? Math.abs(x) + '\u00b0' : Math.abs(x) + '\u00b0' + (x < 0 ? 'W' : 'E');
  }
  const latText = (lat) => (lat === 0 ? '0\u00b0' : Math.abs(lat) + '\u00b0' + (lat < 0 ? 'S' : 'N'));

  function addGraticuleLabel(latlng, text, align) {
    const icon = L.divIcon({className: 'grat-label', html: '', iconSize: null,
      iconAnchor: align === 'top' ? [14, 0] : [0, 7]});
    const m = L.marker(latlng, {icon: icon, interactive: false, keyboard: false});
    m.on('add', () => { m.getElement().textContent = text; });
    layers.graticule.addLayer(m);
  }

  // ------------------------------------------------------------------ legend
  let legendOpen = true;
  function drawLegend(kinds) {
    const el = $('legend');
    el.textContent = '';
    // a disclosure, so that on a small screen the legend can be folded away from the plate
    const box = document.createElement('details');
    box.open = legendOpen;
    box.addEventListener('toggle', () => { legendOpen = box.open; });
    const summary = document.createElement('summary');
    summary.textContent = 'Legend';
    box.appendChild(summary);
    el.appendChild(box);
    const h = document.createElement('h3');
    h.textContent = 'SHmax tick colour: regime index A-phi';
    box.appendChild(h);
    const bar = document.createElement('canvas');
    bar.width = 200; bar.height = 12;
    const ctx = bar.getContext('2d');
    S.colour_table.forEach((c, i) => {
      ctx.fillStyle = c;
      ctx.fillRect(Math.floor(i * 200 / S.colour_table.length), 0, Math.ceil(200 / S.colour_table.length) + 1, 12);
    });
    bar.setAttribute('role', 'img');
    bar.setAttribute('aria-label', 'colour scale from 0 (radial extension) to 3 (radial compression)');
    box.appendChild(bar);
    const scale = document.createElement('div');
    scale.className = 'scale';
    for (const t of S.regime_ticks) {
      const span = document.createElement('span');
      span.textContent = t.label;
      scale.appendChild(span);
    }
    box.appendChild(scale);
    const h2 = document.createElement('h3');
    h2.textContent = 'Plate boundary';
    box.appendChild(h2);
    for (const kind of kinds) {
      const st = S.boundary_styles[kind] || {width_px: 1.3, dash_px: [], colour: '#444444', label: kind};
      const row = document.createElement('div');
      row.className = 'kind';
      const c = document.createElement('canvas');
      c.width = 44; c.height = 10;
      const x = c.getContext('2d');
      x.strokeStyle = st.colour; x.lineWidth = st.width_px; x.setLineDash(st.dash_px);
      x.beginPath(); x.moveTo(2, 5); x.lineTo(42, 5); x.stroke();
      row.appendChild(c);
      const label = document.createElement('span');
      label.textContent = st.label;
      row.appendChild(label);
      box.appendChild(row);
    }
    const extra = document.createElement('p');
    extra.className = 'hint';
    extra.textContent = 'Hollow ticks: stress indicators (outline grows with |misfit|). ' +
      'Fans: ensemble 1-sigma spread of SHmax.';
    box.appendChild(extra);
  }

  // ------------------------------------------------------------------ sources (models, networks)
  function modelSources(models) {
    return (models.models || []).map((m) => ({kind: 'model', id: m.id, name: m.name,
      status: m.status, base: '/models/' + m.id}));
  }

  /** Networks appear when the service offers them (its OpenAPI document lists /networks). */
  async function networkSources() {
    const doc = await api('/openapi.json');
    if (!(doc.paths && doc.paths['/networks'] && doc.paths['/networks'].get)) return [];
    const nets = await api('/networks');
    return (nets.networks || []).map((n) => ({kind: 'network', id: n.id, name: n.name || n.id,
      status: n.status, base: '/networks/' + n.id}));
  }

  async function loadSources() {
    const params = new URLSearchParams(window.location.search);
    const noNetworks = (err) => {
      setStatus('networks could not be listed: ' + err.message, true);
      return [];
    };
    const models = modelSources(await api('/models'));
    if (params.get('network') || !models.some((s) => s.status === 'ready')) {
      fillSourcePicker(models.concat(await networkSources().catch(noNetworks)), params);
      return;
    }
    // draw the first model at once; networks join the picker afterwards
    await fillSourcePicker(models, params);
    const nets = await networkSources().catch(noNetworks);
    if (nets.length) fillSourcePicker(models.concat(nets), params, true);
  }

  function fillSourcePicker(out, params, keepSelection) {
    state.sources = out;
    const sel = $('source-select');
    sel.textContent = '';
    for (const kind of ['model', 'network']) {
      const items = out.filter((s) => s.kind === kind);
      if (!items.length) continue;
      const grp = document.createElement('optgroup');
      grp.label = kind === 'model' ? 'Models' : 'Networks';
      for (const s of items) {
        const o = document.createElement('option');
        o.value = s.kind + ':' + s.id;
        o.textContent = s.name + (s.status === 'ready' ? '' : ' (' + s.status + ')');
        o.disabled = s.status !== 'ready';
        grp.appendChild(o);
      }
      sel.appendChild(grp);
    }
    if (keepSelection && state.source) {
      sel.value = state.source.kind + ':' + state.source.id;
      return;
    }
    const wanted = params.get('network') ? 'network:' + params.get('network') :
      params.get('model') ? 'model:' + params.get('model') : null;
    const ready = out.filter((s) => s.status === 'ready');
    const first = ready.find((s) => s.kind + ':' + s.id === wanted) || ready[0];
    if (!first) {
      setStatus('no ready model yet: build one with POST /api/v1/models', true);
      return;
    }
    sel.value = first.kind + ':' + first.id;
    return selectSource(first).catch((err) => setStatus('Loading ' + first.name + ' failed: ' +
      err.message, true));
  }

  function groupsOf(meta) {
    const summary = meta.summary || meta;
    const groups = summary.groups || meta.groups || [];
    return groups.map((g) => (typeof g === 'string' ? g : g.name));
  }

  async function selectSource(src) {
    state.source = src;
    state.field = null; state.indicators = null; state.ensemble = null; state.point = null;
    for (const k of ['outline', 'ticks', 'indicators', 'spread', 'point']) layers[k].clearLayers();
    $('point-result').tBodies[0].textContent = '';
    $('ind-info').textContent = '';
    const [meta, boundary] = await Promise.all([api(src.base), api(src.base + '/boundary')]);
    state.groups = groupsOf(meta);
    state.weights = {};
    for (const g of state.groups) state.weights[g] = 1;
    buildWeightSliders();
    refreshEnsembleChoices();
    const mesh = (meta.summary || {}).mesh || {};
    $('source-info').textContent = (src.kind === 'model' ? 'Model ' : 'Network ') + src.id +
      (meta.build_time ? ', built ' + meta.build_time : '') +
      (mesh.nodes ? ', ' + mesh.nodes + ' mesh nodes' : '');
    const kinds = drawOutline(boundary);
    drawLegend(kinds);
    map.fitBounds(state.plateBounds, {animate: false, padding: [20, 20]});
    drawGraticule();
    await refreshTicks();
  }

  function drawOutline(fc) {
    const kinds = [];
    let south = 90, north = -90, west = 540, east = -540;
    const ring = [];
    for (const f of fc.features || []) {
      const kind = f.properties.kind;
      if (!kinds.includes(kind)) kinds.push(kind);
      const st = S.boundary_styles[kind] || {width_px: 1.3, dash_px: [], colour: '#444444'};
      // unwrap longitudes so a segment crossing the antimeridian stays continuous
      const latlngs = [];
      let prev = null;
      for (const [lon0, lat] of f.geometry.coordinates) {
        let lon = lon0;
        if (prev !== null) lon += 360 * Math.round((prev - lon) / 360);
        prev = lon;
        latlngs.push([lat, lon]);
        south = Math.min(south, lat); north = Math.max(north, lat);
        west = Math.min(west, lon); east = Math.max(east, lon);
      }
      ring.push(latlngs);
      layers.outline.addLayer(L.polyline(latlngs, {color: st.colour, weight: st.width_px,
        dashArray: st.dash_px.length ? st.dash_px.join(' ') : null, lineCap: 'butt',
        interactive: true}).bindTooltip(f.properties.name ?
        f.properties.name + ' (' + kind + ')' : kind, {sticky: true}));
    }
    // a light fill when the segments chain into one ring in order (the stored ring does)
    const flat = [].concat(...ring);
    const chained = ring.every((seg, i) => i === 0 || (
      Math.abs(seg[0][0] - ring[i - 1].slice(-1)[0][0]) < 0.01 &&
      Math.abs(seg[0][1] - ring[i - 1].slice(-1)[0][1]) < 0.01));
    if (chained && flat.length > 2) {
      layers.outline.addLayer(L.polygon(flat, {stroke: false, fillColor: '#eef0f2',
        fillOpacity: 0.85, interactive: false}));
      layers.outline.getLayers().slice(-1)[0].bringToBack();
    }
    state.plateBounds = L.latLngBounds([south, west], [north, east]);
    return kinds;
  }

  // ------------------------------------------------------------------ predicted ticks
  function tickRequest() {
    const b = map.getBounds().pad(0.05), pb = state.plateBounds;
    const w = Math.max(b.getWest(), pb.getWest()), e = Math.min(b.getEast(), pb.getEast());
    const s = Math.max(b.getSouth(), pb.getSouth()), n = Math.min(b.getNorth(), pb.getNorth());
    if (!(w < e && s < n)) return null;
    const c = map.getCenter();
    const mPerPx = 40075016.686 * Math.cos(c.lat * Math.PI / 180) / (256 * Math.pow(2, map.getZoom()));
    let spacing = Math.max(SPACING_PX * mPerPx / 1000, MIN_SPACING_KM);
    const midLat = 0.5 * (s + n) * Math.PI / 180;
    const nodes = ((e - w) * KM_PER_DEG * Math.cos(midLat) / spacing + 1) *
      ((n - s) * KM_PER_DEG / spacing + 1);
    if (nodes > MAX_NODES) spacing *= Math.sqrt(nodes / MAX_NODES);
    spacing = Number(spacing.toPrecision(3));
    // snap the corner to the node lattice so panning keeps ticks in place
    const step = spacing / KM_PER_DEG;
    const snap = (v) => Math.floor(v / step) * step;
    const bbox = [snap(w), snap(s), e, n].map((v) => Number(v.toFixed(4)));
    return {bbox: bbox, spacing: spacing};
  }

  let fieldAbort = null, fieldKey = null;
  async function refreshTicks() {
    if (!state.source || !state.plateBounds) return;
    const req = tickRequest();
    if (!req) { layers.ticks.clearLayers(); state.ticks = []; return; }
    const key = state.source.id + '|' + req.bbox.join(',') + '|' + req.spacing + '|' + weightsText();
    if (state.field && state.field.key === key) { drawTicks(); return; }
    if (fieldAbort && fieldKey === key) return;  // the same request is on its way
    if (fieldAbort) fieldAbort.abort();
    fieldKey = key;
    fieldAbort = new AbortController();
    const params = new URLSearchParams({bbox: req.bbox.join(','), spacing_km: String(req.spacing),
      format: 'geojson'});
    if (!weightsAreDefault()) params.set('weights', weightsText());
    await withBusy('Loading stress ticks', async () => {
      const fc = await api(state.source.base + '/field?' + params.toString(),
        {signal: fieldAbort.signal});
      state.fieldRequests += 1;
      state.field = {features: fc.features, key: key, spacing: req.spacing};
      drawTicks();
    });
    if (fieldKey === key) { fieldAbort = null; fieldKey = null; }
  }

  function drawTicks() {
    layers.ticks.clearLayers();
    state.ticks = [];
    if (!state.field) return;
    for (const f of state.field.features) {
      const p = f.properties;
      if (!p.inside || p.shmax_azimuth_deg === null) continue;
      const [lon, lat] = f.geometry.coordinates;
      const ends = tickEnds(lat, lon, p.shmax_azimuth_deg, TICK_PX);
      layers.ticks.addLayer(L.polyline(ends, {color: '#15191e', weight: 5, opacity: 0.9,
        interactive: false, lineCap: 'butt'}));
      layers.ticks.addLayer(L.polyline(ends, {color: colourFor(p.regime_index), weight: 3,
        opacity: 1, interactive: false, lineCap: 'butt'}));
      state.ticks.push({lon: lon, lat: lat, azimuth: p.shmax_azimuth_deg,
        regimeIndex: p.regime_index, ends: ends});
    }
    $('tick-info').textContent = state.ticks.length + ' ticks, node spacing ' +
      state.field.spacing + ' km';
    if (state.firstDrawMs === null && state.ticks.length) {
      requestAnimationFrame(() => {
        state.firstDrawMs = performance.now();
        document.body.dataset.firstDraw = 'done';
      });
    }
  }

  // ------------------------------------------------------------------ weights
  function buildWeightSliders() {
    const box = $('weights');
    box.textContent = '';
    for (const g of state.groups) {
      const row = document.createElement('div');
      row.className = 'weight';
      const id = 'weight-' + g.replace(/[^A-Za-z0-9_-]/g, '_');
      const label = document.createElement('label');
      label.htmlFor = id;
      label.textContent = g + ' (x)';
      const input = document.createElement('input');
      Object.assign(input, {type: 'range', id: id, min: '0', max: '3', step: '0.05', value: '1'});
      input.dataset.group = g;
      const out = document.createElement('output');
      out.htmlFor = id;
      out.value = '1.00';
      input.addEventListener('input', () => {
        out.value = Number(input.value).toFixed(2);
        setWeight(g, Number(input.value), false);
      });
      input.addEventListener('change', () => setWeight(g, Number(input.value), true));
      row.append(label, input, out);
      box.appendChild(row);
    }
  }

  let weightTimer = null;
  function setWeight(group, value, now) {
    state.weights[group] = value;
    clearTimeout(weightTimer);
    weightTimer = setTimeout(weightsChanged, now ? 0 : 150);
  }

  async function weightsChanged() {
    await refreshTicks();
    const jobs = [];
    if (state.point) jobs.push(queryPoint(state.point.lon, state.point.lat));
    if (state.indicators) jobs.push(runCompare(state.indicatorsBody));
    await Promise.all(jobs);
  }

  $('weights-reset').addEventListener('click', () => {
    for (const input of $('weights').querySelectorAll('input[type=range]')) {
      input.value = '1';
      input.nextSibling.value = '1.00';
      state.weights[input.dataset.group] = 1;
    }
    weightsChanged();
  });

  // ------------------------------------------------------------------ point query
  const POINT_ROWS = [
    ['s_hmax_mpa', 'SHmax (MPa)', 2], ['s_hmin_mpa', 'Shmin (MPa)', 2],
    ['shmax_azimuth_deg', 'SHmax azimuth (deg)', 1], ['regime', 'Regime', null],
    ['regime_index', 'Regime index A-phi (-)', 3], ['shape_ratio', 'Shape ratio (-)', 3],
    ['max_shear_mpa', 'Max shear (MPa)', 2],
  ];

  function fillTable(table, rows) {
    const body = table.tBodies[0];
    body.textContent = '';
    for (const [name, label, value, digits] of rows) {
      const tr = document.createElement('tr');
      const th = document.createElement('th');
      th.scope = 'row';
      th.textContent = label;
      const td = document.createElement('td');
      td.dataset.field = name;
      td.dataset.value = value === null || value === undefined ? '' : String(value);
      td.textContent = digits === null ? (value || '-') : fmt(value, digits);
      tr.append(th, td);
      body.appendChild(tr);
    }
  }

  async function queryPoint(lon, lat) {
    if (!state.source) return;
    lon = wrapLon(lon);
    $('point-lon').value = lon.toFixed(4);
    $('point-lat').value = lat.toFixed(4);
    layers.point.clearLayers();
    layers.point.addLayer(L.circleMarker([lat, lon], {radius: 6, color: '#d1495b', weight: 2,
      fill: false, interactive: false}));
    await withBusy('Querying the point', async () => {
      const body = {points: [[lon, lat]], format: 'geojson'};
      if (!weightsAreDefault()) body.weights = weightsObject();
      const fc = await api(state.source.base + '/predict', {json: body});
      const p = fc.features[0].properties;
      state.point = {lon: lon, lat: lat, properties: p};
      const rows = [['lon', 'Longitude (deg)', lon, 4], ['lat', 'Latitude (deg)', lat, 4]];
      if (!p.inside) {
        rows.push(['inside', 'Inside the plate', 'no (nothing predicted)', null]);
      } else {
        for (const [name, label, digits] of POINT_ROWS) rows.push([name, label, p[name], digits]);
      }
      fillTable($('point-result'), rows);
    });
  }

  map.on('click', (e) => queryPoint(e.latlng.lng, e.latlng.lat));
  $('point-go').addEventListener('click', () => {
    const lon = Number($('point-lon').value), lat = Number($('point-lat').value);
    if ($('point-lon').value === '' || $('point-lat').value === '' || !Number.isFinite(lon) ||
        !Number.isFinite(lat) || Math.abs(lat) > 90 || Math.abs(lon) > 180) {
      setStatus('Type a longitude in [-180, 180] and a latitude in [-90, 90] (degrees)', true);
      return;
    }
    queryPoint(lon, lat);
  });

  // ------------------------------------------------------------------ indicators
  function indicatorsBody(text, name) {
    const t = text.trimStart();
    if (/\.(geo)?json$/i.test(name || '') || t.startsWith('{')) {
      let doc;
      try { doc = JSON.parse(t); } catch (e) { throw new Error(name + ' is not valid JSON: ' + e.message); }
      return {indicators: doc};
    }
    return {indicators_csv: text};
  }

  async function runCompare(body) {
    if (!state.source || !body) return;
    await withBusy('Comparing indicators', async () => {
      const req = Object.assign({format: 'geojson'}, body);
      if (!weightsAreDefault()) req.weights = weightsObject();
      const fc = await api(state.source.base + '/compare', {json: req});
      state.indicators = fc;
      state.indicatorsBody = body;
      drawIndicators();
      const o = (fc.summary || {}).overall || {};
      const skipped = (fc.skipped || []).length;
      $('ind-info').textContent = (fc.features || []).length + ' indicators; weighted mean |misfit| ' +
        fmt(o.weighted_mean_abs_misfit_deg, 1) + ' deg; within 30 deg: ' +
        fmt(100 * o.fraction_within_30_deg, 0) + ' %' + (skipped ? '; ' + skipped + ' rows skipped' : '');
    });
  }

  function drawIndicators() {
    layers.indicators.clearLayers();
    const fc = state.indicators;
    if (!fc) return;
    for (const f of fc.features || []) {
      const p = f.properties;
      if (p.shmax_azimuth_deg === null || p.shmax_azimuth_deg === undefined || !f.geometry) continue;
      const [lon, lat] = f.geometry.coordinates;
      const ends = tickEnds(lat, lon, p.shmax_azimuth_deg, IND_TICK_PX);
      const misfit = p.abs_misfit_deg;
      const outline = 0.6 + (Number.isFinite(misfit) ? Math.min(misfit, 90) / 30 : 0);
      const tip = (p.id || '') + ' ' + (p.type || '') + ': observed ' + fmt(p.shmax_azimuth_deg, 0) +
        ' deg, predicted ' + fmt(p.predicted_shmax_azimuth_deg, 0) + ' deg, misfit ' +
        fmt(p.misfit_deg, 1) + ' deg';
      layers.indicators.addLayer(L.polyline(ends, {color: '#000000', weight: 3 + 2 * outline,
        lineCap: 'butt', interactive: true}).bindTooltip(tip, {sticky: true}));
      layers.indicators.addLayer(L.polyline(ends, {color: '#ffffff', weight: 3, lineCap: 'butt',
        interactive: false}));
    }
  }

  $('ind-file').addEventListener('change', async (ev) => {
    const file = ev.target.files[0];
    if (!file) return;
    $('ind-sample').value = '';
    try {
      const text = await file.text();
      await runCompare(indicatorsBody(text, file.name));
    } catch (err) {
      setStatus('Indicator file: ' + err.message, true);
    }
  });
  for (const s of S.samples || []) {
    const o = document.createElement('option');
    o.value = s.url;
    o.textContent = s.name;
    $('ind-sample').appendChild(o);
  }
  $('ind-sample').addEventListener('change', async (ev) => {
    const url = ev.target.value;
    if (!url) return;
    const resp = await fetch(url);
    if (!resp.ok) { setStatus('could not read ' + url, true); return; }
    await runCompare(indicatorsBody(await resp.text(), url));
  });

  // ------------------------------------------------------------------ ensemble spread
  function refreshEnsembleChoices() {
    const sel = $('ens-select');
    sel.textContent = '';
    const none = document.createElement('option');
    none.value = '';
    none.textContent = '(none)';
    sel.appendChild(none);
    for (const e of (state.source && state.ensembles[state.source.id]) || []) {
      const o = document.createElement('option');
      o.value = e.id;
      o.textContent = e.label;
      sel.appendChild(o);
    }
    $('layer-spread').disabled = !state.ensemble;
    if (!state.ensemble) $('layer-spread').checked = false;
  }

  async function showEnsemble(id) {
    if (!id) {
      state.ensemble = null;
      layers.spread.clearLayers();
      $('layer-spread').checked = false;
      map.removeLayer(layers.spread);
      refreshEnsembleChoices();
      return;
    }
    await withBusy('Loading the ensemble', async () => {
      const fc = await api(state.source.base + '/ensembles/' + encodeURIComponent(id) + '?format=geojson');
      state.ensemble = fc;
      const known = state.ensembles[state.source.id] = state.ensembles[state.source.id] || [];
      if (!known.some((e) => e.id === id)) known.push({id: id, label: id.slice(0, 8) + ' (' + (fc.members || '?') + ' members)'});
      refreshEnsembleChoices();
      $('ens-select').value = id;
      $('layer-spread').checked = true;
      map.addLayer(layers.spread);
      drawSpread();
      const stds = fc.features.map((f) => f.properties.shmax_std_deg).filter(Number.isFinite);
      const mean = stds.reduce((a, b) => a + b, 0) / Math.max(stds.length, 1);
      $('ens-info').textContent = 'Ensemble ' + id.slice(0, 8) + ': ' + stds.length +
        ' nodes, mean 1-sigma SHmax spread ' + mean.toFixed(1) + ' deg';
    });
  }

  function drawSpread() {
    layers.spread.clearLayers();
    if (!state.ensemble) return;
    const z = map.getZoom();
    for (const f of state.ensemble.features) {
      const p = f.properties;
      if (!p.inside || !Number.isFinite(p.shmax_std_deg) || !Number.isFinite(p.shmax_azimuth_deg)) continue;
      const [lon, lat] = f.geometry.coordinates;
      const c = map.project([lat, lon], z);
      const sigma = Math.min(p.shmax_std_deg, 90);
      for (const base of [p.shmax_azimuth_deg, p.shmax_azimuth_deg + 180]) {
        const pts = [map.unproject(c, z)];
        for (let k = 0; k <= 8; k += 1) {
          const a = (base - sigma + 2 * sigma * k / 8) * Math.PI / 180;
          pts.push(map.unproject(c.add(L.point(Math.sin(a) * FAN_PX, -Math.cos(a) * FAN_PX)), z));
        }
        layers.spread.addLayer(L.polygon(pts, {stroke: false, fillColor: '#7b3294',
          fillOpacity: 0.35, interactive: false}));
      }
    }
  }

  $('ens-select').addEventListener('change', (ev) => showEnsemble(ev.target.value));
  $('ens-load').addEventListener('click', () => {
    const id = $('ens-id').value.trim();
    if (!/^[0-9a-f]{32}$/.test(id)) { setStatus('An ensemble id is 32 hexadecimal characters', true); return; }
    showEnsemble(id);
  });
  $('ens-run').addEventListener('click', async () => {
    if (!state.source) return;
    const req = tickRequest();
    const members = Math.round(Number($('ens-members').value));
    const low = Number($('ens-low').value), high = Number($('ens-high').value);
    if (!req || !(members >= 10 && members <= 10000)) {
      setStatus('Zoom to the plate and give 10 to 10000 members', true);
      return;
    }
    if (!(low >= 0 && high > low)) {
      setStatus('The weight range needs 0 <= lowest < highest', true);
      return;
    }
    const distributions = {};
    for (const g of state.groups) {
      distributions[g] = {distribution: 'uniform', low: low * state.weights[g],
        high: Math.max(high * state.weights[g], low * state.weights[g] + 1e-6)};
    }
    const id = await withBusy('Computing the ensemble', async () => {
      const job = await api(state.source.base + '/ensembles', {json: {
        region: {bbox: req.bbox}, spacing_km: Number((req.spacing * 1.5).toPrecision(3)),
        members: members, seed: 1, distributions: distributions}});
      for (let i = 0; i < POLL_LIMIT; i += 1) {
        const j = await api('/jobs/' + job.id);
        if (j.status === 'done') return job.ensemble_id || job.id;
        if (j.status === 'failed') throw new Error((j.error || {}).reason || 'the ensemble failed');
        setStatus('Computing the ensemble... ' + Math.round(100 * (j.progress || 0)) + ' %');
        await new Promise((r) => setTimeout(r, 500));
      }
      throw new Error('still running; load it later by its id ' + job.id);
    });
    if (id) { $('ens-id').value = id; await showEnsemble(id); }
  });

  // ------------------------------------------------------------------ site screening
  let figureUrls = [];
  $('scr-go').addEventListener('click', async () => {
    if (!state.point) { setStatus('Query a point first (click the map): it is the site', true); return; }
    const depth = Number($('scr-depth').value), mu = Number($('scr-friction').value);
    const pore = Number($('scr-pore').value);
    if (!(depth > 0) || !(mu > 0) || !(pore >= 0)) {
      setStatus('Depth (km) and friction must be positive, the pore-pressure gradient (MPa/km) not negative', true);
      return;
    }
    const planes = $('scr-planes').value.split(',').map((s) => s.trim()).filter(Boolean);
    const body = {site: [state.point.lon, state.point.lat], depth_km: depth, friction: mu,
      pore_gradient_mpa_km: pore, planes: planes};
    if (state.source.kind === 'model') body.model_id = state.source.id;
    if (!weightsAreDefault()) body.weights = weightsObject();
    await withBusy('Screening the site', async () => {
      const [res, mohr, poly] = await Promise.all([
        api('/screen', {json: body}),
        api('/screen', {json: Object.assign({format: 'png', picture: 'mohr'}, body), blob: true}),
        api('/screen', {json: Object.assign({format: 'png', picture: 'polygon'}, body), blob: true}),
      ]);
      state.screen = res;
      const rows = [
        ['sv_mpa', 'Sv (MPa)', res.sv_mpa, 1], ['pp_mpa', 'Pore pressure (MPa)', res.pp_mpa, 1],
        ['shmax_mpa', 'SHmax (MPa)', res.shmax_mpa, 1], ['shmin_mpa', 'Shmin (MPa)', res.shmin_mpa, 1],
        ['shmax_azimuth_deg', 'SHmax azimuth (deg)', res.shmax_azimuth_deg, 1],
        ['regime', 'Regime', res.regime, null], ['shape_ratio', 'Shape ratio (-)', res.shape_ratio, 3],
      ];
      for (const pl of res.planes || []) {
        rows.push(['slip_tendency', (pl.name || 'plane') + ': slip tendency (-)', pl.slip_tendency, 2]);
        rows.push(['pore_pressure_margin_mpa', (pl.name || 'plane') + ': pore-pressure margin (MPa)',
          pl.pore_pressure_margin_mpa, 1]);
      }
      fillTable($('scr-result'), rows);
      figureUrls.forEach((u) => URL.revokeObjectURL(u));
      figureUrls = [URL.createObjectURL(mohr), URL.createObjectURL(poly)];
      const fig = $('scr-figs');
      fig.textContent = '';
      [['Mohr diagram of the site', figureUrls[0]], ['Stress polygon of the site', figureUrls[1]]]
        .forEach(([alt, url]) => {
          const link = document.createElement('a');
          link.href = url;
          link.target = '_blank';
          link.title = alt + ' (full size)';
          const img = document.createElement('img');
          img.alt = alt;
          img.src = url;
          link.appendChild(img);
          fig.appendChild(link);
        });
    });
  });

  // ------------------------------------------------------------------ layer toggles, token
  const toggles = {'layer-ticks': 'ticks', 'layer-outline': 'outline', 'layer-graticule': 'graticule',
    'layer-indicators': 'indicators', 'layer-spread': 'spread'};
  for (const [id, name] of Object.entries(toggles)) {
    $(id).addEventListener('change', (ev) => {
      if (ev.target.checked) map.addLayer(layers[name]); else map.removeLayer(layers[name]);
    });
  }
  $('token').addEventListener('input', (ev) => { state.token = ev.target.value.trim(); });
  // where reads need the token too, nothing could load before it was typed: try again
  $('token').addEventListener('change', () => {
    if (!state.source) withBusy('Loading models', loadSources);
  });
  $('source-select').addEventListener('change', (ev) => {
    const src = state.sources.find((s) => s.kind + ':' + s.id === ev.target.value);
    if (src) withBusy('Loading ' + src.name, () => selectSource(src));
  });

  let moveTimer = null;
  map.on('zoomend', () => { drawTicks(); drawIndicators(); drawSpread(); });
  map.on('moveend', () => {
    drawGraticule();
    clearTimeout(moveTimer);
    moveTimer = setTimeout(refreshTicks, 120);
  });

  $('caution').textContent = S.caution;
  drawLegend(Object.keys(S.boundary_styles));

  // for people and tests: the drawn state, read-only use
  window.stressmapPage = {map: map, state: state, layers: layers, queryPoint: queryPoint};

  withBusy('Loading models', loadSources);
})();
