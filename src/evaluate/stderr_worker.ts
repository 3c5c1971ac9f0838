// Worker for the standard-error grid of a local model: the lattice rows [from, to) of a packed model
// (see gridStandardErrorParallel in stderr.ts), computed by the same code as in the main thread.
import { workerPort } from "../workers.ts";
import { localErrorEstimatorPacked } from "./local_stderr.ts";
import { type ErrorJob, errorsAtNodes } from "./stderr.ts";

globalThis.addEventListener("message", (e: Event) => {
  const job = (e as MessageEvent<ErrorJob>).data;
  try {
    const out = new Float64Array((job.to - job.from) * job.lattice.cols.length);
    errorsAtNodes(localErrorEstimatorPacked(job.packed), job.spec, job.lattice, job.from, job.to, job.masked, out);
    workerPort.postMessage(out, [out.buffer]);
  } catch (err) {
    workerPort.postMessage({ error: (err as Error)?.message ?? String(err) });
  }
});
