// The rules the tablet applies to a job it carries, mirrored from the station's own
// (webapp/domain: execution.py, gates.py, placement.py) and in its words. The station checks
// every entry again when it arrives and its answer wins; tests/e2e/test_tablet_rules_parity.py
// holds these to the station's verdicts case for case.
(function () {
  "use strict";

  var MAX_TAG_LENGTH = 24;  // as webapp/domain/gates.py

  // More step kinds, each in a file of its own loaded after this one and before
  // tablet_job.js: KINDS[kind] = { completes(step, fields, v), onEntry(v, step, fields,
  // entry), refusal(v, step, form) -> words or null, form(v, step, entryForm) -> nodes }.
  var KINDS = {};
  // Functions (v, step, fields, entry, completed) told of every entry the tablet's view
  // applies, whatever its step's kind (e.g. to follow when the lead was last grounded).
  var OBSERVERS = [];
  // Functions (v, step, form) -> words or null, asked before any entry is kept, whatever its
  // kind (e.g. isolation verified and the lead grounded); and (v, step, entryForm) -> a node
  // or null, shown under every step the tablet shows (e.g. "Lead grounded again").
  var GUARDS = [];
  var PANELS = [];

  // The event that completes each kind the tablet may record (as domain/execution.py).
  function completes(step, f, v) {
    if (KINDS[step.kind] && KINDS[step.kind].completes) return KINDS[step.kind].completes(step, f, v);
    if (step.kind === "warning" || step.kind === "caution") return f.kind === "acknowledged";
    if (step.kind === "note" || step.kind === "lockout" || step.kind === "discharge_wait") {
      return f.kind === "step_done";
    }
    if (step.kind === "check") {
      if (f.kind !== "step_done") return false;
      var ticked = [].concat(f.items || []).map(Number);
      return (step.items || []).every(function (_, i) { return ticked.indexOf(i) >= 0; });
    }
    return false;
  }


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
    if (found) return tagAlreadyRecorded(number, breaker, found);
    var here = v.tags.filter(function (t) { return t.breaker === breaker; });
    if (step.confirm_existing && here.length) {
      return "No tag " + number + " hangs on " + breaker + "; the station has " +
        here.map(function (t) { return t.number; }).sort().join(", ") +
        " there. Check the number on the tag.";
    }
    var held = here.find(function (t) { return t.this_job; });
    if (held) return breakerAlreadyTagged(number, breaker, held);
    return null;
  }

  // As webapp/domain/entry_conflicts.py words them.
  function stationTime(iso) {
    if (!iso) return "an unknown time";
    var at = new Date(iso);
    if (isNaN(at)) return iso;
    var utc = at.toISOString();
    return utc.slice(0, 10) + " " + utc.slice(11, 16) + " UTC";
  }
  function tagAlreadyRecorded(number, breaker, existing) {
    if (existing.breaker !== breaker) {
      return "Tag " + number + " already hangs on breaker " + existing.breaker + "; each tag " +
        "has its own number. Check the number on the tag you hung on " + breaker + ".";
    }
    var who = existing.mine ? "you" : existing.owner;
    var at = stationTime(existing.applied_at);
    var where = existing.this_job ? "for this job" : "for job " + existing.job_id;
    if (existing.mine) {
      return "Tag " + number + " on " + breaker + " is already recorded " + where +
        ", as yours, at " + at + ": this entry is not needed and nothing more is to be done.";
    }
    return "Your entry of tag " + number + " on " + breaker + " is not recorded: " + who +
      " recorded tag " + number + " on " + breaker + " " + where + " at " + at + ", so the " +
      "station has " + who + " as its owner. If you hung tag " + number + ", tell " + who +
      " and your supervisor now: only the owner on record takes it off.";
  }
  function breakerAlreadyTagged(number, breaker, existing) {
    var who = existing.applied_by_me ? "you" : existing.applied_by;
    return "Your tag " + number + " on " + breaker + " is not recorded: " + who +
      " recorded tag " + existing.number + " on " + breaker + " for this job at " +
      stationTime(existing.applied_at) + " first, and a job holds one tag on a breaker. " +
      "Take your tag " + number + " off " + breaker + "; the breaker stays locked out under " +
      "tag " + existing.number + ", which only its owner takes off. Check with " + who +
      " before you work on the circuit, and follow your shop's lockout/tagout procedure.";
  }
  // Seconds of the discharge wait still to serve by this tablet's clock: the station's
  // requirement plus the margin it asks of a wait a tablet counted (domain/placement.py).
  function waitLeft(v, step, nowMs) {
    if (!v.powerOff) return null;
    var required = (v.state.discharge || {})[step.id];
    if (required === undefined) return null;
    var served = (nowMs - Date.parse(v.powerOff)) / 1000;
    return Math.max(0, required + (v.state.counted_margin_s || 0) - served);
  }
  function waitRefusal(left) {
    if (left === null) {
      return "The exciter's input is not recorded as disconnected: disconnect it first; " +
        "the wait counts from then.";
    }
    if (left <= 0) return null;
    var whole = Math.ceil(left);
    return "The discharge wait is not over: " + mmss(whole) + " to go. Do not touch the " +
      "lead before then, and ground it first.";
  }
  function mmss(seconds) {
    var s = seconds % 60;
    return Math.floor(seconds / 60) + ":" + (s < 10 ? "0" : "") + s;
  }
  function breakersLeft(v, step) {
    return step.breakers.filter(function (b) {
      return !v.tags.some(function (t) { return t.breaker === b.id && t.counts_here; });
    }).map(function (b) { return b.id; });
  }

  window.sparkwardTabletRules = {
    KINDS: KINDS, OBSERVERS: OBSERVERS, GUARDS: GUARDS, PANELS: PANELS, stationTime: stationTime,
    MAX_TAG_LENGTH: MAX_TAG_LENGTH, completes: completes, tagRefusal: tagRefusal,
    breakersLeft: breakersLeft, waitLeft: waitLeft, waitRefusal: waitRefusal, mmss: mmss,
  };
})();
