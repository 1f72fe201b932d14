// A reading step on the tablet's copy of a job (KINDS.reading): the station's reading form
// (templates/mechanic/steps/reading.html, _instrument.html: the same field names), the
// verdict as the station shows it (word and symbol), and what an out-of-limits reading means
// offline: stop; the finding is recorded once the station has the reading, and the step
// waits for it. The rules are in tablet_reading.js.
(function () {
  "use strict";

  var R = window.sparkwardTabletRules, S = window.sparkwardTabletSteps;
  var T = window.sparkwardTabletReading;
  var el = S.el;
  var FINDING_FIRST = T.FINDING_FIRST;

  function field(form, name, label, attrs) {
    form.append(el("label", { "for": "f-" + name }, label));
    var input = el("input", Object.assign({ id: "f-" + name, name: name, type: "text",
                                            autocomplete: "off", required: "" }, attrs || {}));
    form.append(input);
    return input;
  }
  function unitSelect(form, name, table) {
    form.append(el("label", { "for": "f-" + name }, "Unit"));
    var select = el("select", { id: "f-" + name, name: name, "data-testid": "input-" + name });
    table.units.forEach(function (u) {
      var option = el("option", { value: u.unit }, u.label);
      if (u.unit === table.unit) option.selected = true;
      select.append(option);
    });
    form.append(select);
  }
  function valueUnit(form, name, label, table, testid) {
    var row = el("div", { "class": "value-unit" });
    var left = el("div"), right = el("div");
    field(left, name + "_value", label, { inputmode: "decimal", "data-testid": testid });
    unitSelect(right, name + "_unit", table);
    row.append(left, right);
    form.append(row);
  }

  function instrumentFieldset(form, step) {
    var set = el("fieldset", { "class": "items", "data-testid": "instrument" });
    var kind = step.instrument_kind;
    set.append(el("legend", {}, kind.charAt(0).toUpperCase() + kind.slice(1) +
                  " from the station's register"));
    var usable = (step.instruments || []).filter(function (i) {
      return i.usable && T.today() <= i.calibration_due;
    });
    if (usable.length) {
      set.append(el("label", { "for": "f-instrument-pick" }, "Choose the " + kind + " you use"));
      var select = el("select", { id: "f-instrument-pick", name: "instrument_pick",
                                  "data-testid": "instrument-pick" });
      select.append(el("option", { value: "" }, "Choose, or scan or type its ID below"));
      usable.forEach(function (i) {
        select.append(el("option", { value: i.id }, i.id + " · " + T.formatG(i.range_low) + "–" +
          T.formatG(i.range_high) + " " + i.range_label + " · calibration due " +
          i.calibration_due));
      });
      set.append(select);
    } else {
      set.append(el("p", { "class": "alert", "data-testid": "no-instrument" }, "✗ No " + kind +
        " in the register is in service and in calibration today. Do not take the reading " +
        "with an uncalibrated instrument: ask the admin or your supervisor."));
    }
    set.append(el("label", { "for": "f-instrument_id" },
                  "Or scan or type its ID (used instead of the choice above)"));
    set.append(el("input", { id: "f-instrument_id", name: "instrument_id", type: "text",
                             autocomplete: "off", "data-testid": "instrument-id" }));
    set.append(el("p", { "class": "meta" }, "An instrument overdue for calibration, out of " +
      "service, of another kind or whose range does not cover the reading is refused. The " +
      "register is as the station had it on " + step.carried_on + "; an ID it did not list " +
      "is checked on arrival."));
    form.append(set);
  }

  function verdictLine(stored) {
    var line = el("strong", { "class": "verdict verdict-" + stored.verdict.replace(/ /g, "-"),
                              "data-testid": "tablet-verdict" },
                  T.SYMBOL[stored.verdict] + " " + stored.verdict);
    return line;
  }

  // Stop: an out-of-limits reading kept on the tablet (or at the station) waits for its
  // finding, which the station records once it has the reading.
  function stopBox(v, step, kept) {
    var box = el("div", { "class": "finding", "data-testid": "finding-needed" });
    var first = el("p", { "class": "alert", role: "alert" });
    if (kept.stored) {
      first.append(verdictLine(kept.stored), " ");
      if (kept.stored.value !== undefined) {
        first.append(kept.stored.value + " " + kept.stored.unit + " against " +
                     step.limits_text + ". ");
      }
    } else {
      first.append("✗ Out of limits. ");
    }
    if (step.isolation) {
      first.append(el("strong", {}, "STOP: voltage present."), " The supply is not isolated. " +
        "Touch nothing on the ignition system, keep others clear and tell your supervisor; " +
        "find the supply as the approved data and your shop's lockout/tagout procedure say.");
    } else {
      first.append(el("strong", {}, "STOP."), " Do not go on with the job.");
    }
    box.append(first);
    box.append(el("p", { "data-testid": "finding-waits" }, "The finding (what was found and " +
      "what was done) is recorded when the station has this reading: this step waits for the " +
      "station and is not done."));
    return box;
  }

  // A reading kept whose value the tablet could not judge (a unit or a number it does not
  // know): the station judges it on arrival, and the step waits for its word.
  function judgedOnArrival() {
    var box = el("div", { "class": "waiting", "data-testid": "judged-on-arrival" });
    box.append(el("p", {}, "This reading is kept on this tablet; the tablet cannot judge its " +
      "value, so the station judges it when it arrives. This step waits for the station: do " +
      "not go on from this screen."));
    return box;
  }

  function form(v, step, entryForm) {
    var kept = T.awaitingFinding(v, step);
    if (kept) return [stopBox(v, step, kept)];
    var mine = (v.readings || {})[step.id];
    if (mine && mine.unknown && !mine.stored) return [judgedOnArrival()];
    var nodes = [];
    var made = entryForm(v, step, "reading_recorded", "record-reading", "Record", function (f) {
      if (step.value === "text") {
        field(f, "text", "What you read", { "data-testid": "reading-text" });
        return;
      }
      if (step.value === "pass_fail") {
        var set = el("fieldset", { "class": "items" });
        set.append(el("legend", {}, "Result"));
        [["pass", "✓", "Pass"], ["fail", "✗", "Fail"]].forEach(function (r, i) {
          var label = el("label", { "class": "tick" });
          var attrs = { type: "radio", name: "result", value: r[0], "data-testid": "result-" + r[0] };
          if (!i) attrs.required = "";
          label.append(el("input", attrs), " " + r[1] + " " + r[2]);
          set.append(label);
        });
        f.append(set);
      } else {
        f.append(el("p", { "class": "limits", "data-testid": "limits" }, "Limits: " + step.limits_text));
        var row = el("div", { "class": "value-unit" });
        var left = el("div"), right = el("div");
        field(left, "value", "Value", { inputmode: "decimal", "data-testid": "reading-value" });
        unitSelect(right, "unit", step);
        row.append(left, right);
        f.append(row);
        (step.conditions || []).forEach(function (c) {
          if (c === "humidity") {
            field(f, "humidity_value", "Relative humidity (%RH)", { inputmode: "decimal",
                                                                    "data-testid": "humidity" });
          } else {
            var said = c.replace(/_/g, " ");
            valueUnit(f, c, said.charAt(0).toUpperCase() + said.slice(1),
                      step.condition_units[c], c);
          }
        });
        f.append(el("p", { "class": "meta", "data-testid": "tablet-verdict-preview",
                           "aria-live": "polite" }, ""));
      }
      if (step.instrument_kind) instrumentFieldset(f, step);
    });
    if (step.value === "number") {
      var preview = made.querySelector("[data-testid=tablet-verdict-preview]");
      var update = function () {
        var judged = T.judge(step, T.formData(made), T.today());
        preview.textContent = "";
        if (judged.stored && judged.stored.verdict) {
          preview.append("On this tablet's reckoning: ", verdictLine(judged.stored));
        }
      };
      made.addEventListener("input", update);
      made.addEventListener("change", update);
    }
    nodes.push(made);
    return nodes;
  }

  window.sparkwardTabletReadingScreen = { instrumentFieldset: instrumentFieldset };

  R.KINDS.reading = {
    completes: function (step, f, v) {
      if (f.kind !== "reading_recorded") return false;
      var kept = (v.readings || {})[step.id];
      return !!(kept && kept.stored && kept.stored.verdict !== "out of limits");
    },
    onEntry: function (v, step, f, entry) {
      if (f.kind !== "reading_recorded") return;
      v.readings = v.readings || {};
      var day = String(f.device_time || entry.queued_at || "").slice(0, 10) || T.today();
      v.readings[step.id] = T.judge(step, T.fieldsData(f), day);
    },
    refusal: function (v, step, formNode) {
      if (formNode.querySelector("[name=kind]").value !== "reading_recorded") return null;
      if (T.awaitingFinding(v, step)) return FINDING_FIRST;
      var judged = T.judge(step, T.formData(formNode), T.today());
      return judged.refusal || null;
    },
    form: form,
  };
})();
