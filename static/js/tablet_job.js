// Sparkward's tablet copy of a job: what lets a mechanic work on when the station cannot be
// reached. Every job page and fragment carries the job as the station knows it (web/carry.py);
// this keeps the newest of it in IndexedDB with the job's steps (fetched once per job), adds
// the entries waiting in the outbox (static/js/outbox.js), and, while any wait, shows the
// next step from the tablet's copy. Offline it applies the procedure's own rules, as the
// station words them, to what the tablet knows; the station checks every entry again when
// it arrives and its answer wins. Steps the tablet cannot judge say so and wait.
(function () {
  "use strict";

  var DB_NAME = "sparkward-jobs";
  var MAX_TAG_LENGTH = 24;  // as webapp/domain/gates.py
  var KEPT = "kept on this tablet, not yet at the station";
  var CHECKED_ON_ARRIVAL = "When the entries reach the station it checks each again, with " +
    "what the tablet cannot know here (other jobs on this engine, tags hung since, your " +
    "authorisations); its answer wins, and anything it refuses is shown here with what to do.";

  // ---- The tablet's store: "states" (the station's latest word per job), "steps" ----
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
        request.onerror = function () { reject(request.error); };
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

  function pageState() {
    var job = document.getElementById("job");
    if (!job || !job.dataset.jobCarry) return null;
    try { return JSON.parse(job.dataset.jobCarry); } catch (error) { return null; }
  }

  // Keep the station's word, and the job's steps once.
  function remember(state) {
    return read("states", state.job_id).then(function (kept) {
      var best = newer(kept, state);
      return (best === kept ? Promise.resolve(kept) : write("states", state))
        .then(function () { return stepsFor(state); })
        .then(function (steps) { return { state: best, steps: steps }; });
    });
  }
  function stepsFor(state) {
    return read("steps", state.job_id).then(function (kept) {
      if (kept && kept.revision === state.revision) return kept;
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
    entries.forEach(function (entry) {
      var f = fieldsOf(entry);
      var step = byId[f.step];
      if (!step) return;
      var next = order.find(function (id) { return !(id in done); });
      if (f.kind === "breaker_tagged") {
        var number = String(f.tag || "").trim();
        var found = tags.find(function (t) { return t.number === number; });
        if (found && step.confirm_existing) found.counts_here = true;  // a tag found hanging
        else tags.push({ breaker: f.breaker, number: number, owner: "you", mine: true,
                         counts_here: true, this_job: true, on_tablet: true });
        return;
      }
      if (step.id !== next) {
        doubts.push(step.id);  // made for a step that was not next here: the station decides
        return;
      }
      if (completes(step, f)) {
        done[step.id] = { event_id: entry.event_id, kind: f.kind, at: entry.queued_at };
        onTablet[step.id] = entry;
      }
    });
    var nextId = order.find(function (id) { return !(id in done); }) || null;
    return { state: state, carried: carried, byId: byId, done: done, onTablet: onTablet,
             tags: tags, next: nextId ? byId[nextId] : null, doubts: doubts,
             waiting: entries.length };
  }

  // The event that completes each kind the tablet may record (as domain/execution.py).
  function completes(step, f) {
    if (step.kind === "warning" || step.kind === "caution") return f.kind === "acknowledged";
    if (step.kind === "note" || step.kind === "lockout") return f.kind === "step_done";
    if (step.kind === "check") {
      if (f.kind !== "step_done") return false;
      var ticked = [].concat(f.items || []).map(Number);
      return (step.items || []).every(function (_, i) { return ticked.indexOf(i) >= 0; });
    }
    return false;
  }

  // ---- Rules the tablet mirrors, in the station's words (webapp/domain/gates.py) ----
  function tagRefusal(v, step, breaker, raw) {
    var number = String(raw || "").trim();
    if (!number) return "Write the number printed on the tag.";
    if (number.length > MAX_TAG_LENGTH) {
      return "A tag number is at most " + MAX_TAG_LENGTH + " characters; check what was typed.";
    }
    var found = v.tags.find(function (t) { return t.number === number; });
    if (found && step.confirm_existing) {
      if (found.breaker !== breaker) {
        return "Tag " + number + " hangs on " + found.breaker + ", not on " + breaker +
          ": check the breaker and the number on the tag.";
      }
      if (found.counts_here) return "Tag " + number + " already counts for this job.";
      return null;
    }
    if (found) {
      return "Tag " + number + " already hangs on breaker " + found.breaker +
        "; each tag has its own number.";
    }
    var here = v.tags.filter(function (t) { return t.breaker === breaker; });
    if (step.confirm_existing && here.length) {
      return "No tag " + number + " hangs on " + breaker + "; the station has " +
        here.map(function (t) { return t.number; }).sort().join(", ") +
        " there. Check the number on the tag.";
    }
    if (here.some(function (t) { return t.this_job; })) {
      return "This job already has a tag on " + breaker + ".";
    }
    return null;
  }
  function breakersLeft(v, step) {
    return step.breakers.filter(function (b) {
      return !v.tags.some(function (t) { return t.breaker === b.id && t.counts_here; });
    }).map(function (b) { return b.id; });
  }

  // ---- On screen ----
  function el(tag, attrs, text) {
    var node = document.createElement(tag);
    Object.keys(attrs || {}).forEach(function (k) { node.setAttribute(k, attrs[k]); });
    if (text !== undefined) node.textContent = text;
    return node;
  }
  function newEventId() {
    return crypto.randomUUID ? crypto.randomUUID() : String(Date.now()) + Math.random();
  }
  function token() {
    var tag = document.querySelector('meta[name="csrf-token"]');
    return tag ? tag.getAttribute("content") : "";
  }

  // A form the outbox knows: the same fields and address as the station's own.
  function entryForm(v, step, kind, testid, label, extra) {
    var form = el("form", { "class": "event-form", method: "post",
                            action: v.carried.record_url, "hx-post": v.carried.record_url,
                            "hx-target": "#job", "hx-swap": "outerHTML",
                            "hx-disabled-elt": "find button", "data-tablet-form": "" });
    [["csrf_token", token()], ["event_id", newEventId()], ["kind", kind], ["step", step.id]]
      .forEach(function (pair) {
        form.append(el("input", { type: "hidden", name: pair[0], value: pair[1] }));
      });
    form.append(el("input", { type: "hidden", name: "device_time", value: "",
                              "data-device-time": "" }));
    if (extra) extra(form);
    form.append(el("button", { "class": "button primary", type: "submit",
                               "data-testid": testid }, label));
    return form;
  }

  var FORMS = {
    advisory: function (v, step) {
      return [entryForm(v, step, "acknowledged", "acknowledge",
                        "I have read this " + step.kind.toUpperCase() + " and will follow it")];
    },
    note: function (v, step) {
      return [entryForm(v, step, "step_done", "continue", "Read — continue")];
    },
    check: function (v, step) {
      return [entryForm(v, step, "step_done", "done", "Done", function (form) {
        if (!(step.items || []).length) return;
        form.append(el("input", { type: "hidden", name: "items_offered", value: "1" }));
        var set = el("fieldset", { "class": "items" });
        set.append(el("legend", {}, "Confirm each item"));
        step.items.forEach(function (item, i) {
          var label = el("label", { "class": "tick" });
          label.append(el("input", { type: "checkbox", name: "items", value: String(i),
                                     required: "", "data-testid": "item-" + i }), " " + item);
          set.append(label);
        });
        form.append(set);
      })];
    },
    lockout: function (v, step) {
      var list = el("ul", { "class": "breakers" });
      step.breakers.forEach(function (b) {
        var item = el("li", { "class": "breaker", "data-testid": "breaker-" + b.id });
        var name = el("p", { "class": "breaker-name" });
        name.append(el("strong", {}, b.id), " — " + b.label);
        item.append(name);
        var counted = v.tags.filter(function (t) { return t.breaker === b.id && t.counts_here; });
        counted.forEach(function (t) {
          item.append(el("p", { "class": "ok", "data-testid": "tagged-" + b.id },
                         "✓ Tagged " + t.number + (t.on_tablet ? " — " + KEPT : ": " +
                                                   t.owner + "'s tag")));
        });
        if (!counted.length) {
          item.append(entryForm(v, step, "breaker_tagged", "tag-" + b.id,
                                "Opened, collared and tagged", function (form) {
            form.append(el("input", { type: "hidden", name: "breaker", value: b.id }));
            form.append(el("label", { "for": "tag-" + b.id }, "Tag number on " + b.id));
            form.append(el("input", { id: "tag-" + b.id, name: "tag", required: "",
                                      maxlength: String(MAX_TAG_LENGTH), autocomplete: "off",
                                      "data-testid": "tag-number-" + b.id }));
          }));
        }
        list.append(item);
      });
      var left = breakersLeft(v, step);
      return [list, entryForm(v, step, "step_done", "done", left.length
        ? "Tag every breaker first (" + left.join(", ") + ")"
        : "Lockout confirmed: every breaker open and tagged")];
    },
  };

  function stepArticle(v, step) {
    var article = el("article", { "class": "step step-" + step.kind, "data-testid": "step",
                                  "data-step-id": step.id, "data-step-kind": step.kind,
                                  "data-tablet-step": "" });
    var note = el("p", { "class": "tablet-note", "data-testid": "tablet-copy" });
    note.append(el("strong", {}, "From the tablet's copy of this job:"),
                " " + v.waiting + (v.waiting === 1 ? " entry is " : " entries are ") + KEPT +
                ". " + CHECKED_ON_ARRIVAL);
    article.append(note);
    var head = document.createElement("template");
    head.innerHTML = step.head;  // the station's own rendering of the step's text
    article.append(head.content);
    if (!step.offline) {
      var box = el("div", { "class": "waiting", "data-testid": "needs-station" });
      box.append(el("p", {}, ""));
      box.firstChild.append(el("strong", {}, "This step needs the station."),
                            " " + step.needs_station);
      box.append(el("p", {}, "Your entries so far wait on this tablet and are sent in " +
        "order when the connection is back; this step can be done then. Do not go on " +
        "from this screen: keep to the approved procedure."));
      article.append(box);
      return article;
    }
    var kind = step.kind === "warning" || step.kind === "caution" ? "advisory" : step.kind;
    FORMS[kind](v, step).forEach(function (node) { article.append(node); });
    return article;
  }

  function markProgress(v) {
    var count = 0;
    v.carried.steps.forEach(function (s) {
      var row = document.querySelector("[data-testid=progress-" + CSS.escape(s.id) + "]");
      if (!row) return;
      var kept = row.querySelector("[data-tablet-kept]");
      var atStation = v.state.completed[s.id];
      if (atStation && row.dataset.status !== "done") {  // a copy older than the station's word
        row.dataset.status = "done";
        row.append(el("span", { "class": "meta", "data-testid": "progress-station-" + s.id },
                      "✓ done at the station: " + atStation.by));
      }
      if (s.id in v.onTablet) {
        count += 1;
        row.dataset.status = "tablet";
        if (!kept) {
          kept = el("span", { "class": "meta", "data-tablet-kept": "",
                              "data-testid": "progress-kept-" + s.id }, "✓ " + KEPT);
          row.append(kept);
        }
      } else if (kept) {
        kept.remove();
      }
    });
    var progress = document.querySelector("[data-testid=progress]");
    if (progress) {
      var doneHere = Object.keys(v.state.completed).length;
      progress.textContent = (doneHere + count) + " of " + v.carried.steps.length +
        " steps done" + (count ? " (" + count + " " + KEPT + ")" : "");
    }
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
    var step = current.byId[form.querySelector("[name=step]").value];
    var reason = null;
    if (kind === "breaker_tagged") {
      reason = tagRefusal(current, step, form.querySelector("[name=breaker]").value,
                          form.querySelector("[name=tag]").value);
    } else if (step.kind === "lockout" && breakersLeft(current, step).length) {
      reason = "Tag every breaker first (" + breakersLeft(current, step).join(", ") + ").";
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

  document.addEventListener("sparkward:outbox-changed", refresh);
  document.addEventListener("htmx:afterSwap", refresh);
  document.addEventListener("DOMContentLoaded", refresh);

  window.sparkwardTabletJob = {
    refresh: refresh,
    // The mirrored rules, for the test that holds them to the station's (tests/e2e).
    rules: { tagRefusal: tagRefusal, completes: completes, breakersLeft: breakersLeft },
    state: function (jobId) { return read("states", jobId); },
    steps: function (jobId) { return read("steps", jobId); },
  };
})();
