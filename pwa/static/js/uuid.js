// Time-ordered UUIDs (version 7, RFC 9562): 48 bits of Unix milliseconds,
// then random bits. The server keys records by these, so records made on a
// phone sort by when they were made and insert cheaply.

export function uuidv7(nowMs = Date.now(), random = defaultRandom) {
  const b = random(16);
  let ms = Math.floor(nowMs);
  for (let i = 5; i >= 0; i--) {
    b[i] = ms % 256;
    ms = Math.floor(ms / 256);
  }
  b[6] = (b[6] & 0x0f) | 0x70; // version 7
  b[8] = (b[8] & 0x3f) | 0x80; // RFC 9562 variant
  const hex = Array.from(b, (x) => x.toString(16).padStart(2, "0")).join("");
  return `${hex.slice(0, 8)}-${hex.slice(8, 12)}-${hex.slice(12, 16)}-${hex.slice(16, 20)}-${hex.slice(20)}`;
}

function defaultRandom(n) {
  const b = new Uint8Array(n);
  crypto.getRandomValues(b);
  return b;
}
