// Service worker: keeps the app shell so the app opens with no network.
// The server replaces BUILD_VERSION with a hash of the embedded files, so a
// new tagtally build gets a new cache and the old one is removed.
// Records never pass through here: they live in IndexedDB, and API
// requests always go to the network.

const VERSION = "BUILD_VERSION";
const CACHE = `tagtally-shell-${VERSION}`;
const SHELL = [
  "/",
  "/app.css",
  "/js/main.js",
  "/js/db.js",
  "/js/sync.js",
  "/js/outbox.js",
  "/js/tags.js",
  "/js/uuid.js",
  "/js/revision.js",
  "/js/view.js",
  "/js/enrol.js",
  "/manifest.webmanifest",
  "/icons/icon.svg",
  "/icons/icon-192.png",
  "/icons/icon-512.png",
];

self.addEventListener("install", (event) => {
  event.waitUntil(
    caches.open(CACHE).then((c) => c.addAll(SHELL.map((u) => new Request(u, { cache: "reload" })))).then(() => self.skipWaiting()),
  );
});

self.addEventListener("activate", (event) => {
  event.waitUntil(
    caches
      .keys()
      .then((keys) => Promise.all(keys.filter((k) => k.startsWith("tagtally-shell-") && k !== CACHE).map((k) => caches.delete(k))))
      .then(() => self.clients.claim()),
  );
});

// A page that loaded while this worker was activating missed the claim
// above; it asks again (main.js, showOfflineState).
self.addEventListener("message", (event) => {
  if (event.data === "claim") event.waitUntil(self.clients.claim());
});

self.addEventListener("fetch", (event) => {
  const req = event.request;
  if (req.method !== "GET") return;
  const url = new URL(req.url);
  if (url.origin !== self.location.origin) return;
  if (url.pathname.startsWith("/api/") || url.pathname === "/healthz" || url.pathname.startsWith("/setup")) return;
  if (req.mode === "navigate") {
    // The app's page comes from the cache first. Asking the network first
    // would keep the crew waiting, for minutes, whenever the camp
    // server's address takes connections but does not answer (a laptop
    // asleep, a server hung, a weak link). A new build reaches the phone
    // through a new service worker with a new cache, so the cached page
    // is always the one this worker was installed with. Other pages (the
    // coordinator's, the setup page) are not part of the phone app and
    // go to the network.
    if (url.pathname === "/" || url.pathname === "/index.html") {
      event.respondWith(caches.match("/", { cacheName: CACHE }).then((hit) => hit || fetch(req)));
    }
    return;
  }
  event.respondWith(
    caches.match(req, { cacheName: CACHE, ignoreSearch: true }).then((hit) => hit || fetch(req)),
  );
});
