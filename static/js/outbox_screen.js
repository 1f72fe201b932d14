// What the outbox shows on the page: the count in the top bar, what was just saved on the
// tablet, why entries wait (no answer, a station in trouble, a log-in needed), the "Send
// now" button, and the entries the station refused. It also reads, from the page, what an
// entry is in the mechanic's words. Storage is outbox_store.js; sending is outbox.js.
(function () {
  "use strict";

  var store = window.sparkwardOutboxStore;

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

  // In the mechanic's words: which job, which step, which button (and a tag and breaker).
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
    var said = button ? "“" + button.textContent.trim() + "”" : "";
    var breaker = form.querySelector("[name=breaker]");
    var tag = form.querySelector("[name=tag]");
    if (tag && tag.value.trim()) {
      said += (said ? ": " : "") + "tag " + tag.value.trim() +
        (breaker ? " on " + breaker.value : "");
    }
    if (said) parts.push(said);
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
  // Why this person's entries wait, as the last attempt found it (set by outbox.js).
  var status = { loginNeeded: false, trouble: null, noAnswer: false, waiting: 0 };
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
    if (mine.length && status.loginNeeded) {
      paragraph(notice, "Your entries stay on this tablet and are sent, in order, once you " +
        "have logged in again.", "The station asks you to log in again.");
      var link = document.createElement("a");
      link.className = "button";
      link.href = "/login?next=" + encodeURIComponent(location.pathname);
      link.textContent = "Log in again";
      link.dataset.testid = "outbox-log-in";
      notice.append(link);
    }
    if (mine.length && status.noAnswer && savedCopyAt === null) {
      paragraph(notice, "Your entries stay on this tablet; it keeps asking, and sends them " +
        "as soon as the station answers.", "No answer from the station yet.");
    }
    if (mine.length && status.trouble) {
      var p = paragraph(notice, status.trouble + " Your entries stay on this tablet and are " +
        "tried again in a few seconds; nothing is lost.",
        "The station had a problem and could not take your entries just now.");
      p.dataset.testid = "outbox-trouble";
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

  // "Send now": made here (the page's template has no place for it), shown while this
  // person's entries wait.
  function sendNowButton() {
    if (box.sendNow || !box.notice) return box.sendNow || null;
    var button = document.createElement("button");
    button.type = "button";
    button.className = "button";
    button.dataset.testid = "outbox-send-now";
    button.dataset.outboxSendNow = "";
    button.textContent = "Send now";
    button.hidden = true;
    box.notice.before(button);
    box.sendNow = button;
    return button;
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
    return Promise.all([store.entries(), store.refusals()]).then(function (found) {
      var entries = found[0];
      var who = me();
      status.waiting = entries.filter(function (e) {
        return who && e.person_id === who.id;
      }).length;
      showCount(entries.length);
      showNotice(entries, who);
      var sendNow = sendNowButton();
      if (sendNow) sendNow.hidden = status.waiting === 0;
      showRefused(found[1]);
      if (!entries.length && box.saved && !box.saved.classList.contains("problem")) {
        box.saved.hidden = true;
      }
      markForms(entries, firstRender && savedCopyAt !== null);
      firstRender = false;
    });
  }

  function attach() {
    box = { count: element("outbox-count"), saved: element("outbox-saved"),
            notice: element("outbox-notice"), refused: element("outbox-refused") };
  }

  window.sparkwardOutboxScreen = {
    meta: meta, me: me, savedCopyAt: savedCopyAt, offlinePage: offlinePage,
    isStepForm: isStepForm, carriesSecret: carriesSecret, entryFrom: entryFrom,
    status: status, say: say, render: render, attach: attach,
  };
})();
