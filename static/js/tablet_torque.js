// A torque step on the tablet's copy of a job (KINDS.torque): the station's torque form
// (templates/mechanic/steps/torque.html: the same field names) and its rules mirrored from
// webapp/domain/torque.py (evaluate_torque: the fastener, the setting as read, the adapter
// at its angle, the lubricant factor, the verdict) with the wrench checked against the
// carried register (instruments.check_use), in the station's words. A step naming its
// fasteners is done when each has a reading that stands; an out-of-limits one waits for the
// station's finding. The station checks every entry again when it arrives.
(function () {
  "use strict";

  var R = window.sparkwardTabletRules, S = window.sparkwardTabletSteps;
  var T = window.sparkwardTabletReading;
  var el = S.el;
  var FINDING_FIRST = T.FINDING_FIRST;

  function Problem(message) { this.message = message; }

  function arm(length, extension, angle) {
    if (length <= 0) throw new Problem("The wrench length must be above zero.");
    if (extension < 0) throw new Problem("The adapter's extension is zero or more.");
    if (!(angle >= 0 && angle <= 180)) {
      throw new Problem("The adapter's angle to the wrench is from 0° (in line) to 180° " +
                        "(pointing back along the handle).");
    }
    var moment = length + extension * Math.cos(angle * (Math.PI / 180));
    if (moment <= 0.25 * length) {
      throw new Problem("At this angle and extension the adapter reaches back over the " +
                        "handle: use a shorter adapter or another angle.");
    }
    return moment;
  }
  function number(name, raw) {
    try { return T.readNumber(name, raw); } catch (error) {
      if (error && error.message) throw new Problem(error.message);
      throw error;
    }
  }

  // As torque.evaluate_torque with instruments.with_instrument: { stored } or { refusal }
  // in the station's words, or { unknown } for what only the station can judge.
  function judge(step, data, done, today) {
    var stored = null;
    try {
      var chosen = data.fastener;
      var fasteners = step.fasteners || [];
      if (!fasteners.length) {
        if (chosen !== undefined && chosen !== null && chosen !== "") {
          throw new Problem("This step torques one fastener: leave the fastener out.");
        }
        chosen = null;
      } else {
        var toDo = fasteners.filter(function (n) { return done.indexOf(n) < 0; });
        if (typeof chosen !== "string" || fasteners.indexOf(chosen) < 0) {
          throw new Problem("Choose the fastener this reading is for: " + toDo.join("; ") + ".");
        }
        if (done.indexOf(chosen) >= 0) {
          throw new Problem(chosen + " is already torqued within its limits (or deferred): " +
                            "torque the next one, " + toDo.join("; ") + ".");
        }
      }
      var measured = T.measure("value", data.value, data.unit, step);
      stored = Object.assign({}, measured);
      if (chosen !== null) stored.fastener = chosen;
      var factor = step.lubricant_factor || 1.0;
      var setting = measured.converted;
      if (data.adapter !== undefined) {
        if (!step.adapter) throw new Problem("This step's data gives no adapter.");
        var length = number("wrench_length", data.adapter.wrench_length);
        var extension = number("extension", data.adapter.extension);
        var angle = number("angle", data.adapter.angle);
        if (step.adapter_in_line && angle !== 0) {
          throw new Problem("This step's data needs the adapter in line with the wrench " +
            "(0°); " + T.formatG(angle) + "° was recorded. Fit it in line and torque again.");
        }
        setting = setting * arm(length, extension, angle) / length;
      }
      var applied = setting / factor;
      var judged = T.verdict(applied, step.limits.min, step.limits.max, null);
      Object.assign(stored, { verdict: judged.verdict, margin: judged.margin, applied: applied });
      var refusal = T.instrumentRefusal(step, data, stored, today);
      return refusal ? { refusal: refusal } : { stored: stored };
    } catch (error) {
      if (error instanceof Problem) return { refusal: error.message };
      if (error && error.unknown && stored && stored.verdict) {
        return { stored: stored, unknown: error.unknown };
      }
      if (error && error.unknown) return { unknown: error.unknown };
      if (error && error.field) return { refusal: error.message };  // the reading rules' words
      throw error;
    }
  }

  // The event's data as web/mechanic.py's _reading_data reads a torque form's fields.
  function dataOf(get) {
    var data = {};
    ["value", "unit", "fastener"].forEach(function (k) {
      var value = get(k);
      if (value !== undefined) data[k] = value;
    });
    var chosen = String(get("instrument_id") || "").trim() ||
      String(get("instrument_pick") || "").trim();
    if (chosen) data.instrument_id = chosen;
    if (get("wrench_length") || get("extension")) {
      data.adapter = { wrench_length: get("wrench_length") || "",
                       extension: get("extension") || "", angle: get("angle") || "" };
    }
    return data;
  }
  function formGetter(form) {
    return function (name) {
      var field = form.querySelector("[name=" + name + "]");
      return field ? field.value : undefined;
    };
  }

  // The step's fasteners that stand: at the station, and kept on this tablet.
  function doneFasteners(v, step) {
    var kept = (v.torque || {})[step.id] || {};
    return ((v.state.fasteners_done || {})[step.id] || []).concat(kept.done || []);
  }
  function waitsForFinding(v, step) {
    if ((v.state.awaiting_finding || []).indexOf(step.id) >= 0) return true;
    return !!((v.torque || {})[step.id] || {}).out;
  }

  function input(form, name, label, testid, value) {
    form.append(el("label", { "for": "f-" + name }, label));
    var attrs = { id: "f-" + name, name: name, type: "text", inputmode: "decimal",
                  autocomplete: "off", required: "", "data-testid": testid };
    if (value !== undefined) attrs.value = value;
    form.append(el("input", attrs));
  }

  function form(v, step, entryForm) {
    if (waitsForFinding(v, step)) {
      var box = el("div", { "class": "finding", "data-testid": "finding-needed" });
      box.append(el("p", { "class": "alert", role: "alert" }, "✗ out of limits. STOP: do not " +
        "go on with the job."));
      box.append(el("p", { "data-testid": "finding-waits" }, "The finding (what was found and " +
        "what was done) is recorded when the station has this reading: this step waits for " +
        "the station and is not done."));
      return [box];
    }
    var done = doneFasteners(v, step);
    var nodes = [el("p", { "class": "limits", "data-testid": "limits" }, "Limits: " +
      step.limits_text + " · " + step.lubricant + (step.lubricant_factor ? " (the data's " +
      "lubricant factor " + step.lubricant_factor + " applies to the setting)" : ""))];
    nodes.push(entryForm(v, step, "reading_recorded", "record-reading", "Record", function (f) {
      if ((step.fasteners || []).length) {
        f.append(el("label", { "for": "f-fastener" }, "Fastener"));
        var select = el("select", { id: "f-fastener", name: "fastener",
                                    "data-testid": "input-fastener" });
        step.fasteners.filter(function (n) { return done.indexOf(n) < 0; }).forEach(function (n) {
          select.append(el("option", { value: n }, n));
        });
        f.append(select);
      }
      if (step.adapter) {
        var set = el("fieldset", { "class": "items" });
        set.append(el("legend", {}, "Adapter (crowfoot or extension)"));
        input(set, "wrench_length", "Wrench length L", "wrench-length");
        input(set, "extension", "Adapter extension E", "extension");
        input(set, "angle", "Adapter angle θ to the wrench (degrees)", "adapter-angle", "0");
        set.querySelectorAll("input").forEach(function (i) { i.removeAttribute("required"); });
        f.append(set);
      }
      var row = el("div", { "class": "value-unit" });
      var left = el("div"), right = el("div");
      input(left, "value", "Torque", "reading-value");
      right.append(el("label", { "for": "f-unit" }, "Unit"));
      var units = el("select", { id: "f-unit", name: "unit", "data-testid": "input-unit" });
      step.units.forEach(function (u) {
        var option = el("option", { value: u.unit }, u.label);
        if (u.unit === step.unit) option.selected = true;
        units.append(option);
      });
      right.append(units);
      row.append(left, right);
      f.append(row);
      window.sparkwardTabletReadingScreen.instrumentFieldset(f, step);
    }));
    return nodes;
  }

  R.KINDS.torque = {
    completes: function (step, f, v) {
      if (f.kind !== "reading_recorded") return false;
      var kept = (v.torque || {})[step.id] || {};
      if (kept.out || kept.unknown) return false;
      var done = doneFasteners(v, step);
      return (step.fasteners || []).length ? step.fasteners.every(function (n) {
        return done.indexOf(n) >= 0;
      }) : !!(kept.judged && kept.judged.stored);
    },
    onEntry: function (v, step, f, entry) {
      if (f.kind !== "reading_recorded") return;
      v.torque = v.torque || {};
      var kept = v.torque[step.id] = v.torque[step.id] || { done: [] };
      var day = String(f.device_time || entry.queued_at || "").slice(0, 10) || T.today();
      var judged = judge(step, dataOf(function (k) { return f[k]; }), doneFasteners(v, step), day);
      kept.judged = judged;
      kept.unknown = !judged.stored;
      if (judged.stored && judged.stored.verdict === "out of limits") kept.out = true;
      else if (judged.stored && judged.stored.fastener) kept.done.push(judged.stored.fastener);
    },
    refusal: function (v, step, formNode) {
      if (formNode.querySelector("[name=kind]").value !== "reading_recorded") return null;
      if (waitsForFinding(v, step)) return FINDING_FIRST;
      return judge(step, dataOf(formGetter(formNode)), doneFasteners(v, step), T.today())
        .refusal || null;
    },
    form: form,
  };

  window.sparkwardTabletTorque = { judge: judge };
})();
