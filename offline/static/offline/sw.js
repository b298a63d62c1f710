/* Quenby service worker.
 *
 * One job: when the network fails, answer a page request from the pages this tablet kept for offline work
 * (the "quenby-kit" cache, filled from the Offline work page). With a network, every request goes to the
 * server as usual and nothing is stored here. Entries made offline are kept by field.js in IndexedDB,
 * not by this worker.
 */
"use strict";

const KIT = "quenby-kit";

const NOT_KEPT = `<!doctype html><html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1"><title>No network · Quenby</title>
<link rel="stylesheet" href="/static/site.css"></head><body><main>
<h1>No network</h1>
<p>This page is not kept on this tablet for offline work.</p>
<p><a class="button" href="/field/">Offline work</a> <a class="button" href="/field/queue/">Waiting to send</a></p>
</main></body></html>`;

self.addEventListener("install", () => self.skipWaiting());
self.addEventListener("activate", (event) => event.waitUntil(self.clients.claim()));

self.addEventListener("fetch", (event) => {
  const request = event.request;
  if (request.method !== "GET" || new URL(request.url).origin !== self.location.origin) {
    return; // left to the browser: sends (POST) are never answered from storage
  }
  event.respondWith(fetch(request).catch(() => fromKit(request)));
});

async function fromKit(request) {
  const cache = await caches.open(KIT);
  const kept = (await cache.match(request)) || (await cache.match(request, { ignoreSearch: true }));
  if (kept) {
    return kept;
  }
  if (request.mode === "navigate") {
    return new Response(NOT_KEPT, { status: 503, headers: { "Content-Type": "text/html; charset=utf-8" } });
  }
  return Response.error();
}
