// The outbox's store on this tablet (IndexedDB "sparkward-outbox"): "entries" waiting for the
// station, in the order they were made, and "refused" entries, kept until the mechanic
// dismisses them. Only storage lives here; sending is in outbox.js, the screen in
// outbox_screen.js.
(function () {
  "use strict";

  var DB_NAME = "sparkward-outbox";

  var opened = null;
  function database() {
    if (!opened) {
      opened = new Promise(function (resolve, reject) {
        var request = indexedDB.open(DB_NAME, 1);
        request.onupgradeneeded = function () {
          var db = request.result;
          db.createObjectStore("entries", { keyPath: "seq", autoIncrement: true })
            .createIndex("event_id", "event_id", { unique: true });
          db.createObjectStore("refused", { keyPath: "event_id" });
        };
        request.onsuccess = function () { resolve(request.result); };
        request.onerror = function () { reject(request.error); };
      });
    }
    return opened;
  }

  // Run `work(tx, done)` in one transaction; resolves with what `done` was given, once
  // the transaction has committed.
  function transaction(stores, mode, work) {
    return database().then(function (db) {
      return new Promise(function (resolve, reject) {
        var tx = db.transaction(stores, mode);
        var result;
        work(tx, function (value) { result = value; });
        tx.oncomplete = function () { resolve(result); };
        tx.onerror = tx.onabort = function () { reject(tx.error); };
      });
    });
  }

  function all(store) {
    return transaction(store, "readonly", function (tx, done) {
      tx.objectStore(store).getAll().onsuccess = function (e) { done(e.target.result); };
    });
  }

  // True when kept, false when this event id already waits here (a second tap, or a
  // timed-out entry kept again).
  function keep(entry) {
    var copy = Object.assign({}, entry);
    delete copy.seq;
    return transaction("entries", "readwrite", function (tx, done) {
      var entries = tx.objectStore("entries");
      entries.index("event_id").getKey(copy.event_id).onsuccess = function (e) {
        if (e.target.result !== undefined) { done(false); return; }
        entries.add(copy);
        done(true);
      };
    });
  }

  function remove(entry) {
    return transaction("entries", "readwrite", function (tx) {
      tx.objectStore("entries").delete(entry.seq);
    });
  }

  // The entry leaves the queue and joins the refused list, in one transaction.
  function refuse(entry, reason, status) {
    return transaction(["entries", "refused"], "readwrite", function (tx) {
      tx.objectStore("entries").delete(entry.seq);
      tx.objectStore("refused").put({
        event_id: entry.event_id, what: entry.what, queued_at: entry.queued_at,
        answered_at: new Date().toISOString(), status: status, reason: reason });
    });
  }

  function dismiss(eventId) {
    return transaction("refused", "readwrite", function (tx) {
      tx.objectStore("refused").delete(eventId);
    });
  }

  window.sparkwardOutboxStore = {
    entries: function () { return all("entries"); },
    refusals: function () { return all("refused"); },
    keep: keep,
    remove: remove,
    refuse: refuse,
    dismiss: dismiss,
  };
})();
