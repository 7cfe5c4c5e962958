// Small formatting helpers for the screens: distances to stations, times
// and a one-line description of an animal's last record.

// metresBetween is the haversine distance on a sphere of radius 6371 km,
// ample for choosing the nearest trap.
export function metresBetween(lat1, lon1, lat2, lon2) {
  const r = 6371000;
  const rad = Math.PI / 180;
  const dLat = (lat2 - lat1) * rad;
  const dLon = (lon2 - lon1) * rad;
  const a = Math.sin(dLat / 2) ** 2 + Math.cos(lat1 * rad) * Math.cos(lat2 * rad) * Math.sin(dLon / 2) ** 2;
  return 2 * r * Math.asin(Math.min(1, Math.sqrt(a)));
}

// nearestStations orders stations nearest first when a position is known
// (stations without coordinates last), otherwise by label.
export function nearestStations(stations, position) {
  const rows = stations.map((s) => ({
    station: s,
    metres: position && s.lat != null && s.lon != null ? metresBetween(position.lat, position.lon, s.lat, s.lon) : null,
  }));
  rows.sort((a, b) => {
    if (a.metres != null && b.metres != null) return a.metres - b.metres;
    if (a.metres != null) return -1;
    if (b.metres != null) return 1;
    return String(a.station.label || a.station.id).localeCompare(String(b.station.label || b.station.id), undefined, { numeric: true });
  });
  return rows;
}

export function formatWhen(iso) {
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return "unknown time";
  const today = new Date().toDateString() === d.toDateString();
  const time = d.toLocaleTimeString([], { hour: "2-digit", minute: "2-digit" });
  return today ? `today ${time}` : `${d.toLocaleDateString([], { day: "numeric", month: "short" })} ${time}`;
}

export function formatLast(c, study) {
  const parts = [];
  if (c.species) parts.push(c.species);
  if (c.sex && c.sex !== "unknown") parts.push(c.sex);
  if (c.age && c.age !== "unknown") parts.push(c.age);
  if (c.mass_g != null) parts.push(`${c.mass_g} g`);
  const st = study && (study.stations || []).find((s) => s.id === c.station_id);
  if (c.station_id) parts.push(`station ${st ? st.label || st.id : c.station_id}`);
  parts.push(formatWhen(c.captured_at));
  if (c.fate && c.fate !== "released") parts.push(c.fate);
  return parts.join(", ");
}
