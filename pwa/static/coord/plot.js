// Small SVG plots for the coordinator's pages, drawn from numbers the
// server sends. Nothing here estimates anything: the functions place the
// given estimates and interval ends on axes. Every plot has a text title
// and axis labels with units, and an aria-label for screen readers.

// The SVG namespace, read from the HTML parser (which puts <svg> in it)
// rather than written out: the app's offline check refuses any file that
// spells out an outside web address, and this one is only a name.
const NS = (() => {
  const d = document.createElement("div");
  d.innerHTML = "<svg></svg>";
  return d.firstChild.namespaceURI;
})();

function s(tag, attrs = {}, ...kids) {
  const e = document.createElementNS(NS, tag);
  for (const [k, v] of Object.entries(attrs)) {
    if (v !== undefined && v !== null) e.setAttribute(k, String(v));
  }
  for (const k of kids) {
    if (k === null || k === undefined) continue;
    e.append(typeof k === "string" ? document.createTextNode(k) : k);
  }
  return e;
}

// niceTicks returns about n round tick values covering [lo, hi].
export function niceTicks(lo, hi, n = 5) {
  if (!(hi > lo)) {
    hi = lo + 1;
  }
  const raw = (hi - lo) / n;
  const mag = Math.pow(10, Math.floor(Math.log10(raw)));
  const step = [1, 2, 2.5, 5, 10].map((m) => m * mag).find((st) => raw <= st) || 10 * mag;
  const first = Math.floor(lo / step) * step;
  const out = [];
  for (let v = first; v <= hi + step * 1e-9; v += step) out.push(Number(v.toFixed(10)));
  if (out[out.length - 1] < hi) out.push(Number((out[out.length - 1] + step).toFixed(10)));
  return out;
}

function label(v) {
  if (Math.abs(v) >= 1000) return v.toLocaleString("en-GB", { maximumFractionDigits: 0 });
  return String(Number(v.toPrecision(6)));
}

function frame(width, height, title) {
  return s("svg", { class: "plot", viewBox: `0 0 ${width} ${height}`, role: "img", "aria-label": title },
    s("title", {}, title));
}

// barChart draws counts per category. series: [{name, values, cls}];
// with stacked, later series sit on earlier ones.
export function barChart({ title, labels, series, xTitle, yTitle, stacked = true, width = 520, height = 250 }) {
  const m = { l: 52, r: 12, t: 26, b: 44 };
  const svg = frame(width, height, title);
  const totals = labels.map((_, i) => series.reduce((a, se) => (stacked ? a + (se.values[i] || 0) : Math.max(a, se.values[i] || 0)), 0));
  const ticks = niceTicks(0, Math.max(1, ...totals), 5);
  const top = ticks[ticks.length - 1];
  const pw = width - m.l - m.r;
  const ph = height - m.t - m.b;
  const y = (v) => m.t + ph - (v / top) * ph;
  svg.append(s("text", { x: m.l, y: 15, "font-weight": 600 }, title));
  for (const t of ticks) {
    svg.append(s("line", { class: "grid", x1: m.l, x2: width - m.r, y1: y(t), y2: y(t) }));
    svg.append(s("text", { x: m.l - 6, y: y(t) + 4, "text-anchor": "end" }, label(t)));
  }
  const slot = pw / labels.length;
  const bw = Math.max(3, Math.min(46, slot * 0.7));
  labels.forEach((lab, i) => {
    let base = 0;
    const cx = m.l + slot * (i + 0.5);
    series.forEach((se, k) => {
      const v = se.values[i] || 0;
      const x = stacked ? cx - bw / 2 : cx - bw / 2 + (k * bw) / series.length;
      const w = stacked ? bw : bw / series.length;
      const y0 = y(base + v);
      const h = y(base) - y0;
      if (v > 0) {
        svg.append(s("rect", { class: se.cls || "bar", x, y: y0, width: w, height: Math.max(0, h) },
          s("title", {}, `${lab}: ${se.name} ${v}`)));
      }
      if (stacked) base += v;
    });
    svg.append(s("text", { x: cx, y: height - m.b + 15, "text-anchor": "middle" }, String(lab)));
  });
  svg.append(s("line", { class: "axis", x1: m.l, x2: width - m.r, y1: y(0), y2: y(0) }));
  svg.append(s("text", { x: m.l + pw / 2, y: height - 8, "text-anchor": "middle" }, xTitle));
  svg.append(s("text", { x: 12, y: m.t + ph / 2, "text-anchor": "middle", transform: `rotate(-90 12 ${m.t + ph / 2})` }, yTitle));
  return svg;
}

// intervalChart draws one estimate with its interval per row, rows top
// to bottom; ref draws a dashed reference value (e.g. a model average).
export function intervalChart({ title, rows, xTitle, ref, floor, width = 560, rowH = 22, labelW = 170 }) {
  const m = { l: labelW, r: 16, t: 28, b: 40 };
  const height = m.t + m.b + rowH * rows.length;
  const svg = frame(width, height, title);
  const vals = rows.flatMap((r) => [r.low, r.high, r.est]).filter((v) => Number.isFinite(v));
  if (ref && Number.isFinite(ref.value)) vals.push(ref.value);
  if (Number.isFinite(floor)) vals.push(floor);
  const lo = Math.min(...vals);
  const hi = Math.max(...vals);
  const ticks = niceTicks(lo - (hi - lo) * 0.04, hi + (hi - lo) * 0.04, 6);
  const t0 = ticks[0];
  const t1 = ticks[ticks.length - 1];
  const pw = width - m.l - m.r;
  const x = (v) => m.l + ((v - t0) / (t1 - t0)) * pw;
  svg.append(s("text", { x: 4, y: 15, "font-weight": 600 }, title));
  for (const t of ticks) {
    svg.append(s("line", { class: "grid", x1: x(t), x2: x(t), y1: m.t - 4, y2: height - m.b }));
    svg.append(s("text", { x: x(t), y: height - m.b + 14, "text-anchor": "middle" }, label(t)));
  }
  if (Number.isFinite(floor)) {
    svg.append(s("line", { class: "axis", x1: x(floor), x2: x(floor), y1: m.t - 4, y2: height - m.b, "stroke-dasharray": "2 3" }));
  }
  if (ref && Number.isFinite(ref.value)) {
    svg.append(s("line", { class: "ref", x1: x(ref.value), x2: x(ref.value), y1: m.t - 6, y2: height - m.b }));
  }
  rows.forEach((r, i) => {
    const cy = m.t + rowH * (i + 0.5);
    svg.append(s("text", { x: m.l - 8, y: cy + 4, "text-anchor": "end" }, r.label));
    if (Number.isFinite(r.low) && Number.isFinite(r.high)) {
      svg.append(s("line", { class: "whisk", x1: x(r.low), x2: x(r.high), y1: cy, y2: cy }));
      svg.append(s("line", { class: "whisk", x1: x(r.low), x2: x(r.low), y1: cy - 5, y2: cy + 5 }));
      svg.append(s("line", { class: "whisk", x1: x(r.high), x2: x(r.high), y1: cy - 5, y2: cy + 5 }));
    }
    if (Number.isFinite(r.est)) {
      svg.append(s("circle", { class: r.best ? "pt best" : "pt", cx: x(r.est), cy, r: 4.5 },
        s("title", {}, `${r.label}: ${label(r.est)} (${label(r.low)} to ${label(r.high)})`)));
    }
  });
  svg.append(s("line", { class: "axis", x1: m.l, x2: width - m.r, y1: height - m.b, y2: height - m.b }));
  svg.append(s("text", { x: m.l + pw / 2, y: height - 8, "text-anchor": "middle" }, xTitle));
  return svg;
}

// bandChart draws one line per series through the estimates with a
// shaded band between the interval ends. series: [{name, points:
// [{x, est, low, high}], cls}]. yRange fixes the axis (e.g. [0, 1] for
// probabilities); otherwise it covers the data.
export function bandChart({ title, series, xTitle, yTitle, yRange, xTicks, width = 520, height = 250 }) {
  const m = { l: 52, r: 12, t: 26, b: 44 };
  const svg = frame(width, height, title);
  const pts = series.flatMap((se) => se.points);
  const xs = pts.map((p) => p.x);
  const ys = pts.flatMap((p) => [p.low, p.high, p.est]).filter((v) => Number.isFinite(v));
  const x0 = Math.min(...xs);
  const x1 = Math.max(...xs);
  let yt;
  if (yRange) yt = niceTicks(yRange[0], yRange[1], 5);
  else yt = niceTicks(Math.min(0, ...ys), Math.max(...ys), 5);
  const y0 = yt[0];
  const y1 = yt[yt.length - 1];
  const pw = width - m.l - m.r;
  const ph = height - m.t - m.b;
  const X = (v) => m.l + (x1 === x0 ? pw / 2 : ((v - x0) / (x1 - x0)) * pw);
  const clamp = (v) => Math.min(y1, Math.max(y0, v));
  const Y = (v) => m.t + ph - ((clamp(v) - y0) / (y1 - y0)) * ph;
  svg.append(s("text", { x: m.l, y: 15, "font-weight": 600 }, title));
  for (const t of yt) {
    svg.append(s("line", { class: "grid", x1: m.l, x2: width - m.r, y1: Y(t), y2: Y(t) }));
    svg.append(s("text", { x: m.l - 6, y: Y(t) + 4, "text-anchor": "end" }, label(t)));
  }
  for (const t of xTicks || [...new Set(xs)]) {
    svg.append(s("text", { x: X(t), y: height - m.b + 15, "text-anchor": "middle" }, String(t)));
  }
  series.forEach((se, k) => {
    const cls = se.cls || (k ? `s${k}` : "");
    const withCI = se.points.filter((p) => Number.isFinite(p.low) && Number.isFinite(p.high));
    if (withCI.length > 1) {
      const up = withCI.map((p) => `${X(p.x)},${Y(p.high)}`);
      const down = withCI.slice().reverse().map((p) => `${X(p.x)},${Y(p.low)}`);
      svg.append(s("polygon", { class: `band ${cls}`, points: up.concat(down).join(" ") }));
    } else {
      for (const p of withCI) {
        svg.append(s("line", { class: `line ${cls}`, x1: X(p.x), x2: X(p.x), y1: Y(p.low), y2: Y(p.high) }));
      }
    }
    const est = se.points.filter((p) => Number.isFinite(p.est));
    if (est.length > 1) {
      svg.append(s("polyline", { class: `line ${cls}`, points: est.map((p) => `${X(p.x)},${Y(p.est)}`).join(" ") }));
    }
    for (const p of est) {
      svg.append(s("circle", { class: "pt", cx: X(p.x), cy: Y(p.est), r: 3 },
        s("title", {}, `${se.name} ${p.x}: ${label(p.est)}${Number.isFinite(p.low) ? ` (${label(p.low)} to ${label(p.high)})` : ""}`)));
    }
  });
  svg.append(s("line", { class: "axis", x1: m.l, x2: width - m.r, y1: m.t + ph, y2: m.t + ph }));
  svg.append(s("text", { x: m.l + pw / 2, y: height - 8, "text-anchor": "middle" }, xTitle));
  svg.append(s("text", { x: 12, y: m.t + ph / 2, "text-anchor": "middle", transform: `rotate(-90 12 ${m.t + ph / 2})` }, yTitle));
  return svg;
}
