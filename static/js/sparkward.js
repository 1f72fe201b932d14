// Sparkward's page glue: only what the platform demands. The station decides every rule.
(function () {
  "use strict";

  // Stamp the device's own time on each step form just before it is sent.
  function stampDeviceTime(form) {
    var field = form.querySelector("[data-device-time]");
    if (field) field.value = new Date().toISOString();
  }
  document.addEventListener("submit", function (event) {
    stampDeviceTime(event.target);
  }, true);
  document.addEventListener("htmx:configRequest", function (event) {
    var form = event.detail.elt.closest("form");
    if (form && form.querySelector("[data-device-time]")) {
      event.detail.parameters.device_time = new Date().toISOString();
    }
  });

  // Countdowns and count-ups for comfort only: the station decides when a wait is over.
  function mmss(seconds) {
    var whole = Math.max(0, Math.ceil(seconds));
    var s = whole % 60;
    return Math.floor(whole / 60) + ":" + (s < 10 ? "0" : "") + s;
  }
  // Counted from when the station rendered the page: for the tablet's kept copy of a page,
  // when it was kept (the worker's meta tag), so a reload offline does not start a wait,
  // a window or a clock over again.
  var keptAt = document.querySelector('meta[name="sparkward-saved-copy"]');
  var pageStart = Math.min(Date.now(),
                           (keptAt && Date.parse(keptAt.getAttribute("content"))) || Date.now());
  function elapsed() { return (Date.now() - pageStart) / 1000; }
  function tick() {
    var gone = elapsed();
    document.querySelectorAll("[data-count-down]").forEach(function (el) {
      var left = Number(el.dataset.countDown) - gone;
      el.textContent = mmss(left);
      if (left <= 0 && el.dataset.testid === "countdown") {
        var label = document.querySelector("[data-testid=countdown-label]");
        if (label) label.textContent = "— the wait is over";
      }
    });
    // A counting window as the station timed it from its start (the length chosen here).
    document.querySelectorAll("[data-window-left]").forEach(function (el) {
      var box = el.closest("[data-timed-window]");
      var remaining = Number(box.querySelector("[data-window]").value)
        - (Number(el.dataset.elapsed) + gone);
      el.textContent = remaining > 0 ? mmss(remaining) : "Stop counting";
    });
    document.querySelectorAll("[data-count-up]").forEach(function (el) {
      el.textContent = mmss(Number(el.dataset.countUp) + gone);
    });
    document.querySelectorAll("[data-on-limit]").forEach(function (box) {
      var left = Number(box.dataset.onLimit) - gone;
      var near = box.querySelector("[data-testid=limit-near]");
      var over = box.querySelector("[data-testid=over-limit]");
      near.hidden = !(left > 0 && left <= Number(box.dataset.warnAt));
      over.hidden = left > 0;
      near.querySelector("[data-limit-left]").textContent = mmss(left);
    });
    document.querySelectorAll("[data-enable-after]").forEach(function (button) {
      if (Number(button.dataset.enableAfter) - gone <= 0) button.disabled = false;
    });
    document.querySelectorAll("[data-testid=estimate]").forEach(function (el) {
      var v0 = Number(el.dataset.v0), r = Number(el.dataset.r), c = Number(el.dataset.c);
      var t = Number(el.dataset.elapsed) + gone;
      var v = v0 * Math.exp(-t / (r * c));
      el.querySelector("[data-estimate-voltage]").textContent = Math.round(v);
      el.querySelector("[data-estimate-energy]").textContent = (0.5 * c * v * v).toFixed(2);
    });
  }
  // Live conversion and the adapter's wrench setting, as the mechanic types (comfort only:
  // the station converts and judges the value it receives).
  function number(text) {
    var value = parseFloat(String(text || "").replace(",", "."));
    return isFinite(value) ? value : null;
  }
  function shown(value) { return Number(value.toPrecision(4)).toString(); }
  function updateConversions() {
    document.querySelectorAll("[data-testid=converted]").forEach(function (out) {
      var form = out.closest("form");
      var value = number(form.querySelector("[name=value]").value);
      var unit = form.querySelector("[name=unit]").value;
      var factor = JSON.parse(out.dataset.factors || "{}")[unit];
      if (value === null || factor === undefined) { out.textContent = ""; return; }
      var inTarget = value * factor;
      var text = "= " + shown(inTarget) + " " + out.dataset.to;
      if (out.dataset.siFactor) {
        text += " = " + shown(inTarget * Number(out.dataset.siFactor)) + " " + out.dataset.siLabel;
      }
      out.textContent = text;
    });
    document.querySelectorAll("[data-adapter]").forEach(function (box) {
      var length = number(box.querySelector("[name=wrench_length]").value);
      var extension = number(box.querySelector("[name=extension]").value);
      var angle = number(box.querySelector("[name=angle]").value);
      var out = box.querySelector("[data-testid=adapter-setting]");
      if (length === null || extension === null || angle === null || length <= 0 ||
          extension < 0 || angle < 0 || angle > 180) return;
      // The station's formula (webapp/domain/torque.py wrench_setting): L / (L + E·cos θ).
      var arm = length + extension * Math.cos(angle * Math.PI / 180);
      if (arm <= 0.25 * length) { out.textContent = "The adapter reaches back over the handle."; return; }
      var setting = Number(box.dataset.target) * Number(box.dataset.factor) * length / arm;
      out.textContent = "Set the wrench to " + shown(setting) + " " + box.dataset.unit +
        " for " + shown(Number(box.dataset.target)) + " " + box.dataset.unit + " at the plug.";
    });
  }
  document.addEventListener("input", updateConversions);
  document.addEventListener("change", updateConversions);

  // Tap counting: the time of each tap, in seconds from the first, goes with the form; the
  // station works out the rate (60 / median interval) and flags double and missed taps.
  var taps = [];
  function showTaps(box) {
    box.querySelector("[data-tap-count]").textContent = taps.length;
    var field = box.querySelector("[data-taps]");
    var first = taps.length ? taps[0] : 0;
    field.value = JSON.stringify(taps.map(function (t) { return (t - first) / 1000; }));
    var out = box.querySelector("[data-tap-rate]");
    if (taps.length < 3) { out.textContent = "—"; return; }
    var gaps = [];
    for (var i = 1; i < taps.length; i++) gaps.push(taps[i] - taps[i - 1]);
    gaps.sort(function (a, b) { return a - b; });
    var mid = gaps.length >> 1;
    var median = gaps.length % 2 ? gaps[mid] : (gaps[mid - 1] + gaps[mid]) / 2;
    out.textContent = Math.round(60000 / median);
  }
  document.addEventListener("pointerdown", function (event) {
    var button = event.target.closest("[data-tap]");
    if (!button) return;
    event.preventDefault();
    taps.push(performance.now());
    showTaps(button.closest("[data-tapper]"));
  });
  document.addEventListener("click", function (event) {
    var reset = event.target.closest("[data-tap-reset]");
    if (reset) { taps = []; showTaps(reset.closest("[data-tapper]")); }
  });
  document.addEventListener("htmx:afterSwap", function () { taps = []; });

  // Each swapped fragment restarts the count from the figures the station just sent.
  document.addEventListener("htmx:afterSwap", function () { pageStart = Date.now(); tick(); });
  setInterval(tick, 1000);

  // The service worker keeps the app shell and the pages opened here, for the Wi-Fi's
  // drop-outs (static/js/sw.js, served as /sw.js so it covers the whole station). Browsers
  // allow one only on a secure origin: localhost, or HTTPS on the hangar LAN.
  if ("serviceWorker" in navigator && window.isSecureContext) {
    window.addEventListener("load", function () {
      try {
        navigator.serviceWorker.register("/sw.js", { scope: "/" }).catch(function (error) {
          console.warn("Sparkward: no service worker on this tablet:", error);
        });
      } catch (error) {
        console.warn("Sparkward: no service worker on this tablet:", error);
      }
    });
  }

  document.addEventListener("DOMContentLoaded", function () {
    tick();
    if (!window.htmx) return;
    // No settle animation: the new step is there as soon as the station answers.
    window.htmx.config.defaultSettleDelay = 0;
    // A refusal (409) or a bad entry (422) comes back as a fragment that says why: show it.
    window.htmx.config.responseHandling = [
      { code: "204", swap: false },
      { code: "[23]..", swap: true },
      { code: "409|422", swap: true, error: false },
      { code: "[45]..", swap: false, error: true },
    ];
  });
})();
