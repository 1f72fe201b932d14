// Sparkward's outbox: a step entry that could not reach the station waits on this tablet
// (IndexedDB), in the order it was made, and is sent again when the station answers. The
// tablet passes nothing offline: the station checks each entry when it arrives, stores one
// it already has once, and a refusal is shown until the mechanic dismisses it.
(function () {
  "use strict";

  var DB_NAME = "sparkward-outbox";
  var RETRY_MS = 20000;
  var SIGNING_NEEDS_STATION = "No answer from the station, so this signature is not kept " +
    "on the tablet: a signature needs the station itself (your PIN is never stored here). " +
    "When the connection is back, look at the job, and sign again if your signature is not " +
    "there.";
  var NOT_SENT = "No answer from the station: this was not kept on the tablet. Try again " +
    "when the connection is back.";

  // ---- The tablet's store: "entries" in the order made, "refused" until dismissed ----
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

  // True when kept, false when this event id already waits here (a second tap).
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

  // ---- What this page knows ----
  function meta(name) {
    var el = document.querySelector('meta[name="' + name + '"]');
    return el ? el.getAttribute("content") : null;
  }
  function me() {
    var id = meta("sparkward-person-id");
    return id ? { id: Number(id), name: meta("sparkward-person-name") } : null;
  }
  var savedCopyAt = meta("sparkward-saved-copy");      // set by the worker on a saved copy
  var offlinePage = meta("sparkward-offline-page") !== null;

  function newEventId() {
    if (window.crypto && crypto.randomUUID) return crypto.randomUUID();
    var b = crypto.getRandomValues(new Uint8Array(16));
    b[6] = (b[6] & 15) | 64;
    b[8] = (b[8] & 63) | 128;
    var h = Array.from(b, function (x) { return (x + 256).toString(16).slice(1); }).join("");
    return h.slice(0, 8) + "-" + h.slice(8, 12) + "-" + h.slice(12, 16) + "-" +
      h.slice(16, 20) + "-" + h.slice(20);
  }

  // As the station shows times: date, hours and minutes, UTC.
  function clock(iso) {
    var at = new Date(iso);
    if (isNaN(at)) return "";
    var utc = at.toISOString();
    return utc.slice(0, 10) + " " + utc.slice(11, 16) + " UTC";
  }

  function isStepForm(form) {
    return !!(form && form.matches("form.event-form") && form.querySelector("[name=event_id]"));
  }

  // A signature's PIN never goes into the tablet's store.
  function carriesSecret(form) {
    return !!form.querySelector("input[type=password], [name=pin]");
  }

  // In the mechanic's words: which job, which step, which button.
  function describe(form) {
    var parts = [];
    var job = document.getElementById("job");
    var context = document.querySelector("[data-testid=context]");
    var where = context ? Array.from(context.children).map(function (c) {
      return c.textContent.trim();
    }).join(" · ") : "";
    if (job) parts.push("Job " + job.dataset.jobId + (where ? " (" + where + ")" : ""));
    var step = form.closest("[data-testid=step]");
    if (step) {
      var number = step.querySelector(".step-number");
      var heading = step.querySelector(".step-heading");
      parts.push([number && number.textContent.trim(), heading &&
                  heading.textContent.replace(/\s+/g, " ").trim()].filter(Boolean).join(", "));
    }
    var button = form.querySelector("button[type=submit]");
    if (button) parts.push("“" + button.textContent.trim() + "”");
    return parts.join(" — ");
  }

  function entryFrom(detail) {
    var form = detail.elt.closest("form");
    var config = detail.requestConfig || {};
    var data = config.formData instanceof FormData ? config.formData : new FormData(form);
    var fields = [];
    data.forEach(function (value, name) {
      if (typeof value === "string") fields.push([name, value]);
    });
    var who = me();
    return {
      event_id: form.querySelector("[name=event_id]").value,
      url: new URL(config.path || form.getAttribute("hx-post"), location.href).pathname,
      fields: fields,
      queued_at: new Date().toISOString(),
      person_id: who ? who.id : null,
      person_name: who ? who.name : "",
      what: describe(form),
    };
  }

  // ---- On screen ----
  var box = {};
  function element(testid) {
    return document.querySelector("[data-outbox] [data-testid=" + testid + "], " +
                                  ".topbar [data-testid=" + testid + "]");
  }
  function paragraph(parent, text, strong) {
    var p = document.createElement("p");
    if (strong) {
      var lead = document.createElement("strong");
      lead.textContent = strong;
      p.append(lead, text ? " " + text : "");
    } else {
      p.textContent = text;
    }
    parent.append(p);
    return p;
  }

  function say(lead, text, problem) {
    var saved = box.saved;
    if (!saved) return;
    saved.replaceChildren();
    var strong = document.createElement("strong");
    strong.textContent = lead;
    saved.append(strong, text ? " " + text : "");
    saved.classList.toggle("problem", !!problem);
    saved.hidden = false;
  }

  var loginNeeded = false;   // the station sent this tablet to log in
  var trouble = null;        // the station answered but could not take an entry (5xx)
  var waiting = 0;           // this person's entries waiting, as last read

  function showCount(n) {
    var count = box.count;
    if (!count) return;
    count.textContent = n === 1 ? "1 entry waiting to reach the station"
                                : n + " entries waiting to reach the station";
    count.hidden = n === 0;
  }

  function showNotice(entries, who) {
    var notice = box.notice;
    if (!notice) return;
    notice.replaceChildren();
    if (savedCopyAt !== null) {
      paragraph(notice, "this is the copy of this page saved on this tablet" +
        (clock(savedCopyAt) ? " at " + clock(savedCopyAt) : "") + ". The station may have " +
        "moved on since. Entries you make are kept here and sent in order; the station " +
        "checks each one when it arrives.", "No connection to the station:");
    }
    var mine = entries.filter(function (e) { return who && e.person_id === who.id; });
    if (mine.length && loginNeeded) {
      paragraph(notice, "Your entries stay on this tablet and are sent, in order, once you " +
        "have logged in again.", "The station asks you to log in again.");
      var link = document.createElement("a");
      link.className = "button";
      link.href = "/login?next=" + encodeURIComponent(location.pathname);
      link.textContent = "Log in again";
      link.dataset.testid = "outbox-log-in";
      notice.append(link);
    }
    if (mine.length && trouble) {
      paragraph(notice, "It answered " + trouble + ". Your entries stay on this tablet and " +
        "are tried again.", "The station could not take the entries just now.");
    }
    var others = {};
    entries.forEach(function (e) {
      if (!who || e.person_id !== who.id) {
        var name = e.person_name || "someone";
        others[name] = (others[name] || 0) + 1;
      }
    });
    // (The offline page does not know who is logged in: the count says enough there.)
    if (!offlinePage) Object.keys(others).forEach(function (name) {
      var n = others[name];
      paragraph(notice, (n === 1 ? "1 entry" : n + " entries") + " made by " + name +
        " wait on this tablet; they are sent when " + name + " logs in on it.");
    });
    notice.hidden = !notice.childNodes.length;
  }

  function showRefused(refused) {
    var section = box.refused;
    if (!section) return;
    var list = section.querySelector("[data-refused-list]");
    list.replaceChildren();
    refused.sort(function (a, b) { return a.answered_at < b.answered_at ? -1 : 1; });
    refused.forEach(function (r) {
      var item = document.createElement("li");
      item.dataset.testid = "refused-entry";
      item.dataset.eventId = r.event_id;
      paragraph(item, r.what || "A step entry", "");
      var answer = paragraph(item, "", "Made on this tablet" +
        (clock(r.queued_at) ? " at " + clock(r.queued_at) : "") + "; the station's reason:");
      var reason = document.createElement("span");
      reason.dataset.testid = "refused-reason";
      reason.textContent = r.reason;
      answer.append(" ", reason);
      paragraph(item, "Nothing of this entry is in the job. If the step is still to do, " +
        "do it again on the job screen.");
      var button = document.createElement("button");
      button.type = "button";
      button.className = "button";
      button.dataset.dismiss = r.event_id;
      button.dataset.testid = "dismiss-refused";
      button.textContent = "I have read this: dismiss";
      item.append(button);
      list.append(item);
    });
    section.hidden = refused.length === 0;
  }

  // A form whose entry waits here is shown as such, and cannot be sent twice from this page.
  function markForms(entries, freshIds) {
    var queued = new Set(entries.map(function (e) { return e.event_id; }));
    document.querySelectorAll("form.event-form").forEach(function (form) {
      var field = form.querySelector("[name=event_id]");
      var button = form.querySelector("button[type=submit]");
      if (!field || !button) return;
      // A saved copy's forms were made for the page as it was: a new tap is a new entry.
      if (freshIds && !queued.has(field.value)) field.value = newEventId();
      var note = form.querySelector("[data-queued-note]");
      if (queued.has(field.value)) {
        if (!note) {
          note = document.createElement("p");
          note.className = "outbox-queued";
          note.dataset.queuedNote = "";
          note.dataset.testid = "queued-note";
          note.textContent = "Saved on this tablet, waiting for the station.";
          button.before(note);
        }
        button.removeAttribute("data-enable-after");
        button.disabled = true;
        button.dataset.queued = "1";
      } else if (note) {
        note.remove();
        if (button.dataset.queued) { button.disabled = false; delete button.dataset.queued; }
      }
    });
  }

  var firstRender = true;
  function render() {
    return Promise.all([all("entries"), all("refused")]).then(function (found) {
      var entries = found[0];
      var who = me();
      waiting = entries.filter(function (e) { return who && e.person_id === who.id; }).length;
      showCount(entries.length);
      showNotice(entries, who);
      showRefused(found[1]);
      if (!entries.length && box.saved && !box.saved.classList.contains("problem")) {
        box.saved.hidden = true;
      }
      markForms(entries, firstRender && savedCopyAt !== null);
      firstRender = false;
    });
  }

  // Other tabs of this tablet share the outbox: tell them when it changes.
  var channel = "BroadcastChannel" in window ? new BroadcastChannel("sparkward-outbox") : null;
  function changed() {
    if (channel) channel.postMessage("changed");
    // This page's tablet copy of the job (static/js/tablet_job.js) follows the outbox.
    document.dispatchEvent(new CustomEvent("sparkward:outbox-changed"));
    return render();
  }
  if (channel) channel.onmessage = function () {
    document.dispatchEvent(new CustomEvent("sparkward:outbox-changed"));
    render();
  };

  // ---- Keeping an entry ----
  function queueFrom(detail, behind) {
    var entry = entryFrom(detail);
    return keep(entry).then(function (kept) {
      var lead = kept ? "Saved on this tablet — not yet at the station."
                      : "Already saved on this tablet — not yet at the station.";
      var how = behind
        ? "It waits behind the entries made before it; all are sent, in order, as soon " +
          "as the station can be reached."
        : "It is sent, in order, as soon as the station can be reached.";
      say(lead, how + " The station checks every entry when it arrives, and its answer " +
        "wins; where the tablet carries the job, the next step is shown from its copy.");
      return changed();
    }).then(function () {
      if (behind) replay();
    }, function (error) {
      say("Not saved:", "this tablet could not keep the entry (" + error + "). Write it " +
        "down and enter it again when the connection is back.", true);
    });
  }

  document.addEventListener("htmx:sendError", function (event) {
    var form = event.detail.elt.closest("form");
    if (!isStepForm(form)) { say(NOT_SENT, "", true); return; }
    if (carriesSecret(form)) { say(SIGNING_NEEDS_STATION, "", true); return; }
    queueFrom(event.detail, false);
  });

  // While entries wait, a new one goes behind them, so the station gets them in order.
  document.addEventListener("htmx:beforeRequest", function (event) {
    var form = event.detail.elt.closest && event.detail.elt.closest("form");
    if (!waiting || !isStepForm(form) || carriesSecret(form)) return;
    if ((event.detail.requestConfig || {}).verb !== "post") return;
    event.preventDefault();
    queueFrom(event.detail, true);
  });

  // Once the station answers anything, it is reachable: send what waits.
  document.addEventListener("htmx:afterRequest", function (event) {
    var xhr = event.detail.xhr;
    if (waiting && xhr && xhr.status > 0) replay();
  });

  // ---- Sending again ----
  async function freshToken() {
    try {
      var response = await fetch("/login", { credentials: "same-origin" });
      var doc = new DOMParser().parseFromString(await response.text(), "text/html");
      var tag = doc.querySelector('meta[name="csrf-token"]');
      if (!tag) return null;
      var token = tag.getAttribute("content");
      var mine = document.querySelector('meta[name="csrf-token"]');
      if (mine) mine.setAttribute("content", token);
      if (document.body.hasAttribute("hx-headers")) {
        document.body.setAttribute("hx-headers", JSON.stringify({ "X-CSRFToken": token }));
      }
      document.querySelectorAll("input[name=csrf_token]").forEach(function (input) {
        input.value = token;
      });
      return token;
    } catch (error) {
      return null;
    }
  }

  function reasonFrom(html, response) {
    var doc = new DOMParser().parseFromString(html, "text/html");
    var said = doc.querySelector("[data-testid=refusal], .field-error, .reason");
    var text = said ? said.textContent.replace(/^[\s✗]+/, "").replace(/\s+/g, " ").trim() : "";
    return text || "The station answered " + response.status +
      (response.statusText ? " " + response.statusText : "") + ".";
  }

  // "sent" (stored or a duplicate), "refused" (now in the list), or "stop" (try later).
  async function deliver(entry, token) {
    token = token || meta("csrf-token") || "";
    var body = new URLSearchParams();
    entry.fields.forEach(function (pair) {
      if (pair[0] !== "sent_time") body.append(pair[0], pair[0] === "csrf_token" ? token : pair[1]);
    });
    // This tablet's clock now: with the entry's own time, how long it waited here (the
    // station places it when it was made: webapp/domain/placement.py).
    body.append("sent_time", new Date().toISOString());
    var response;
    try {
      response = await fetch(entry.url, {
        method: "POST", body: body, credentials: "same-origin",
        headers: { "HX-Request": "true", "X-CSRFToken": token } });
    } catch (error) {
      return "stop";  // still no network
    }
    // Sent to log in (a page's redirect, or a 401 for a session that ended): the entry
    // stays here, and goes once the mechanic has logged in again.
    if (response.status === 401 ||
        (response.redirected && new URL(response.url).pathname === "/login")) {
      loginNeeded = true;
      return "stop";
    }
    if (response.ok) {
      await remove(entry);
      return "sent";
    }
    var html = await response.text();
    if (response.status === 400 && /security token/.test(html)) {
      // The page's token is older than the session: fetch the current one, once.
      var fresh = token === meta("csrf-token") ? await freshToken() : null;
      if (fresh && fresh !== token) return deliver(entry, fresh);
      trouble = "that this page's security token is out of date: reload the page";
      return "stop";
    }
    if (response.status >= 400 && response.status < 500 && response.status !== 408 &&
        response.status !== 429) {
      await refuse(entry, reasonFrom(html, response), response.status);
      return "refused";
    }
    trouble = String(response.status);
    return "stop";
  }

  async function sendInOrder(who) {
    var delivered = 0;
    loginNeeded = false;
    trouble = null;
    for (;;) {
      var entries = (await all("entries")).filter(function (e) { return e.person_id === who.id; });
      if (!entries.length) break;
      var outcome = await deliver(entries[0]);
      if (outcome === "stop") break;
      delivered += 1;
      await changed();
    }
    return delivered;
  }

  var replaying = null;
  function replay() {
    var who = me();
    if (!who) return render().then(function () { return 0; });
    if (replaying) return replaying;
    var run = function () { return sendInOrder(who); };
    // One tab at a time sends, so the station gets the entries once each and in order.
    var locked = navigator.locks
      ? navigator.locks.request("sparkward-outbox", { ifAvailable: true }, function (lock) {
        return lock ? run() : 0;
      })
      : run();
    replaying = Promise.resolve(locked).catch(function () { return 0; }).then(function (sent) {
      replaying = null;
      return render().then(function () {
        if (sent && !waiting) showStationState();
        return sent;
      });
    });
    return replaying;
  }

  // The outbox is empty again: show what the station now says about the job.
  function showStationState() {
    if (savedCopyAt !== null || offlinePage) { location.reload(); return; }
    if (document.getElementById("job") && window.htmx) {
      window.htmx.ajax("GET", location.pathname + location.search,
                       { target: "#job", swap: "outerHTML" });
    }
  }

  document.addEventListener("click", function (event) {
    var button = event.target.closest("[data-dismiss]");
    if (button) dismiss(button.dataset.dismiss).then(changed);
  });
  document.addEventListener("htmx:afterSwap", function () { render(); });

  window.addEventListener("online", function () {
    replay().then(function (sent) {
      if (!sent && (savedCopyAt !== null || offlinePage)) location.reload();
    });
  });

  document.addEventListener("DOMContentLoaded", function () {
    box = { count: element("outbox-count"), saved: element("outbox-saved"),
            notice: element("outbox-notice"), refused: element("outbox-refused") };
    if (!window.indexedDB) return;
    render().then(replay);
    setInterval(replay, RETRY_MS);
  });

  // For a look from the browser's console (and the browser tests): what waits, what was
  // refused, and a way to send again now.
  window.sparkwardOutbox = {
    entries: function () { return all("entries"); },
    refusals: function () { return all("refused"); },
    keep: function (entry) { return keep(entry).then(function (kept) { changed(); return kept; }); },
    replay: replay,
  };
})();
