/**
 * Webhook sink: POSTs each AlertTransition, as JSON, to one URL. A 2xx answer is delivered;
 * anything else goes through the shared retry/backoff rules (src/alerting/delivery-queue.ts).
 */
import type { AlertTransition } from '../detect/alert.js';
import { DeliveryQueue, type DeliveryOptions } from './delivery-queue.js';
import { QueuedSink } from './queued-sink.js';
import { postJson } from './http-post.js';

export interface WebhookSinkOptions {
  url: string;
  /** Sent as `Authorization: Bearer <token>`; never logged. */
  bearerToken?: string;
  /** Sink name in metrics and logs (default "webhook"). */
  name?: string;
  delivery?: Omit<DeliveryOptions, 'name' | 'maxBatch'>;
}

export class WebhookSink extends QueuedSink {
  constructor(options: WebhookSinkOptions) {
    const url = checkHttpUrl(options.url, 'webhook url');
    const name = options.name ?? 'webhook';
    const headers: Record<string, string> = {};
    if (options.bearerToken) headers.authorization = `Bearer ${options.bearerToken}`;
    super(
      name,
      new DeliveryQueue<AlertTransition>(async ([transition], signal) => postJson(url, transition, headers, signal), { ...options.delivery, name, maxBatch: 1 }),
    );
  }
}

/** Accepts http(s) URLs only, with a message naming what was wrong. */
export function checkHttpUrl(url: string, what: string): string {
  let u: URL;
  try {
    u = new URL(url);
  } catch {
    throw new TypeError(`${what} is not a valid URL: ${JSON.stringify(url)}`);
  }
  if (u.protocol !== 'http:' && u.protocol !== 'https:') {
    throw new TypeError(`${what} must be http or https, got ${u.protocol}`);
  }
  return url;
}
