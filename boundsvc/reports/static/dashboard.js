// boundsvc dashboard: submit the filter form when a select changes (the button works without JS).
"use strict";
document.addEventListener("DOMContentLoaded", function () {
  var form = document.getElementById("filters");
  if (!form) { return; }
  form.querySelectorAll("select").forEach(function (select) {
    select.addEventListener("change", function () { form.submit(); });
  });
});
