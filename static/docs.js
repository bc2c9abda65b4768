// The /docs page: Swagger UI (from the installed swagger-ui-bundle-v2 package) on our OpenAPI.
"use strict";
window.addEventListener("DOMContentLoaded", () => {
  const root = document.getElementById("docs");
  window.SwaggerUIBundle({
    url: root.dataset.spec,
    domNode: root,
    deepLinking: true,
    presets: [window.SwaggerUIBundle.presets.apis],
    layout: "BaseLayout",
  });
});
