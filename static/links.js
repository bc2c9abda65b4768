// Links the server writes relative ("/?L=47u&..."), shown whole: made absolute from
// the page's own origin, so a colleague on another port or host gets a link that opens.
// (The server never builds a URL from the Host header it was sent.)
for (const a of document.querySelectorAll("a[data-own-origin]")) {
  const url = new URL(a.getAttribute("href"), location.origin).href;
  a.href = url;
  a.textContent = url;
}
