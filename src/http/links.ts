/** Links into the daemon's web page; alert sinks put them in alerts (generatorURL, annotations). */

/** A stream's page under the URL users reach the daemon at (its path prefix kept). */
export function streamPageUrl(externalUrl: string, stream: string): string {
  return `${externalUrl.replace(/\/+$/, '')}/streams/${encodeURIComponent(stream)}`;
}
