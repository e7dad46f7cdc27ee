// The uvdose reference page's one script (served at /docs/page.js). Everything on the page
// reads without it; it only lets the example forms send their request to this service and
// shows the answer (status, caution header, body or picture) under the form.
"use strict";

(function () {
  document.documentElement.classList.add("scripted");

  function show(region, status, caution, contentType, text) {
    region.hidden = false;
    region.querySelector(".answer-status").textContent = status;
    region.querySelector(".answer-caution").textContent = caution ? "Uvdose-Caution: " + caution : "";
    var picture = region.querySelector(".answer-picture");
    var body = region.querySelector(".answer-body");
    picture.textContent = "";
    body.textContent = "";
    body.hidden = false;
    if (contentType.indexOf("image/svg+xml") === 0) {
      var parsed = new DOMParser().parseFromString(text, "image/svg+xml");
      var root = parsed.documentElement;
      if (root && root.nodeName === "svg") {
        picture.appendChild(document.importNode(root, true));
        body.hidden = true;
        return;
      }
    }
    if (contentType.indexOf("json") !== -1) {
      try { text = JSON.stringify(JSON.parse(text), null, 2); } catch (ignored) { /* shown as sent */ }
    }
    body.textContent = text;
  }

  function send(form, event) {
    event.preventDefault();
    var method = form.dataset.method;
    var url = form.dataset.path;
    var headers = {};
    var accept = form.querySelector("select[data-accept]");
    if (accept) { headers["Accept"] = accept.value; }
    var key = form.querySelector("input[data-api-key]");
    if (key && key.value) { headers["X-API-Key"] = key.value; }
    var init = { method: method, headers: headers };
    if (method === "GET") {
      var query = new URLSearchParams();
      form.querySelectorAll("input[name]").forEach(function (input) {
        if (input.value !== "") {
          query.append(input.name, input.value);
        }
      });
      var text = query.toString();
      if (text) { url += "?" + text; }
    } else {
      headers["Content-Type"] = form.querySelector("input[data-content-type]").value;
      init.body = form.querySelector("textarea[name=body]").value;
    }
    var region = form.querySelector(".answer");
    var button = form.querySelector("button");
    button.disabled = true;
    show(region, "Sending " + method + " " + url + " ...", "", "text/plain", "");
    fetch(url, init).then(function (response) {
      return response.text().then(function (body) {
        show(region, response.status + " " + response.statusText + " (" + (response.headers.get("Content-Type") || "no body") + ")",
             response.headers.get("Uvdose-Caution"), response.headers.get("Content-Type") || "", body);
      });
    }).catch(function (error) {
      show(region, "The request did not reach the service: " + error, "", "text/plain", "");
    }).finally(function () {
      button.disabled = false;
    });
  }

  document.querySelectorAll("form.try").forEach(function (form) {
    form.querySelectorAll("[data-needs-script]").forEach(function (element) { element.hidden = false; });
    form.addEventListener("submit", function (event) { send(form, event); });
  });
}());
