// Worker for a run's big tables: writes residuals.csv or estimates.csv into the temporary file the
// main thread reserved (fileBatch().reserve), by the same code as in the main thread, while that
// thread draws the map and the report (table_jobs.ts).
import { workerPort } from "../workers.ts";
import { writeTemporary } from "./atomic.ts";
import { type TableJob, tablePieces } from "./table_jobs.ts";

globalThis.addEventListener("message", (e: Event) => {
  const job = (e as MessageEvent<TableJob & { file: string }>).data;
  try {
    writeTemporary(job.file, tablePieces(job));
    workerPort.postMessage({ done: true });
  } catch (err) {
    workerPort.postMessage({ error: (err as Error)?.message ?? String(err) });
  }
});
