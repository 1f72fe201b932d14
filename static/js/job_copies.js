// The tablet's copies of the jobs it carries (IndexedDB "sparkward-jobs"): "states", the
// station's latest word on each job (web/carry.py), and "steps", each job's steps. Shared by
// the page (static/js/tablet_job.js) and the service worker (static/js/sw.js), which keeps
// the station's answers to entries and job fragments even when the page has gone on to
// another before its own write finished.
(function (scope) {
  "use strict";

  var DB_NAME = "sparkward-jobs";
  var opened = null;
  function database() {
    if (!opened) {
      opened = new Promise(function (resolve, reject) {
        var request = indexedDB.open(DB_NAME, 1);
        request.onupgradeneeded = function () {
          request.result.createObjectStore("states", { keyPath: "job_id" });
          request.result.createObjectStore("steps", { keyPath: "job_id" });
        };
        request.onsuccess = function () { resolve(request.result); };
        request.onerror = function () { opened = null; reject(request.error); };
      });
    }
    return opened;
  }
  function read(store, key) {
    return database().then(function (db) {
      return new Promise(function (resolve, reject) {
        var request = db.transaction(store).objectStore(store).get(key);
        request.onsuccess = function () { resolve(request.result || null); };
        request.onerror = function () { reject(request.error); };
      });
    });
  }
  function write(store, value) {
    return database().then(function (db) {
      return new Promise(function (resolve, reject) {
        var tx = db.transaction(store, "readwrite");
        tx.objectStore(store).put(value);
        tx.oncomplete = function () { resolve(value); };
        tx.onerror = tx.onabort = function () { reject(tx.error); };
      });
    });
  }

  // The newer of two states of one job: more events, or the same events seen later.
  function newer(a, b) {
    if (!a) return b;
    if (!b) return a;
    if (a.head.seq !== b.head.seq) return a.head.seq > b.head.seq ? a : b;
    return a.station_time >= b.station_time ? a : b;
  }

  // Keep `state` unless a newer one is kept: read and write in one transaction, so two
  // answers arriving together never leave the older one kept. Resolves with the kept one.
  function keepState(state) {
    return database().then(function (db) {
      return new Promise(function (resolve, reject) {
        var tx = db.transaction("states", "readwrite");
        var states = tx.objectStore("states");
        var best = state;
        states.get(state.job_id).onsuccess = function (event) {
          best = newer(event.target.result || null, state);
          if (best === state) states.put(state);
        };
        tx.oncomplete = function () { resolve(best); };
        tx.onerror = tx.onabort = function () { reject(tx.error); };
      });
    });
  }

  // The state a job page or fragment carries (its section#job's data-job-carry), from its
  // HTML text: for the worker, which has no DOM. Null when there is none.
  var CARRY = /<section id="job"[^>]*\sdata-job-carry="([^"]*)"/;
  var ENTITIES = { "&amp;": "&", "&lt;": "<", "&gt;": ">", "&#34;": "\"", "&quot;": "\"",
                   "&#39;": "'", "&#x27;": "'" };
  function stateInHtml(html) {
    var found = CARRY.exec(html);
    if (!found) return null;
    var text = found[1].replace(/&(amp|lt|gt|quot|#34|#39|#x27);/g, function (entity) {
      return ENTITIES[entity];
    });
    try { return JSON.parse(text); } catch (error) { return null; }
  }

  scope.sparkwardJobCopies = { read: read, write: write, newer: newer,
                               keepState: keepState, stateInHtml: stateInHtml };
})(self);
