/**
 * POST a JSON body and classify the outcome for the delivery queue: 2xx is delivered;
 * 408, 429 and 5xx and network errors are worth retrying; any other status is not
 * (the receiver will refuse the same body again). Error messages name the URL's origin
 * and path and the status, never headers (a bearer token must not reach a log).
 */
export class HttpDeliveryError extends Error {
  constructor(
    message: string,
    readonly status: number | null,
    readonly retryable: boolean,
  ) {
    super(message);
  }
}

/** The URL without credentials or query string, for messages. */
export function safeUrl(url: string): string {
  try {
    const u = new URL(url);
    return `${u.origin}${u.pathname}`;
  } catch {
    return '(invalid url)';
  }
}

export async function postJson(
  url: string,
  body: unknown,
  headers: Record<string, string>,
  signal: AbortSignal,
): Promise<void> {
  let res: Response;
  try {
    res = await fetch(url, {
      method: 'POST',
      headers: { 'content-type': 'application/json', ...headers },
      body: JSON.stringify(body),
      signal,
    });
  } catch (err) {
    const cause = err instanceof Error ? (err.cause instanceof Error ? err.cause.message : err.message) : String(err);
    throw new HttpDeliveryError(`POST ${safeUrl(url)}: ${cause}`, null, true);
  }
  // Read the body so the connection can be reused; keep a little of it for the message.
  const text = await res.text().catch(() => '');
  if (res.status >= 200 && res.status < 300) return;
  const retryable = res.status === 408 || res.status === 429 || res.status >= 500;
  throw new HttpDeliveryError(
    `POST ${safeUrl(url)}: HTTP ${res.status}${text ? `: ${text.slice(0, 200).trim()}` : ''}`,
    res.status,
    retryable,
  );
}
