/** Garbage collection in benchmarks: a full collection on demand (V8's gc, exposed at run time), and a count of them. */
import { PerformanceObserver } from 'node:perf_hooks';
import { setFlagsFromString } from 'node:v8';
import { runInNewContext } from 'node:vm';

export function gcFunction(): () => void {
  setFlagsFromString('--expose-gc');
  return runInNewContext('gc') as () => void;
}

/** Runs `work` and counts the garbage collections V8 reports while it runs (its result is returned beside). */
export async function collectionsDuring<T>(work: () => T): Promise<{ result: T; collections: number }> {
  let collections = 0;
  const obs = new PerformanceObserver((list) => {
    collections += list.getEntries().length;
  });
  obs.observe({ entryTypes: ['gc'] });
  const result = work();
  await new Promise((r) => setTimeout(r, 50)); // let the observer deliver its entries
  obs.disconnect();
  return { result, collections };
}
