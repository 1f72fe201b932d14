// Sparkward's service worker (served as /sw.js): keeps the app shell and the pages seen on
// this tablet, so a job opens when the Wi-Fi is gone. It never answers a write or an htmx
// request from its cache: the station decides every rule, and the page's outbox
// (static/js/outbox.js) carries the writes that could not be sent.
"use strict";

// Bump when SHELL or this file changes: the new worker fills fresh caches, the old go.
const VERSION = "v7";
const SHELL_CACHE = "sparkward-shell-" + VERSION;
const PAGES_CACHE = "sparkward-pages-" + VERSION;
const OFFLINE_PAGE = "/offline";  // rendered by the station, cached at install
const SHELL = [
  "/static/css/sparkward.css",
  "/static/css/fleet.css",
  "/static/vendor/htmx-2.0.11.min.js",
  "/static/js/sparkward.js",
  "/static/js/outbox.js",
  "/static/js/tablet_rules.js",
  "/static/js/tablet_steps.js",
  "/static/js/tablet_job.js",
  "/static/icon.svg",
  "/manifest.webmanifest",
  OFFLINE_PAGE,
];
const MAX_PAGES = 60;  // the most recently opened pages are kept; older ones make room
const SAVED_AT = "X-Sparkward-Saved-At";

self.addEventListener("install", (event) => {
  event.waitUntil(
    caches.open(SHELL_CACHE)
      .then((cache) => cache.addAll(SHELL.map((url) => new Request(url, { cache: "reload" }))))
      .then(() => self.skipWaiting()));
});

self.addEventListener("activate", (event) => {
  const current = [SHELL_CACHE, PAGES_CACHE];
  event.waitUntil(
    caches.keys()
      .then((names) => Promise.all(names.filter((name) => !current.includes(name))
        .map((name) => caches.delete(name))))
      .then(() => self.clients.claim()));
});

self.addEventListener("fetch", (event) => {
  const request = event.request;
  // Pages and fragments vary by HX-Request; writes go to the station or to the outbox.
  if (request.method !== "GET" || request.headers.has("HX-Request")) return;
  const url = new URL(request.url);
  if (url.origin !== self.location.origin) return;
  if (request.mode === "navigate") {
    event.respondWith(pageFromStation(event, url));
  } else if (SHELL.includes(url.pathname)) {
    event.respondWith(shellFile(event, url.pathname));
  }
});

// Network first: the station's page when it answers, else this tablet's copy of that URL,
// else the offline page.
async function pageFromStation(event, url) {
  try {
    const response = await fetch(event.request);
    if (url.pathname === "/login") {
      // Someone logged out (or was sent to log in): their saved pages leave the tablet.
      event.waitUntil(caches.delete(PAGES_CACHE));
    } else if (isPage(response)) {
      event.waitUntil(keepPage(url.href, response.clone()));
    }
    return response;
  } catch (error) {
    const pages = await caches.open(PAGES_CACHE);
    const saved = await pages.match(url.href);
    if (saved) return markedAsSavedCopy(saved);
    const offline = await caches.match(OFFLINE_PAGE);
    return offline || Response.error();
  }
}

function isPage(response) {
  return response.status === 200 && response.type === "basic" &&
    (response.headers.get("Content-Type") || "").startsWith("text/html");
}

async function keepPage(href, response) {
  const headers = new Headers(response.headers);
  headers.set(SAVED_AT, new Date().toISOString());
  const copy = new Response(await response.blob(), { status: 200, headers });
  const pages = await caches.open(PAGES_CACHE);
  await pages.put(href, copy);
  const kept = await pages.keys();
  for (const old of kept.slice(0, Math.max(0, kept.length - MAX_PAGES))) {
    await pages.delete(old);
  }
}

// The page learns it is a copy (and from when) from a meta tag, so it can say so and
// give its forms fresh event ids.
async function markedAsSavedCopy(saved) {
  const when = (saved.headers.get(SAVED_AT) || "").replace(/[^0-9A-Za-z:.+-]/g, "");
  const html = (await saved.text()).replace(
    /<head>/i, '<head><meta name="sparkward-saved-copy" content="' + when + '">');
  // The copy keeps the station's headers, its Content-Security-Policy above all: a page
  // from the tablet's cache runs under the same rules as one from the station. The Cache
  // API kept it although the station said "no-store" (that governs the HTTP cache only).
  const headers = new Headers(saved.headers);
  headers.delete("Content-Length");
  headers.set("Content-Type", "text/html; charset=utf-8");
  return new Response(html, { status: 200, headers });
}

// The shell from the cache at once; a fresh copy is fetched behind it for the next load.
async function shellFile(event, path) {
  const shell = await caches.open(SHELL_CACHE);
  const cached = await shell.match(path);
  const fresh = fetch(path, { cache: "no-cache" }).then((response) => {
    if (response.ok) return shell.put(path, response.clone()).then(() => response);
    return response;
  });
  if (cached) {
    event.waitUntil(fresh.catch(() => undefined));
    return cached;
  }
  return fresh;
}
