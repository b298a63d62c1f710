/* Quenby service worker.
 *
 * One job: when the network fails, answer a page request from the pages this tablet kept for offline work
 * (the "quenby-kit" cache, filled from the Offline work page). With a network, every request goes to the
 * server as usual and nothing is stored here. Entries made offline are kept by field.js in IndexedDB,
 * not by this worker; it only hands back an entry form whose post found no network (keepInterrupted).
 */
"use strict";

const KIT = "quenby-kit";
const INTERRUPTED = "quenby-interrupted";

const NOT_KEPT = `<!doctype html><html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1"><title>No network · Quenby</title>
<link rel="stylesheet" href="/static/site.css"></head><body><main>
<h1>No network</h1>
<p>This page is not kept on this tablet for offline work.</p>
<p><a class="button" href="/field/">Offline work</a> <a class="button" href="/field/queue/">Waiting to send</a></p>
</main></body></html>`;

const NOT_SENT = `<!doctype html><html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1"><title>No network · Quenby</title>
<link rel="stylesheet" href="/static/site.css"></head><body><main>
<h1>No network</h1>
<p>The form was not sent. Go back to it, and send it again when the network returns.</p>
</main></body></html>`;

self.addEventListener("install", () => self.skipWaiting());
self.addEventListener("activate", (event) => event.waitUntil(self.clients.claim()));

self.addEventListener("fetch", (event) => {
  const request = event.request;
  if (new URL(request.url).origin !== self.location.origin) {
    return;
  }
  if (request.method === "POST" && request.mode === "navigate") {
    // an entry form posted while the network is gone: keep what was typed (see keepInterrupted)
    const copy = request.clone();
    event.respondWith(fetch(request).catch(() => keepInterrupted(copy)));
    return;
  }
  if (request.method !== "GET") {
    return; // left to the browser
  }
  event.respondWith(fetch(request).catch(() => fromKit(request)));
});

/* An entry form's post that did not reach the server (no answer at all): its fields are kept, under the
 * page's path, and the page is opened again, where field.js puts them back and offers to keep the entry on
 * the tablet. Only entry forms are kept (they carry an "offline-kind" field); any other post, a login for
 * instance, is never stored. */
async function keepInterrupted(request) {
  const path = new URL(request.url).pathname;
  let fields = [];
  try {
    fields = Array.from((await request.formData()).entries());
  } catch (err) {
    fields = [];
  }
  if (!fields.some(([name]) => name === "offline-kind")) {
    return new Response(NOT_SENT, { status: 503, headers: { "Content-Type": "text/html; charset=utf-8" } });
  }
  const kept = fields.filter(([name, value]) => typeof value === "string" && name !== "csrfmiddlewaretoken");
  const cache = await caches.open(INTERRUPTED);
  await cache.put(path, new Response(JSON.stringify(kept), { headers: { "Content-Type": "application/json" } }));
  return Response.redirect(`${path}#interrupted`, 303);
}

/* The position pages moved from /meters/<tag>/... to /positions/<tag>/... (the server redirects the old
 * addresses for good). A tablet may hold pages kept under either address, and a page kept before the move
 * links to the old one, so a page is looked for under its own address, then under the other. */
const MOVED = [["/meters/", "/positions/"]];

function otherAddress(url) {
  const address = new URL(url);
  for (const [before, after] of MOVED) {
    for (const [from, to] of [[before, after], [after, before]]) {
      if (address.pathname.startsWith(from)) {
        address.pathname = to + address.pathname.slice(from.length);
        return address.href;
      }
    }
  }
  return null;
}

async function fromKit(request) {
  const cache = await caches.open(KIT);
  const other = otherAddress(request.url);
  for (const key of other ? [request, other] : [request]) {
    const kept = (await cache.match(key)) || (await cache.match(key, { ignoreSearch: true }));
    if (kept) {
      return kept;
    }
  }
  if (request.mode === "navigate") {
    return new Response(NOT_KEPT, { status: 503, headers: { "Content-Type": "text/html; charset=utf-8" } });
  }
  return Response.error();
}
