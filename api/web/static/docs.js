// The OpenAPI docs page: Swagger UI from this server's own copy, reading /openapi.json.
"use strict";
window.addEventListener("DOMContentLoaded", function () {
  window.SwaggerUIBundle({
    url: "/openapi.json",
    dom_id: "#swagger-ui",
    deepLinking: true,
    validatorUrl: null,
    presets: [window.SwaggerUIBundle.presets.apis],
  });
});
