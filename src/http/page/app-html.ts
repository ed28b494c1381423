/**
 * The page shell: one HTML document for the overview (/) and a stream's page (/streams/:name);
 * the script reads the path and draws the right one. Everything is served by the daemon itself
 * (no CDN, works offline); the Content-Security-Policy in server.ts allows only same-origin assets.
 */

function escapeAttr(s: string): string {
  return s.replace(/&/g, '&amp;').replace(/"/g, '&quot;').replace(/</g, '&lt;').replace(/>/g, '&gt;');
}

/** The document for a base path ('' or e.g. '/modewatch'). */
export function pageHtml(base: string): string {
  const b = escapeAttr(base);
  return `<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="modewatch-base" content="${b}">
<title>modewatch</title>
<link rel="icon" href="${b}/favicon.svg" type="image/svg+xml">
<link rel="stylesheet" href="${b}/assets/app.css">
<script src="${b}/assets/app.js" defer></script>
</head>
<body>
<header class="top">
<a class="brand" href="${b}/">modewatch</a>
<span class="tagline">mixture models of event streams</span>
<span id="live" class="live" role="status" aria-live="polite"></span>
</header>
<main id="main"><p>Loading&hellip;</p></main>
<noscript><p>This page draws with JavaScript. The same data is served as JSON at ${b}/api/streams.</p></noscript>
</body>
</html>
`;
}

/** A small mark: two overlapping bumps. */
export const FAVICON_SVG = `<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 32 32"><rect width="32" height="32" rx="6" fill="#fff"/><path d="M2 26 C8 26 8 6 12 6 S16 26 19 22 S23 14 25 14 S28 26 30 26" fill="none" stroke="#0072B2" stroke-width="3"/></svg>
`;
