// A part taken off, on the tablet's copy of a job (KINDS.part, `action: remove`): the
// station's part form (templates/mechanic/steps/part.html: the same field names), its field
// rules mirrored from webapp/domain/parts.py in its words, and the plate compared with the
// serial the station has fitted at the position (web/carry_steps.py). A match completes the
// step here; a difference is kept, and the station asks for a finding when it has it: the
// step waits. A part put on needs the station (the fleet's other engines and allowed parts).
(function () {
  "use strict";

  var R = window.sparkwardTabletRules, S = window.sparkwardTabletSteps;
  var T = window.sparkwardTabletReading;
  var el = S.el;
  var MAX_TEXT = 60;
  var STATUSES = ["unserviceable", "serviceable"], REASONS = ["scheduled", "failed", "robbed"];

  function Problem(message) { this.message = message; }

  function text(data, name, said) {
    var value = data[name];
    if (typeof value !== "string" || !value.trim()) throw new Problem("Enter the " + said + ".");
    value = value.trim();
    if (Array.from(value).length > MAX_TEXT || /[\x00-\x1f]/.test(value)) {
      throw new Problem("The " + said + " is at most " + MAX_TEXT + " characters on one " +
                        "line; check what was typed.");
    }
    return value;
  }
  function figure(raw, name, whole, required) {
    var value = raw[name];
    if ((value === undefined || value === null || value === "") && !required) return null;
    var number;
    try { number = T.readNumber(name, String(value)); } catch (error) { number = NaN; }
    var said = name.replace(/_/g, " ");
    if (!isFinite(number) || number < 0 || number > 200000) {
      throw new Problem("Enter the engine's " + said + " (a number from its log).");
    }
    if (whole && number !== Math.trunc(number)) {
      throw new Problem(said.charAt(0).toUpperCase() + said.slice(1) +
                        " are counted in whole numbers.");
    }
    return number;
  }
  function choice(data, name, choices, said) {
    if (choices.indexOf(data[name]) < 0) {
      throw new Problem("Choose the " + said + ": " + choices.join(", ") + ".");
    }
    return data[name];
  }

  function fittedAt(v, step) {
    return (v.state.fitted || {})[step.part + ":" + v.carried.channel] || null;
  }

  // As parts.evaluate_part for a removal, up to what the tablet knows: { refusal } in the
  // station's words, or { matches, fitted } (the engine's totals are checked on arrival).
  function judgeRemoval(v, step, data) {
    try {
      var partNumber = text(data, "part_number", "part number from the data plate");
      var serial = text(data, "serial", "serial number from the data plate");
      var usage = data.usage || {};
      figure(usage, "engine_hours", false, true);
      figure(usage, "starts", true, true);
      figure(usage, "continuous_ignition_hours", false, false);
      choice(data, "status", STATUSES, "status of the removed part");
      choice(data, "reason", REASONS, "reason for removal");
      text(data, "tag", "number of the tag attached to the removed part");
      var fitted = fittedAt(v, step);
      if (!fitted || !fitted.serial) return { unknown: "position" };
      return { matches: fitted.part_number === partNumber && fitted.serial === serial,
               fitted: fitted, part_number: partNumber, serial: serial };
    } catch (error) {
      if (error instanceof Problem) return { refusal: error.message };
      throw error;
    }
  }

  function dataOf(get) {
    var data = {};
    ["part_number", "serial", "status", "reason", "tag"].forEach(function (k) {
      var value = get(k);
      if (value !== undefined) data[k] = value;
    });
    data.usage = {};
    ["engine_hours", "starts", "continuous_ignition_hours"].forEach(function (k) {
      data.usage[k] = get(k) || "";
    });
    return data;
  }
  function formGetter(form) {
    return function (name) {
      var checked = form.querySelector("[name=" + name + "]:checked");
      if (checked) return checked.value;
      var field = form.querySelector("[name=" + name + "]");
      return field && field.type !== "radio" ? field.value : undefined;
    };
  }

  function input(form, name, label, testid, required, mode) {
    form.append(el("label", { "for": "f-" + name }, label));
    var attrs = { id: "f-" + name, name: name, type: "text", autocomplete: "off",
                  "data-testid": testid };
    if (required) attrs.required = "";
    if (mode) attrs.inputmode = mode;
    form.append(el("input", attrs));
  }
  function radios(form, legend, name, options) {
    var set = el("fieldset", { "class": "items" });
    set.append(el("legend", {}, legend));
    options.forEach(function (o, i) {
      var label = el("label", { "class": "tick" });
      var attrs = { type: "radio", name: name, value: o[0], "data-testid": name + "-" + o[0] };
      if (!i) attrs.required = "";
      label.append(el("input", attrs), " " + o[1]);
      set.append(label);
    });
    form.append(set);
  }

  function positionBox(v, step) {
    var box = el("div", { "class": "gate", "data-testid": "part-position" });
    var fitted = fittedAt(v, step);
    var line = el("p");
    if (fitted && fitted.serial) {
      line.append("The station's record for the " + fitted.label + ": P/N ",
                  el("strong", {}, fitted.part_number), ", S/N ",
                  el("strong", { "data-testid": "fitted-serial" }, fitted.serial),
                  ". Write what the data plate says, not this line: a difference is kept and " +
                  "needs a finding.");
    } else {
      line.append("The station's copy on this tablet shows nothing fitted here: the station " +
                  "checks the part on arrival.");
    }
    box.append(line);
    return box;
  }

  function form(v, step, entryForm) {
    var kept = (v.parts || {})[step.id];
    if ((v.state.awaiting_finding || []).indexOf(step.id) >= 0) {
      var waits = el("div", { "class": "finding", "data-testid": "finding-needed" });
      waits.append(el("p", { "class": "alert", role: "alert" }, "✗ The data plate does not " +
        "match the part the station had fitted here. The station asks for a finding: this " +
        "step waits for the station."));
      return [positionBox(v, step), waits];
    }
    if (kept && kept.matches === false) {
      var box = el("div", { "class": "finding", "data-testid": "finding-needed" });
      box.append(el("p", { "class": "alert", role: "alert" }, "✗ The data plate (S/N " +
        kept.serial + ") does not match the part the station had fitted here (S/N " +
        kept.fitted.serial + ")."));
      box.append(el("p", { "data-testid": "finding-waits" }, "The station will ask for a " +
        "finding (what was found and what was done) when it has this entry: the step waits " +
        "for the station and is not done. Keep the part tagged and with the job."));
      return [positionBox(v, step), box];
    }
    return [positionBox(v, step), entryForm(v, step, "part_recorded", "record-part",
                                           "Record the part removed", function (f) {
      input(f, "part_number", "Part number (P/N) from the data plate", "part-number", true);
      input(f, "serial", "Serial number (S/N) from the data plate", "part-serial", true);
      radios(f, "Status of the removed part", "status",
             [["unserviceable", "Unserviceable"], ["serviceable", "Removed serviceable"]]);
      radios(f, "Reason for removal", "reason", [["failed", "Failed or suspect"],
             ["scheduled", "Scheduled (life or inspection)"], ["robbed", "Robbed for another aircraft"]]);
      input(f, "tag", "Number of the tag attached to the part", "part-tag", true);
      var set = el("fieldset", { "class": "items", "data-testid": "usage-totals" });
      set.append(el("legend", {}, "The engine's totals now, as read from the aircraft's records"));
      input(set, "engine_hours", "Engine total hours (from the aircraft's records), in engine hours",
            "part-engine-hours", true, "decimal");
      input(set, "starts", "Engine total starts (from the aircraft's records)", "part-starts",
            true, "numeric");
      input(set, "continuous_ignition_hours", "Continuous-ignition total hours (from the " +
            "aircraft's records, if logged)", "part-ci-hours", false, "decimal");
      set.append(el("p", { "class": "meta" }, "The station checks these totals against the " +
        "engine's last entry when the entry arrives."));
      f.append(set);
    })];
  }

  R.KINDS.part = {
    completes: function (step, f, v) {
      var kept = (v.parts || {})[step.id];
      return f.kind === "part_recorded" && !!kept && kept.matches === true;
    },
    onEntry: function (v, step, f) {
      if (f.kind !== "part_recorded") return;
      v.parts = v.parts || {};
      v.parts[step.id] = judgeRemoval(v, step, dataOf(function (k) { return f[k]; }));
    },
    refusal: function (v, step, formNode) {
      if (formNode.querySelector("[name=kind]").value !== "part_recorded") return null;
      return judgeRemoval(v, step, dataOf(formGetter(formNode))).refusal || null;
    },
    form: form,
  };

  window.sparkwardTabletPart = { judgeRemoval: judgeRemoval };
})();
