// How a step the tablet carries is shown while the station cannot be reached: its heading
// and text as the station rendered them (web/carry.py), and a form with the same fields and
// address as the station's own, so the outbox (static/js/outbox.js) keeps and sends it.
(function () {
  "use strict";

  var R = window.sparkwardTabletRules;
  var MAX_TAG_LENGTH = R.MAX_TAG_LENGTH, mmss = R.mmss;
  var waitLeft = R.waitLeft, breakersLeft = R.breakersLeft;
  var KEPT = "kept on this tablet, not yet at the station";
  var CHECKED_ON_ARRIVAL = "When the entries reach the station it checks each again, with " +
    "what the tablet cannot know here (other jobs on this engine, tags hung since, your " +
    "authorisations); its answer wins, and anything it refuses is shown here with what to do.";

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
      .filter(function (pair) { return pair[1]; })  // an anytime entry names no step
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
    discharge_wait: function (v, step) {
      var left = waitLeft(v, step, Date.now());
      var box = el("div", { "class": "gate", "data-testid": "discharge" });
      var line = el("p", { "class": "countdown-line" });
      line.append(el("span", { "class": "countdown", "data-testid": "countdown",
                               "data-tablet-wait": step.id, "aria-live": "polite" },
                     left === null ? "—" : mmss(Math.ceil(left))),
                  " ", el("span", { "data-testid": "countdown-label" },
                          left === null ? "the disconnection is not recorded"
                          : left > 0 ? "to wait" : "— the wait is over"));
      box.append(line);
      box.append(el("p", {}, "Counted by this tablet's clock from the disconnection" +
        (v.powerOff ? " (" + v.powerOff.slice(11, 16) + " on this tablet)" : "") + ": " +
        Math.round((v.state.counted_margin_s || 0)) + " s more than the station asks, " +
        "because the tablet's clock is the only witness of this wait until the station " +
        "has the entries."));
      var caution = el("p", { "class": "caution-box" });
      caution.append(el("span", { "class": "kind kind-caution" }, "◆ CAUTION"),
        " A failed bleed resistor keeps the charge far longer than this: ground the " +
        "high-tension lead with the insulated probe before anyone handles it, whatever " +
        "the clock says.");
      box.append(caution);
      var form = entryForm(v, step, "step_done", "done", "Wait served: go on to the lead");
      if (left === null || left > 0) form.querySelector("button").disabled = true;
      return [box, form];
    },
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
    var make = FORMS[kind] || (R.KINDS[kind] && R.KINDS[kind].form);
    make(v, step, entryForm).forEach(function (node) { article.append(node); });
    R.PANELS.forEach(function (panel) {
      var node = panel(v, step, entryForm);
      if (node) article.append(node);
    });
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

  window.sparkwardTabletSteps = { el: el, entryForm: entryForm, stepArticle: stepArticle,
                                  markProgress: markProgress, KEPT: KEPT };
})();
