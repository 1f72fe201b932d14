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

  document.addEventListener("DOMContentLoaded", function () {
    if (!window.htmx) return;
    // A refusal (409) or a bad entry (422) comes back as a fragment that says why: show it.
    window.htmx.config.responseHandling = [
      { code: "204", swap: false },
      { code: "[23]..", swap: true },
      { code: "409|422", swap: true, error: false },
      { code: "[45]..", swap: false, error: true },
    ];
  });
})();
