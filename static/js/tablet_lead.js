// Energy control at the work on the tablet's copy of a job, mirrored from
// webapp/domain/isolation.py in its words: work that disturbs a connection or handles a part
// waits for the isolation check (done within limits, at the station or on this tablet), and
// a step that handles the lead or the exciter waits for the lead grounded within the
// station's window (GROUNDING_VALID_S) by this tablet's clock. The grounding lapsed: the
// station's own "Lead grounded again" entry is offered here too. The station checks every
// entry again when it arrives and its answer wins.
(function () {
  "use strict";

  var R = window.sparkwardTabletRules, S = window.sparkwardTabletSteps;
  var el = S.el;
  var COMPLETING = { check: "step_done", part: "part_recorded", reading: "reading_recorded" };

  var NOT_VERIFIED = "The isolation is not verified on this job: after the lockout, check " +
    "that the energy is really off (the isolation check step) before you disturb a connection " +
    "or handle a part. Voltage present stops the work until it is found and removed.";
  var NOT_GROUNDED = "The high-tension lead has not been grounded on this job since the input " +
    "was disconnected. Ground the lead's terminal and the exciter output with the insulated " +
    "probe and record it before you handle the lead or the exciter.";

  // The tablet's view of the lead: the station's word, then each entry kept here.
  function lead(v) {
    if (!v.lead) {
      v.lead = { grounded: v.state.lead_grounded_device || v.state.lead_grounded || null,
                 isolation: !!v.state.isolation_verified };
    }
    return v.lead;
  }

  R.OBSERVERS.push(function (v, step, f, entry, completed) {
    var state = lead(v);
    var at = f.device_time || entry.queued_at;
    if (!step) {
      if (f.kind === "lead_grounded" && groundingStepDone(v)) state.grounded = at;
      return;
    }
    if (!completed) return;
    if (step.grounds_lead) state.grounded = at;
    if (step.kind === "reading" && step.isolation) state.isolation = true;
  });

  function groundingStepDone(v) {
    var id = v.carried.grounding_step;
    return !!id && id in v.done;
  }

  function hhmmUtc(iso) {
    var at = new Date(iso);
    return isNaN(at) ? "?" : at.toISOString().slice(11, 16);
  }
  // domain/gates.py mmss: rounded up, so a time is never shown shorter.
  function mmssUp(seconds) {
    var value = Math.max(seconds, 0);
    return R.mmss(Math.floor(value) + (value % 1 > 0 ? 1 : 0));
  }
  function lapsed(groundedIso, age, validS) {
    return "The lead was last grounded at " + hhmmUtc(groundedIso) + " station time, " +
      mmssUp(age) + " ago; the lead and the exciter are handled within " +
      Math.floor(validS / 60) + " min of grounding. Ground the lead's terminal and the " +
      "exciter output again with the insulated probe, record it ('Lead grounded again'), " +
      "then do this step.";
  }

  // As isolation.check_lead_grounded's decision, by this tablet's clock.
  function groundingRefusal(step, grounded, nowMs, validS) {
    if (!step.handles_lead) return null;
    if (!grounded) return step.opens_lead ? null : NOT_GROUNDED;
    var age = (nowMs - Date.parse(grounded)) / 1000;
    return age > validS ? lapsed(grounded, age, validS) : null;
  }

  // Both rules, in the order the station applies them (isolation.check_before_step).
  function leadRefusal(v, step, kind, nowMs) {
    if (!step || COMPLETING[step.kind] !== kind) return null;
    var state = lead(v);
    if (step.disturbs && !state.isolation) return NOT_VERIFIED;
    return groundingRefusal(step, state.grounded, nowMs, v.carried.grounding_valid_s);
  }

  // isolation.check_grounded_again: only once the procedure's grounding step is done.
  function groundedAgainRefusal(v) {
    var id = v.carried.grounding_step;
    if (!id) return "This procedure has no grounding step: there is no lead to ground in this job.";
    if (!(id in v.done)) {
      var number = v.byId[id].number;
      return "Ground the lead at step " + number + " first, where the procedure puts it; " +
        "grounding again comes after a pause.";
    }
    return null;
  }

  R.GUARDS.push(function (v, step, form) {
    var kind = form.querySelector("[name=kind]").value;
    if (kind === "lead_grounded") return groundedAgainRefusal(v);
    return leadRefusal(v, step, kind, Date.now());
  });

  // Shown under a step that handles the lead once the grounding step is done: the station's
  // own panel (templates/mechanic/_live.html), its entry kept like any other.
  function groundingPanel(v, step, entryForm) {
    if (!groundingStepDone(v)) return null;
    var state = lead(v);
    var validS = v.carried.grounding_valid_s;
    var due = !!groundingRefusal(step, state.grounded, Date.now(), validS);
    var box = el("section", { "class": "live", "data-testid": "lead-grounding" });
    var age = state.grounded ? (Date.now() - Date.parse(state.grounded)) / 1000 : null;
    if (due) {
      var alert = el("p", { "class": "alert", role: "alert", "data-testid": "grounding-due" });
      alert.append("✗ ", el("strong", {}, "Ground the lead again before this step."),
        state.grounded ? " It was last grounded at " + hhmmUtc(state.grounded) + " (UTC, by " +
          "this tablet's clock), " + mmssUp(age) + " ago;"
          : " It has not been grounded since the input was disconnected;",
        " the lead and the exciter are handled within " + Math.floor(validS / 60) +
        " min of grounding.");
      box.append(alert);
    } else if (state.grounded) {
      box.append(el("p", { "data-testid": "grounded-at" }, "Lead last grounded at " +
        hhmmUtc(state.grounded) + " (UTC, by this tablet's clock; " + mmssUp(age) + " ago). " +
        "Handling the lead or the exciter is allowed within " + Math.floor(validS / 60) +
        " min of grounding."));
    }
    box.append(el("p", { "class": "reminder reminder-warning" }, "WARNING Touch the insulated " +
      "grounding probe, its clip on engine ground first, to the lead's terminal and the " +
      "exciter output. A failed bleed resistor keeps a charge that can kill."));
    var form = entryForm(v, { id: "" }, "lead_grounded", "lead-grounded",
                         "Lead grounded again: record it");
    if (!due) form.querySelector("button").className = "button secondary";
    box.append(form);
    return box;
  }

  R.PANELS.push(groundingPanel);

  window.sparkwardTabletLead = { groundingRefusal: groundingRefusal, leadRefusal: leadRefusal,
                                 groundingPanel: groundingPanel, lapsed: lapsed,
                                 NOT_VERIFIED: NOT_VERIFIED, NOT_GROUNDED: NOT_GROUNDED };
})();
