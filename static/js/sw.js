// Sparkward's service worker (served as /sw.js): keeps the app shell and the pages seen on
// this tablet, so a job opens when the Wi-Fi is gone. It never answers a write or an htmx
// request from its cache: the station decides every rule, and the page's outbox
// (static/js/outbox.js) carries the writes that could not be sent.
"use strict";

// Filled in by the station when it serves /sw.js (webapp/web/pwa.py): the shell's files by
// their content-hashed URLs (every CSS and JS file under static/, the icon, the manifest),
// and a version made from those hashes and this file. A changed file is a new worker, which
// fills a fresh shell cache and deletes the old one; nobody bumps anything by hand.
const VERSION = "unfilled";
const SHELL_FILES = [];
const SHELL_CACHE = "sparkward-shell-" + VERSION;
// The pages kept on this tablet outlive a new shell (a page names its files by hash; an
// older hash is answered with the current file, below). Change only if the way pages are
// kept changes.
const PAGES_CACHE = "sparkward-pages-v7";
const OFFLINE_PAGE = "/offline";  // rendered by the station, cached at install
const SHELL = [...SHELL_FILES, OFFLINE_PAGE];
const SHELL_PATHS = new Set(SHELL_FILES.map((href) => new URL(href, self.location.origin).pathname));
// How long a page load waits for the station before the tablet's copy is shown: on a Wi-Fi
// that connects but never answers, a mechanic should not stare at a blank screen (common
// practice, no source; a job page answers in milliseconds on the hangar LAN).
const STATION_PATIENCE_MS = 4000;
const MAX_PAGES = 60;  // the most recently opened pages are kept; older ones make room
const SAVED_AT = "X-Sparkward-Saved-At";

self.addEventListener("install", (event) => {
  event.waitUntil(
    // Plain requests: a file the page has just loaded comes from the HTTP cache (it is
    // "immutable" under its hashed URL), so the station sends each shell file once.
    caches.open(SHELL_CACHE)
      .then((cache) => cache.addAll(SHELL))
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

// The tablet's copies of its jobs (IndexedDB), shared with the page: self.sparkwardJobCopies.
/* the station writes static/js/job_copies.js here */
// The station's answers that carry a job's state: an entry's answer and a job fragment.
const JOB_ANSWER = /^\/jobs\/\d+(\/events|\/steps\/[^/]+)?$/;

self.addEventListener("fetch", (event) => {
  const request = event.request;
  const url = new URL(request.url);
  if (url.origin !== self.location.origin) return;
  if (JOB_ANSWER.test(url.pathname) &&
      (request.method === "POST" || request.headers.has("HX-Request"))) {
    // Straight to the station, never from a cache; what it answers about the job is kept
    // here too, so a page that has gone on before its own write finished loses nothing.
    event.respondWith(stationAnswerKept(event));
    return;
  }
  // Pages and fragments vary by HX-Request; writes go to the station or to the outbox.
  if (request.method !== "GET" || request.headers.has("HX-Request")) return;
  if (request.mode === "navigate") {
    event.respondWith(pageFromStation(event, url));
  } else if (SHELL_PATHS.has(url.pathname)) {
    event.respondWith(shellFile(request, url));
  }
});

// Network first, for STATION_PATIENCE_MS: the station's page when it answers in time, else
// this tablet's copy of that URL, else the offline page. An answer that comes later is
// still kept for the next time.
function pageFromStation(event, url) {
  const answered = fetch(event.request).then((response) => {
    let keeping = Promise.resolve();
    if (url.pathname === "/login") {
      // Someone logged out (or was sent to log in): their saved pages leave the tablet.
      keeping = caches.delete(PAGES_CACHE);
    } else if (isPage(response)) {
      keeping = Promise.all([keepPage(url.href, response.clone()),
                             keepJobState(response.clone())]);
    }
    return { response, keeping };
  });
  event.waitUntil(answered.then((answer) => answer.keeping).catch(() => undefined));
  const impatience = new Promise((resolve) => setTimeout(resolve, STATION_PATIENCE_MS, null));
  return Promise.race([answered.then((answer) => answer.response), impatience])
    .catch(() => null)
    .then((response) => response || keptCopyOf(url));
}

async function keptCopyOf(url) {
  const pages = await caches.open(PAGES_CACHE);
  const saved = await pages.match(url.href);
  if (saved) return markedAsSavedCopy(saved);
  const offline = await caches.match(OFFLINE_PAGE);
  return offline || Response.error();
}

function isPage(response) {
  return response.status === 200 && response.type === "basic" &&
    (response.headers.get("Content-Type") || "").startsWith("text/html");
}

async function keepPage(href, response) {
  const headers = new Headers(response.headers);
  headers.set(SAVED_AT, new Date().toISOString());
  // The body kept is the decoded page: its length and encoding no longer apply.
  headers.delete("Content-Encoding");
  headers.delete("Content-Length");
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

// The shell from the cache: under its hashed URL a file never changes, so nothing is asked
// of the station. A URL not kept (a page saved before an update names older hashes) goes to
// the station, and without network gets this tablet's current version of that file.
async function shellFile(request, url) {
  const shell = await caches.open(SHELL_CACHE);
  const kept = await shell.match(url.href);
  if (kept) return kept;
  try {
    return await fetch(request);
  } catch (error) {
    const current = await shell.match(url.pathname, { ignoreSearch: true });
    if (current) return current;
    throw error;
  }
}

function stationAnswerKept(event) {
  const answered = fetch(event.request);
  event.waitUntil(answered.then((response) => keepJobState(response.clone()))
    .catch(() => undefined));
  return answered;
}

async function keepJobState(response) {
  if (!(response.headers.get("Content-Type") || "").startsWith("text/html")) return;
  const state = self.sparkwardJobCopies.stateInHtml(await response.text());
  if (state) await self.sparkwardJobCopies.keepState(state);
}
