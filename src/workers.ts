// Worker start-up, once for every stage that spreads work over cores: start a module worker, post one
// message, wait for one reply, stop the worker (runWorker); or keep a few workers and hand them tasks
// one at a time as each finishes (runWorkerQueue). A reply { error } or a failed start rejects.

/** The worker's side of postMessage (modules that run inside a Web Worker use this). */
export const workerPort = globalThis as unknown as { postMessage(message: unknown, transfer?: Transferable[]): void };

/** Run one job in a new worker from `url` and resolve with its reply. */
export function runWorker<T>(url: URL, message: unknown, transfer: Transferable[] = []): Promise<T> {
  return new Promise<T>((resolve, reject) => {
    const worker = new Worker(url.href, { type: "module" });
    worker.onmessage = (e: MessageEvent<T & { error?: string }>) => {
      worker.terminate();
      if (e.data && typeof e.data === "object" && "error" in e.data && e.data.error) reject(new Error(e.data.error));
      else resolve(e.data);
    };
    worker.onerror = (e) => {
      worker.terminate();
      e.preventDefault();
      reject(new Error(e.message));
    };
    worker.postMessage(message, transfer);
  });
}

/** Can this host start worker threads at all? */
export function workersAvailable(threads: number): boolean {
  return threads >= 2 && typeof Worker !== "undefined";
}

/**
 * Run `tasks` on `threads` workers from `url`: each worker first gets `setup` (posted once, its
 * buffers cloned once per worker), then one task at a time, the next as soon as it replies, so a
 * worker slowed by other work takes fewer tasks. Replies are stored by task number, so the result
 * does not depend on which worker ran which task.
 */
export function runWorkerQueue<T>(url: URL, setup: unknown, tasks: unknown[], threads: number): Promise<T[]> {
  const results: T[] = new Array(tasks.length);
  let next = 0;
  const workers: Worker[] = [];
  const stopAll = () => workers.forEach((w) => w.terminate());
  return new Promise<T[]>((resolve, reject) => {
    let running = 0, failed = false;
    const fail = (e: Error) => {
      if (failed) return;
      failed = true;
      stopAll();
      reject(e);
    };
    const count = Math.min(threads, tasks.length);
    if (count === 0) return resolve(results);
    for (let t = 0; t < count; t++) {
      const worker = new Worker(url.href, { type: "module" });
      workers.push(worker);
      running++;
      let current = -1;
      const give = () => {
        if (next >= tasks.length) {
          worker.terminate();
          if (--running === 0 && !failed) resolve(results);
          return;
        }
        current = next++;
        worker.postMessage(tasks[current]);
      };
      worker.onmessage = (e: MessageEvent<T & { error?: string }>) => {
        if (e.data && typeof e.data === "object" && "error" in e.data && e.data.error) return fail(new Error(e.data.error));
        results[current] = e.data;
        give();
      };
      worker.onerror = (e) => {
        e.preventDefault();
        fail(new Error(e.message));
      };
      worker.postMessage(setup);
      give();
    }
  });
}
