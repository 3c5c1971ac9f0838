// Worker start-up, once for every stage that spreads work over cores: start a module worker, post one
// message, wait for one reply, stop the worker. A reply { error } or a failed start rejects.

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
