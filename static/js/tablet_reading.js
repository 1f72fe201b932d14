// Readings on the tablet while the station cannot be reached: the form with the station's
// field names, and its rules mirrored from webapp/domain (readings.py: measure, verdict,
// evaluate_reading; isolation.py: the isolation check's decision rule; instruments.py:
// check_use) in the station's words. Conversions come from the station (web/carry_steps.py,
// computed with pint): this file never converts a unit itself. The station checks every
// entry again when it arrives and its answer wins; tests/e2e/test_tablet_reading_parity.py
// holds these rules to the station's, case for case.
(function () {
  "use strict";

  var R = window.sparkwardTabletRules, S = window.sparkwardTabletSteps;
  var el = S.el;
  var SYMBOL = { "within": "✓", "near limit": "▲", "out of limits": "✗" };
  var ROUND_OFF = 1e-9;  // as domain/instruments.py
  var INSTRUMENT_ID = /^[A-Za-z0-9][A-Za-z0-9./_-]{0,39}$/;
  // Python's float() grammar (ASCII): digits with single underscores between them.
  var DIGITS = "\\d(?:_?\\d)*";
  var FLOAT = new RegExp("^[+-]?(?:(?:" + DIGITS + "(?:\\.(?:" + DIGITS + ")?)?|\\." + DIGITS +
                         ")(?:[eE][+-]?" + DIGITS + ")?|inf(?:inity)?|nan)$", "i");

  function Problem(field, message) { this.field = field; this.message = message; }
  // What the tablet cannot judge (a unit or an instrument it does not know): the station
  // judges it on arrival.
  function Unknown(what) { this.unknown = what; }

  // Python's "{:g}": six significant digits, trailing zeros dropped, and an exact tie rounded
  // to even as Python rounds it (JavaScript's toExponential rounds a tie up).
  function formatG(x) {
    if (x === 0) return 1 / x < 0 ? "-0" : "0";
    if (!isFinite(x)) return isNaN(x) ? "nan" : (x > 0 ? "inf" : "-inf");
    var a = Math.abs(x);
    var parts = a.toExponential(5).split("e");
    var digits = parts[0].replace(".", ""), exp = parseInt(parts[1], 10);
    var exact = a.toExponential(20).split("e"), all = exact[0].replace(".", "");
    if (all.slice(6) === "5" + "00000000000000" && parseInt(all.charAt(5), 10) % 2 === 0) {
      digits = all.slice(0, 6);
      exp = parseInt(exact[1], 10);
    }
    digits = digits.replace(/0+$/, "") || "0";
    var out;
    if (exp < -4 || exp >= 6) {
      out = digits.charAt(0) + (digits.length > 1 ? "." + digits.slice(1) : "") + "e" +
        (exp < 0 ? "-" : "+") + (Math.abs(exp) < 10 ? "0" : "") + Math.abs(exp);
    } else if (exp >= 0) {
      var whole = digits.slice(0, exp + 1);
      while (whole.length < exp + 1) whole += "0";
      var fraction = digits.slice(exp + 1);
      out = whole + (fraction ? "." + fraction : "");
    } else {
      out = "0." + new Array(-exp).join("0") + digits;
    }
    return (x < 0 ? "-" : "") + out;
  }

  // As readings.read_number, for a value typed into a form.
  function readNumber(field, raw) {
    if (raw === undefined || raw === null || typeof raw === "boolean") {
      throw new Problem(field, "Enter a number.");
    }
    var text = String(raw).trim().replace(/,/g, ".");
    if (!text) throw new Problem(field, "Enter a number.");
    if (/[^\x00-\x7f]/.test(text)) throw new Unknown("number");  // Python reads more digits
    if (!FLOAT.test(text)) throw new Problem(field, "'" + raw + "' is not a number.");
    var lower = text.toLowerCase().replace(/^[+]/, "");
    var value = /inf|nan/.test(lower) ? NaN : Number(text.replace(/_/g, ""));
    if (!isFinite(value)) throw new Problem(field, "'" + raw + "' is not a finite number.");
    return value;
  }

  function linear(pair, value) { return pair[1] === 0 ? value * pair[0] : value * pair[0] + pair[1]; }

  // As readings.measure, with the station's unit table for the procedure's unit.
  function measure(field, rawValue, rawUnit, table) {
    var value = readNumber(field, rawValue);
    if (typeof rawUnit !== "string" || !rawUnit.trim()) {
      throw new Problem(field + "_unit", "Choose the unit your tool shows.");
    }
    if (rawUnit in table.wrong_units) throw new Problem(field + "_unit", table.wrong_units[rawUnit]);
    var unit = table.units.find(function (u) { return u.unit === rawUnit; });
    if (!unit) throw new Unknown("unit");
    var base = linear(unit.to_base, value);
    var low = table.plausible[0], high = table.plausible[1];
    if ((low !== null && !(low <= base)) || (high !== null && !(base <= high))) {
      throw new Problem(field, formatG(value) + " " + rawUnit + " is not a plausible " +
                        table.dimension + " reading here: check the value and the unit.");
    }
    return { value: value, unit: rawUnit.trim(), converted: linear(unit.to_procedure, value),
             procedure_unit: table.unit };
  }

  // As readings.verdict: exactly at a limit is within it.
  function verdict(value, low, high, near) {
    var margins = [];
    if (low !== null && low !== undefined) margins.push(value - low);
    if (high !== null && high !== undefined) margins.push(high - value);
    var margin = Math.min.apply(null, margins);
    var result = margin < 0 ? "out of limits"
      : (near !== null && near !== undefined && margin <= near) ? "near limit" : "within";
    return { verdict: result, symbol: SYMBOL[result], margin: margin };
  }

  function condition(step, name, raw) {
    if (!raw || typeof raw !== "object") {
      throw new Problem(name, "Record the " + name.replace(/_/g, " ") + " with the reading.");
    }
    if (name === "humidity") {
      var rh = readNumber(name, raw.value);
      if (!(rh >= 0 && rh <= 100)) throw new Problem(name, "Relative humidity is between 0 and 100 %RH.");
      return { value: rh, unit: "%RH" };
    }
    return measure(name, raw.value, raw.unit, step.condition_units[name]);
  }

  // As readings.evaluate_reading with isolation.isolation_verdict: what the station would
  // store, or a Problem (the station's 422), or an Unknown (judged on arrival).
  function evaluate(step, data) {
    if (step.value === "text") {
      var text = data.text;
      if (typeof text !== "string" || !text.trim()) throw new Problem("text", "Write what you read.");
      if (Array.from(text).length > 500) throw new Problem("text", "Keep it under 500 characters.");
      return { text: text.trim(), verdict: "recorded" };
    }
    var stored;
    if (step.value === "pass_fail") {
      if (data.result !== "pass" && data.result !== "fail") {
        throw new Problem("result", "Choose pass or fail.");
      }
      stored = { result: data.result, verdict: data.result === "pass" ? "within" : "out of limits" };
    } else {
      var measured = measure("value", data.value, data.unit, step);
      var judged = verdict(measured.converted, step.limits.min, step.limits.max, step.near_margin);
      stored = Object.assign({}, measured, { verdict: judged.verdict, margin: judged.margin });
      (step.conditions || []).forEach(function (c) { stored[c] = condition(step, c, data[c]); });
      if (step.test_voltage_v !== null && step.test_voltage_v !== undefined) {
        var required = step.test_voltage_v, recorded = stored.test_voltage.converted;
        if (Math.abs(recorded - required) > 0.05 * required) {
          throw new Problem("test_voltage", "This reading is taken at " + formatG(required) +
            " V (the approved data's test voltage); " + formatG(recorded) + " V was recorded. " +
            "Set the tester to " + formatG(required) + " V and test again.");
        }
      }
    }
    if (step.isolation) {
      stored.verdict = stored.verdict === "within" ? "within" : "out of limits";
      stored.isolation = stored.verdict === "within" ? "verified" : "not verified";
    }
    return stored;
  }

  function capitalize(text) { return text.charAt(0).toUpperCase() + text.slice(1).toLowerCase(); }

  // As instruments.check_use, for the register the tablet carried; `today` as YYYY-MM-DD.
  function instrumentRefusal(step, data, stored, today) {
    var kind = step.instrument_kind;
    if (!kind) return null;
    var ident = typeof data.instrument_id === "string" ? data.instrument_id.trim() : "";
    if (!ident) {
      throw new Problem("instrument_id", "Choose the instrument from the register, or scan or type its ID.");
    }
    if (!INSTRUMENT_ID.test(ident)) {
      throw new Problem("instrument_id", "'" + Array.from(ident).slice(0, 40).join("") +
        "' is not an instrument ID: letters, digits and . / _ - only, at most 40 characters.");
    }
    var found = (step.instruments || []).find(function (i) { return i.id === ident; });
    if (!found) throw new Unknown("instrument");
    var name = capitalize(found.kind) + " " + found.id;
    if (found.kind !== kind) {
      return found.id + " is a " + found.kind + "; this reading is taken with a " + kind + ".";
    }
    if (found.status !== "in service") return name + " is " + found.status + ": use another " + kind + ".";
    if (today > found.calibration_due) {
      return name + " was due for calibration on " + found.calibration_due + ": use a " + kind +
        " in calibration.";
    }
    if (stored && stored.value !== undefined && stored.unit !== undefined) {
      var pair = (found.to_range || {})[stored.unit];
      var converted = pair ? linear(pair, stored.value) : NaN;
      var slack = ROUND_OFF * Math.max(Math.abs(found.range_low), Math.abs(found.range_high));
      if (!(isFinite(converted) && found.range_low - slack <= converted &&
            converted <= found.range_high + slack)) {
        return formatG(stored.value) + " " + stored.unit + " is outside the range of " + name +
          " (" + found.range_text + "): take the reading with a " + kind +
          " whose range covers it.";
      }
    }
    return null;
  }

  // The whole judgement of a reading's data, as the station makes it: { stored } or
  // { refusal } in the station's words, or { unknown } for what only the station can judge.
  function judge(step, data, today) {
    var stored = null;
    try {
      stored = evaluate(step, data);
      var refusal = step.value === "text" ? null : instrumentRefusal(step, data, stored, today);
      return refusal ? { refusal: refusal } : { stored: stored };
    } catch (error) {
      // An instrument the tablet does not know: the value is judged, the ID on arrival.
      if (error instanceof Unknown && stored) return { stored: stored, unknown: error.unknown };
      if (error instanceof Problem) return { refusal: error.message, field: error.field };
      if (error instanceof Unknown) return { unknown: error.unknown };
      throw error;
    }
  }

  // The event's data from the form, as web/mechanic.py's _reading_data reads it.
  function formData(form) {
    var get = function (name) {
      var field = form.querySelector("[name=" + name + "]");
      if (!field) return undefined;
      if (field.type === "radio") {
        var on = form.querySelector("[name=" + name + "]:checked");
        return on ? on.value : undefined;
      }
      return field.value;
    };
    var data = {};
    ["text", "result", "value", "unit"].forEach(function (k) {
      var value = get(k);
      if (value !== undefined) data[k] = value;
    });
    var typed = (get("instrument_id") || "").trim();
    var chosen = typed || (get("instrument_pick") || "").trim();
    if (chosen) data.instrument_id = chosen;
    ["test_voltage", "ambient_temperature", "humidity"].forEach(function (c) {
      var value = get(c + "_value");
      if (value !== undefined) data[c] = { value: value, unit: get(c + "_unit") || "%RH" };
    });
    return data;
  }
  function fieldsData(f) {
    var data = {};
    ["text", "result", "value", "unit"].forEach(function (k) { if (k in f) data[k] = f[k]; });
    var chosen = String(f.instrument_id || "").trim() || String(f.instrument_pick || "").trim();
    if (chosen) data.instrument_id = chosen;
    ["test_voltage", "ambient_temperature", "humidity"].forEach(function (c) {
      if ((c + "_value") in f) data[c] = { value: f[c + "_value"], unit: f[c + "_unit"] || "%RH" };
    });
    return data;
  }

  function today() { return new Date(Date.now()).toISOString().slice(0, 10); }

  // What the tablet kept for a reading step: { stored } (a verdict), or { unknown }.
  function keptReading(v, step) {
    return (v.readings || {})[step.id] || null;
  }
  function awaitingFinding(v, step) {
    if ((v.state.awaiting_finding || []).indexOf(step.id) >= 0) return { atStation: true };
    var kept = keptReading(v, step);
    return kept && kept.stored && kept.stored.verdict === "out of limits" ? kept : null;
  }

  // An entry on a step whose last reading was out of limits (domain/checks.py,
  // finding_required): readings and torque alike.
  var FINDING_FIRST = "The last reading was out of limits: record the finding and what was " +
    "done before anything else.";

  window.sparkwardTabletReading = { judge: judge, evaluate: evaluate, measure: measure,
                                    verdict: verdict, formatG: formatG, readNumber: readNumber,
                                    instrumentRefusal: instrumentRefusal, formData: formData,
                                    fieldsData: fieldsData, awaitingFinding: awaitingFinding,
                                    SYMBOL: SYMBOL, today: today, FINDING_FIRST: FINDING_FIRST };
})();
