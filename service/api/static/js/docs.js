// Swagger UI on /v1/openapi.json, offline. The API key (the same one the page keeps for this tab) goes
// with every /v1 request: the document itself and "Try it out" calls.
(function () {
  "use strict";
  var KEY = "rolloff.apiKey";
  function key() { try { return sessionStorage.getItem(KEY) || ""; } catch (e) { return ""; } }
  var input = document.getElementById("docs-api-key");
  input.value = key();
  var ui = null;
  function start() {
    ui = SwaggerUIBundle({
      url: new URL("v1/openapi.json", document.baseURI).href,
      dom_id: "#swagger-ui",
      deepLinking: true,
      docExpansion: "list",
      defaultModelsExpandDepth: 0,
      tryItOutEnabled: false,
      validatorUrl: null,
      requestInterceptor: function (req) {
        var k = key();
        var sameService = req.url.indexOf(new URL("v1/", document.baseURI).href) === 0;
        if (k && sameService && !req.headers.Authorization) req.headers.Authorization = "Bearer " + k;
        return req;
      },
    });
    window.rolloffDocs = ui;
  }
  document.getElementById("docs-key").addEventListener("submit", function (ev) {
    ev.preventDefault();
    try {
      if (input.value.trim()) sessionStorage.setItem(KEY, input.value.trim());
      else sessionStorage.removeItem(KEY);
    } catch (e) { /* storage disabled */ }
    start();
  });
  start();
})();
