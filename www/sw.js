// eccaudit's service worker: keeps the page usable with no network once it has loaded.
//
// Network first, cache as the fallback: online, you always get the files just
// served (so a rebuilt wasm module is never stale); offline, the copies cached
// on the last visit are used. Only this origin's GET requests are handled.
const CACHE = "eccaudit-v1";
const APP_SHELL = [
  "./",
  "./index.html",
  "./app.js",
  "./audit-view.js",
  "./priors-worker.js",
  "./priors-view.js",
  "./exports.js",
  "./dom.js",
  "./format.js",
  "./audit-worker.js",
  "./fit-worker.js",
  "./survey-view.js",
  "./population-view.js",
  "./population-worker.js",
  "./style.css",
  "./pkg/eccaudit_web.js",
  "./pkg/eccaudit_web_bg.wasm",
];

self.addEventListener("install", (event) => {
  event.waitUntil(caches.open(CACHE).then((cache) => cache.addAll(APP_SHELL)).then(() => self.skipWaiting()));
});

self.addEventListener("activate", (event) => {
  event.waitUntil(
    caches.keys()
      .then((names) => Promise.all(names.filter((n) => n !== CACHE).map((n) => caches.delete(n))))
      .then(() => self.clients.claim()),
  );
});

self.addEventListener("fetch", (event) => {
  const request = event.request;
  if (request.method !== "GET" || new URL(request.url).origin !== self.location.origin) return;
  event.respondWith(
    fetch(request)
      .then((response) => {
        if (response.ok) {
          const copy = response.clone();
          caches.open(CACHE).then((cache) => cache.put(request, copy));
        }
        return response;
      })
      .catch(() => caches.match(request, { ignoreSearch: true }).then((cached) => cached ?? Response.error())),
  );
});
