// Sparkward's tablet copy of a job: what lets a mechanic work on when the station cannot be
// reached. Every job page and fragment carries the job as the station knows it (web/carry.py);
// this keeps the newest of it in IndexedDB with the job's steps (fetched once per job), adds
// the entries waiting in the outbox (static/js/outbox.js), and, while any wait, shows the
// next step from the tablet's copy. Offline it applies the procedure's own rules, as the
// station words them, to what the tablet knows; the station checks every entry again when
// it arrives and its answer wins. Steps the tablet cannot judge say so and wait.
(function () {
  "use strict";

  var R = window.sparkwardTabletRules, S = window.sparkwardTabletSteps;
  var completes = R.completes, tagRefusal = R.tagRefusal, breakersLeft = R.breakersLeft;
  var waitLeft = R.waitLeft, waitRefusal = R.waitRefusal, mmss = R.mmss;
  var el = S.el, stepArticle = S.stepArticle, markProgress = S.markProgress;
  var KINDS = R.KINDS;

  // ---- The tablet's store (static/js/job_copies.js) ----
  var C = window.sparkwardJobCopies;
  var read = C.read, write = C.write;

  function pageState() {
    var job = document.getElementById("job");
    if (!job || !job.dataset.jobCarry) return null;
    try { return JSON.parse(job.dataset.jobCarry); } catch (error) { return null; }
  }

  // Keep the station's word, and the job's steps once.
  function remember(state) {
    return C.keepState(state).then(function (best) {
      return stepsFor(best).then(function (steps) { return { state: best, steps: steps }; });
    });
  }
  function stepsFor(state) {
    return read("steps", state.job_id).then(function (kept) {
      // Kept for the job's revision; fetched again when the station's word comes from a
      // later day than the kept register of instruments (web/carry.py, carried_on).
      var day = String(state.station_time || "").slice(0, 10);
      if (kept && kept.revision === state.revision && !(day > (kept.carried_on || day))) {
        return kept;
      }
      return fetch("/jobs/" + state.job_id + "/carry", { credentials: "same-origin" })
        .then(function (response) {
          if (!response.ok) throw new Error("steps: " + response.status);
          return response.json();
        })
        .then(function (steps) { return write("steps", steps); })
        .catch(function () { return kept; });  // offline: whatever was kept, if anything
    });
  }

  // ---- The tablet's view: the station's state plus the outbox's entries for the job ----
  function fieldsOf(entry) {
    var out = {};
    entry.fields.forEach(function (pair) {
      if (pair[0] in out) out[pair[0]] = [].concat(out[pair[0]], pair[1]);
      else out[pair[0]] = pair[1];
    });
    return out;
  }

  function view(state, carried, entries) {
    var order = carried.steps.map(function (s) { return s.id; });
    var byId = {};
    carried.steps.forEach(function (s) { byId[s.id] = s; });
    var done = Object.assign({}, state.completed);
    var onTablet = {};
    var tags = state.tags.map(function (t) { return Object.assign({}, t); });
    var doubts = [];
    // When the input came off, by this tablet's clock: the station's record of it (the
    // device's time it was made at, else the station's), or a disconnection kept here.
    var powerOff = state.power_off_device || state.power_off;
    var v = { state: state, carried: carried, byId: byId, done: done, onTablet: onTablet,
              tags: tags, doubts: doubts, waiting: entries.length };
    entries.forEach(function (entry) {
      var f = fieldsOf(entry);
      var step = byId[f.step];
      if (!step) {  // an anytime entry (e.g. the lead grounded again): observers only
        R.OBSERVERS.forEach(function (observe) { observe(v, null, f, entry, false); });
        return;
      }
      var next = order.find(function (id) { return !(id in done); });
      if (f.kind === "breaker_tagged") {
        var number = String(f.tag || "").trim();
        var found = tags.find(function (t) { return t.number === number; });
        if (found && step.confirm_existing) found.counts_here = true;  // a tag found hanging
        else tags.push({ breaker: f.breaker, number: number, owner: "you", mine: true,
                         counts_here: true, this_job: true, on_tablet: true,
                         job_id: state.job_id, applied_by: "you", applied_by_me: true,
                         applied_at: f.device_time || entry.queued_at });
        return;
      }
      if (step.id !== next) {
        doubts.push(step.id);  // made for a step that was not next here: the station decides
        return;
      }
      if (KINDS[step.kind] && KINDS[step.kind].onEntry) KINDS[step.kind].onEntry(v, step, f, entry);
      var completed = completes(step, f, v);
      if (completed) {
        done[step.id] = { event_id: entry.event_id, kind: f.kind, at: entry.queued_at };
        onTablet[step.id] = entry;
        if (step.kind === "check" && step.power === "removed") {
          powerOff = f.device_time || entry.queued_at;
        }
      }
      R.OBSERVERS.forEach(function (observe) { observe(v, step, f, entry, completed); });
    });
    var nextId = order.find(function (id) { return !(id in done); }) || null;
    v.next = nextId ? byId[nextId] : null;
    v.powerOff = powerOff;
    return v;
  }

  // Show the tablet's view in place of the station's step while entries wait.
  function show(v) {
    var job = document.getElementById("job");
    var column = job && job.querySelector(".step-col");
    if (!column) return;
    var old = column.querySelector("[data-testid=step], [data-testid=job-complete]");
    var shown = old && old.dataset.stepId;
    markProgress(v);
    if (!v.next) return;
    if (shown === v.next.id && !v.waiting) return;  // the station's own screen is current
    var look = JSON.stringify([v.next.id, v.waiting, v.tags]);
    if (old && old.dataset.tabletLook === look) return;  // already shows this
    var article = stepArticle(v, v.next);
    article.dataset.tabletLook = look;
    if (old) {
      // What was being typed on the same step stays (another entry of it was just kept).
      old.querySelectorAll("input[id]:not([type=hidden])").forEach(function (input) {
        var same = article.querySelector("#" + CSS.escape(input.id));
        if (same && shown === v.next.id && input.value && !input.closest("form").querySelector(
          "[data-testid=tablet-refusal]")) same.value = input.value;
      });
      old.replaceWith(article);
    } else {
      column.prepend(article);
    }
    if (window.htmx) window.htmx.process(article);
  }

  var current = null;  // the job this page shows, as last worked out
  function refresh() {
    var fromPage = pageState();
    if (!fromPage || !window.indexedDB) return Promise.resolve(null);
    return remember(fromPage).then(function (kept) {
      if (!kept.steps || !window.sparkwardOutbox) return null;
      return window.sparkwardOutbox.entries().then(function (entries) {
        var mine = entries.filter(function (e) { return e.url === kept.steps.record_url; })
          .sort(function (a, b) { return a.seq - b.seq; });
        current = view(kept.state, kept.steps, mine);
        // Entries wait, or the station said more (on another page) than this copy shows.
        if (mine.length || kept.state.head.seq !== fromPage.head.seq) show(current);
        return current;
      });
    }).catch(function () { return null; });
  }

  // The tablet refuses what the station's rules would certainly refuse, before it is kept.
  document.addEventListener("htmx:beforeRequest", function (event) {
    var form = event.detail.elt.closest && event.detail.elt.closest("form[data-tablet-form]");
    if (!form || !current) return;
    var kind = form.querySelector("[name=kind]").value;
    var named = form.querySelector("[name=step]");
    var step = named ? current.byId[named.value] : null;
    var reason = null;
    R.GUARDS.some(function (guard) { return (reason = guard(current, step, form)); });
    if (reason || !step) {
      // a guard refused it, or an anytime entry the guards let through
    } else if (kind === "breaker_tagged") {
      reason = tagRefusal(current, step, form.querySelector("[name=breaker]").value,
                          form.querySelector("[name=tag]").value);
    } else if (step.kind === "lockout" && breakersLeft(current, step).length) {
      reason = "Tag every breaker first (" + breakersLeft(current, step).join(", ") + ").";
    } else if (step.kind === "discharge_wait") {
      reason = waitRefusal(waitLeft(current, step, Date.now()));
    } else if (KINDS[step.kind] && KINDS[step.kind].refusal) {
      reason = KINDS[step.kind].refusal(current, step, form);
    }
    if (!reason) return;
    event.preventDefault();
    event.stopPropagation();  // not kept, not sent: the outbox never sees it
    var said = form.querySelector("[data-testid=tablet-refusal]");
    if (!said) {
      said = el("p", { "class": "alert", role: "alert", "data-testid": "tablet-refusal" });
      form.prepend(said);
    }
    said.textContent = "✗ " + reason;
  }, true);

  // The tablet's own countdown: from the disconnection's time, so a reload never restarts it.
  setInterval(function () {
    if (!current || !current.next || current.next.kind !== "discharge_wait") return;
    var shown = document.querySelector("[data-tablet-wait]");
    if (!shown) return;
    var left = waitLeft(current, current.next, Date.now());
    if (left === null) return;
    shown.textContent = mmss(Math.ceil(left));
    var label = document.querySelector("[data-tablet-step] [data-testid=countdown-label]");
    if (label) label.textContent = left > 0 ? "to wait" : "— the wait is over";
    var button = document.querySelector("[data-tablet-step] [data-testid=done]");
    if (button && left <= 0 && !button.dataset.queued) button.disabled = false;
  }, 250);

  document.addEventListener("sparkward:outbox-changed", refresh);
  document.addEventListener("htmx:afterSwap", refresh);
  document.addEventListener("DOMContentLoaded", refresh);

  window.sparkwardTabletJob = {
    refresh: refresh,
    // The mirrored rules, for the test that holds them to the station's (tests/e2e).
    rules: R,
    state: function (jobId) { return read("states", jobId); },
    keep: function (state) { return remember(state); },
    steps: function (jobId) { return read("steps", jobId); },
  };
})();
