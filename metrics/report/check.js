(function () {
  "use strict";
  // The page's self-check, read by .ci/browser.sh: once everything has
  // loaded, <body> says how many images there are, how many failed to
  // load or decode, and how many script, resource or policy errors
  // occurred.
  var errors = 0;
  window.addEventListener("error", function () { errors++; }, true);
  document.addEventListener("securitypolicyviolation", function () { errors++; });
  window.addEventListener("load", function () {
    var imgs = document.images, broken = 0;
    for (var i = 0; i < imgs.length; i++) {
      if (!imgs[i].complete || imgs[i].naturalWidth === 0) {
        broken++;
      }
    }
    var b = document.body;
    b.setAttribute("data-images", String(imgs.length));
    b.setAttribute("data-broken", String(broken));
    b.setAttribute("data-errors", String(errors));
    b.setAttribute("data-checked", "yes");
  });
})();
