// Sparkward's outbox: a step entry that could not reach the station (no network, no answer
// within the entry timeout, or a station in trouble answering 5xx) waits on this tablet, in
// the order it was made, and is sent again as soon as the station answers. The tablet
// passes nothing offline: the station checks each entry when it arrives, stores one it
// already has once, and a refusal is shown until the mechanic dismisses it.
// Storage: outbox_store.js. The screen and the page's words: outbox_screen.js.
(function () {
  "use strict";

  var store = window.sparkwardOutboxStore;
  var screen = window.sparkwardOutboxScreen;
  var status = screen.status;

  // How long a step entry may go unanswered before the tablet keeps it, in seconds. The
  // station may set it (config key ENTRY_TIMEOUT_S, rendered as the meta tag
  // "sparkward-entry-timeout"). Any other request gets OTHER_TIMEOUT_FACTOR times as long
  // (a signature prints and signs the record first).
  var ENTRY_TIMEOUT_S = 8;
  var OTHER_TIMEOUT_FACTOR = 4;
  // A station that answers but is in trouble (5xx, 408, 429) is tried again after 1 s, 2 s,
  // 4 s, 8 s, then every 15 s: it is not flooded while it recovers.
  var BACKOFF_MS = [1000, 2000, 4000, 8000, 15000];
  // A station that does not answer at all costs nothing to ask: it is probed (GET /healthz)
  // PROBE_GAP_MS after each failed probe; a probe gives up after PROBE_TIMEOUT_MS, except
  // every PROBE_FULL_EVERY-th, which waits the whole entry timeout (a slow station is still
  // found). So entries go within about 2 s of the station answering again.
  var PROBE_GAP_MS = 500;
  var PROBE_TIMEOUT_MS = 1000;
  var PROBE_FULL_EVERY = 10;
  var LOGIN_RETRY_MS = 20000;  // waiting for a log-in, or for another tab that is sending

  var SIGNING_NEEDS_STATION = "No answer from the station, so this signature is not kept " +
    "on the tablet: a signature needs the station itself (your PIN is never stored here). " +
    "When the connection is back, look at the job, and sign again if your signature is not " +
    "there.";
  var NOT_SHOWN = "No answer from the station: this page was not brought up to date. It " +
    "shows what the station said last.";
  var NOT_SENT = "No answer from the station: this was not kept on the tablet. Try again " +
    "when the connection is back.";

  function entryTimeoutMs() {
    var set = Number(screen.meta("sparkward-entry-timeout"));
    return (isFinite(set) && set > 0 && set <= 300 ? set : ENTRY_TIMEOUT_S) * 1000;
  }

  // fetch, given up (rejected) after `ms`.
  function fetchWithin(url, options, ms) {
    var controller = new AbortController();
    var timer = setTimeout(function () { controller.abort(); }, ms);
    return fetch(url, Object.assign({}, options, { signal: controller.signal }))
      .finally(function () { clearTimeout(timer); });
  }

  function stationTrouble(code) {
    return code >= 500 || code === 408 || code === 429;
  }

  // ---- Keeping an entry ----
  function queueFrom(detail, behind, lead) {
    var entry = screen.entryFrom(detail);
    return store.keep(entry).then(function (kept) {
      var first = lead || (kept ? "Saved on this tablet — not yet at the station."
                                : "Already saved on this tablet — not yet at the station.");
      var how = behind
        ? "It waits behind the entries made before it; all are sent, in order, as soon " +
          "as the station can be reached."
        : "It is sent, in order, as soon as the station can be reached.";
      screen.say(first, how + " The station checks every entry when it arrives, and its " +
        "answer wins; where the tablet carries the job, the next step is shown from its " +
        "copy.", !!lead);
      return changed();
    }).then(function () {
      if (behind) replay(); else afterAttempt(lead ? "trouble" : "no-answer");
    }, function (error) {
      screen.say("Not saved:", "this tablet could not keep the entry (" + error + "). Write " +
        "it down and enter it again when the connection is back.", true);
    });
  }

  // No network, or no answer within the timeout: the same for the mechanic.
  function noAnswer(event) {
    if ((event.detail.requestConfig || {}).verb === "get") {
      screen.say(NOT_SHOWN, "", true);
      return;
    }
    var form = event.detail.elt.closest("form");
    if (!screen.isStepForm(form)) { screen.say(NOT_SENT, "", true); return; }
    if (screen.carriesSecret(form)) { screen.say(SIGNING_NEEDS_STATION, "", true); return; }
    status.noAnswer = true;
    queueFrom(event.detail, false);
  }
  document.addEventListener("htmx:sendError", noAnswer);
  document.addEventListener("htmx:timeout", noAnswer);

  // The station answered but could not take it (5xx): a step entry is kept and tried again.
  document.addEventListener("htmx:responseError", function (event) {
    var xhr = event.detail.xhr;
    if (!xhr || !stationTrouble(xhr.status)) return;
    var answered = "It answered " + xhr.status + (xhr.statusText ? " " + xhr.statusText : "") +
      ".";
    var form = event.detail.elt.closest("form");
    if (!screen.isStepForm(form) || screen.carriesSecret(form)) {
      screen.say("The station had a problem and could not take this.", answered + " Look at " +
        "the page again in a moment, and do it again if it is not there.", true);
      return;
    }
    status.trouble = answered;
    queueFrom(event.detail, false, "The station had a problem — this entry waits on the " +
      "tablet. " + answered);
  });

  // Every request has a timeout: a step entry the entry timeout, anything else longer.
  document.addEventListener("htmx:configRequest", function (event) {
    var form = event.detail.elt.closest && event.detail.elt.closest("form");
    var entry = screen.isStepForm(form) && !screen.carriesSecret(form);
    event.detail.timeout = entryTimeoutMs() * (entry ? 1 : OTHER_TIMEOUT_FACTOR);
  });

  // While entries wait, a new one goes behind them, so the station gets them in order.
  document.addEventListener("htmx:beforeRequest", function (event) {
    var form = event.detail.elt.closest && event.detail.elt.closest("form");
    if (!status.waiting || !screen.isStepForm(form) || screen.carriesSecret(form)) return;
    if ((event.detail.requestConfig || {}).verb !== "post") return;
    event.preventDefault();
    queueFrom(event.detail, true);
  });

  // Once the station answers anything sound, it is reachable: send what waits.
  document.addEventListener("htmx:afterRequest", function (event) {
    var xhr = event.detail.xhr;
    if (status.waiting && xhr && xhr.status > 0 && !stationTrouble(xhr.status)) replay();
  });

  // ---- Sending again ----
  async function freshToken() {
    try {
      var response = await fetchWithin("/login", { credentials: "same-origin" },
                                       entryTimeoutMs());
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

  // "sent" (stored, or the station had it already: it answers a resend of the same entry
  // as it answered the first), "refused" (now in the list), or why to stop: "no-answer",
  // "trouble", "login".
  async function deliver(entry, token) {
    token = token || screen.meta("csrf-token") || "";
    var body = new URLSearchParams();
    entry.fields.forEach(function (pair) {
      if (pair[0] !== "sent_time") body.append(pair[0], pair[0] === "csrf_token" ? token : pair[1]);
    });
    // This tablet's clock now: with the entry's own time, how long it waited here (the
    // station places it when it was made: webapp/domain/placement.py).
    body.append("sent_time", new Date().toISOString());
    var response;
    try {
      response = await fetchWithin(entry.url, {
        method: "POST", body: body, credentials: "same-origin",
        headers: { "HX-Request": "true", "X-CSRFToken": token } }, entryTimeoutMs());
    } catch (error) {
      return "no-answer";  // still no network, or no answer in time
    }
    // Sent to log in (a page's redirect, or a 401 for a session that ended): the entry
    // stays here, and goes once the mechanic has logged in again.
    if (response.status === 401 ||
        (response.redirected && new URL(response.url).pathname === "/login")) {
      status.loginNeeded = true;
      return "login";
    }
    var html = await response.text();
    if (response.ok) {
      await keepStationWord(html);  // first: the tablet's copy never goes back a step
      await store.remove(entry);
      return "sent";
    }
    if (response.status === 400 && /security token/.test(html)) {
      // The page's token is older than the session: fetch the current one, once.
      var fresh = token === screen.meta("csrf-token") ? await freshToken() : null;
      if (fresh && fresh !== token) return deliver(entry, fresh);
      status.trouble = "This page's security token is out of date: reload the page.";
      return "login";
    }
    if (!stationTrouble(response.status)) {
      await keepStationWord(html);
      await store.refuse(entry, reasonFrom(html, response), response.status);
      return "refused";
    }
    status.trouble = "It answered " + response.status +
      (response.statusText ? " " + response.statusText : "") + ".";
    return "trouble";
  }

  // The station's answer to an entry carries the job as it now stands (its job fragment's
  // data-job-carry): the tablet's copy of the job (static/js/tablet_job.js) keeps it before
  // the entry leaves the outbox, so no screen shows the job without both.
  async function keepStationWord(html) {
    if (!window.sparkwardTabletJob) return;
    var doc = new DOMParser().parseFromString(html, "text/html");
    var job = doc.getElementById("job");
    if (!job || !job.dataset.jobCarry) return;
    try {
      await window.sparkwardTabletJob.keep(JSON.parse(job.dataset.jobCarry));
    } catch (error) { /* the copy stays as it was; the next page brings it up to date */ }
  }

  async function sendInOrder(who) {
    var delivered = 0;
    status.loginNeeded = false;
    status.trouble = null;
    status.noAnswer = false;
    for (;;) {
      var entries = (await store.entries()).filter(function (e) {
        return e.person_id === who.id;
      });
      if (!entries.length) return { sent: delivered, stop: null };
      var outcome = await deliver(entries[0]);
      if (outcome !== "sent" && outcome !== "refused") {
        status.noAnswer = outcome === "no-answer";
        return { sent: delivered, stop: outcome };
      }
      delivered += 1;
      await changed();
    }
  }

  var replaying = null;
  function replay() {
    var who = screen.me();
    if (!who) return screen.render().then(function () { return 0; });
    if (replaying) return replaying;
    clearTimeout(timer);
    var run = function () { return sendInOrder(who); };
    // One tab at a time sends, so the station gets the entries once each and in order.
    var locked = navigator.locks
      ? navigator.locks.request("sparkward-outbox", { ifAvailable: true }, function (lock) {
        return lock ? run() : { sent: 0, stop: "busy" };
      })
      : run();
    replaying = Promise.resolve(locked).catch(function () {
      return { sent: 0, stop: "no-answer" };
    }).then(function (result) {
      replaying = null;
      return screen.render().then(function () {
        if (result.sent && !status.waiting) showStationState();
        afterAttempt(result.stop);
        return result.sent;
      });
    });
    return replaying;
  }

  // ---- When to try again ----
  var timer = null;
  var troubleTries = 0;
  var probes = 0;
  function afterAttempt(stop) {
    clearTimeout(timer);
    timer = null;
    if (!status.waiting || !screen.me()) { troubleTries = 0; probes = 0; return; }
    if (stop === "no-answer") {
      troubleTries = 0;
      timer = setTimeout(probeThenSend, PROBE_GAP_MS);
    } else if (stop === "trouble") {
      timer = setTimeout(replay, BACKOFF_MS[Math.min(troubleTries, BACKOFF_MS.length - 1)]);
      troubleTries += 1;
    } else {
      timer = setTimeout(replay, LOGIN_RETRY_MS);
    }
  }

  function probeThenSend() {
    timer = null;
    probes += 1;
    var within = probes % PROBE_FULL_EVERY === 0 ? entryTimeoutMs() : PROBE_TIMEOUT_MS;
    fetchWithin("/healthz", { cache: "no-store", credentials: "same-origin" }, within)
      .then(function (response) {
        if (!stationTrouble(response.status)) return replay();
        status.trouble = "It answered " + response.status + ".";
        afterAttempt("trouble");
      }, function () {
        if (!timer && !replaying) afterAttempt("no-answer");
      });
  }

  // The outbox is empty again: show what the station now says about the job.
  function showStationState() {
    if (screen.savedCopyAt !== null || screen.offlinePage) { location.reload(); return; }
    if (document.getElementById("job") && window.htmx) {
      window.htmx.ajax("GET", location.pathname + location.search,
                       { target: "#job", swap: "outerHTML" });
    }
  }

  // Other tabs of this tablet share the outbox: tell them when it changes.
  var channel = "BroadcastChannel" in window ? new BroadcastChannel("sparkward-outbox") : null;
  function changed() {
    if (channel) channel.postMessage("changed");
    // This page's tablet copy of the job (static/js/tablet_job.js) follows the outbox.
    document.dispatchEvent(new CustomEvent("sparkward:outbox-changed"));
    return screen.render();
  }
  if (channel) channel.onmessage = function () {
    document.dispatchEvent(new CustomEvent("sparkward:outbox-changed"));
    screen.render();
  };

  document.addEventListener("click", function (event) {
    var button = event.target.closest("[data-dismiss]");
    if (button) store.dismiss(button.dataset.dismiss).then(changed);
    if (event.target.closest("[data-outbox-send-now]")) {
      screen.say("Sending now…", "");
      replay().then(function () {
        if (status.waiting && (status.noAnswer || status.trouble)) {
          screen.say("Not sent yet:", (status.noAnswer ? "no answer from the station." :
            "the station had a problem.") + " Your entries stay on this tablet and are " +
            "tried again by themselves.", true);
        } else if (!status.waiting) {
          screen.say("Sent:", "every entry of yours has reached the station.");
        }
      });
    }
  });
  document.addEventListener("htmx:afterSwap", function () { screen.render(); });

  window.addEventListener("online", function () {
    replay().then(function (sent) {
      if (!sent && (screen.savedCopyAt !== null || screen.offlinePage)) location.reload();
    });
  });

  document.addEventListener("DOMContentLoaded", function () {
    screen.attach();
    if (!window.indexedDB) return;
    screen.render().then(replay);
  });

  // For a look from the browser's console (and the browser tests): what waits, what was
  // refused, and a way to send again now.
  window.sparkwardOutbox = {
    entries: store.entries,
    refusals: store.refusals,
    keep: function (entry) {
      return store.keep(entry).then(function (kept) { changed(); return kept; });
    },
    replay: replay,
    entryTimeoutMs: entryTimeoutMs,
  };
})();
