// The reference side of the benchmark: one long-lived /usr/bin/python3 running scipy_reference.py,
// spoken to in JSON lines. Each reference run is timed inside Python (perf_counter around the work
// only), so the harness can interleave it with rbfield's runs in the same process lifetime.
//
// Fair BLAS: some processors set OPENBLAS_CORETYPE / OPENBLAS_L2_SIZE in the environment to pin an
// OpenBLAS kernel; both are removed together from the child's environment only (never globally),
// so OpenBLAS picks its kernel for this processor, and the kernel it picked is reported.
import type { Runner } from "./harness.ts";

export const PYTHON = "/usr/bin/python3";
/** Variables removed (both together) from the Python child's environment. */
export const BLAS_PINS = ["OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE"] as const;

export interface BlasLibrary {
  internal_api?: string;
  version?: string;
  architecture?: string;
  config?: string;
  num_threads?: number;
  filepath?: string;
}
export interface ReferenceInfo {
  python: string;
  numpy: string;
  scipy: string;
  blas: { via: string; libraries: BlasLibrary[]; numpy_build?: string[] };
  /** Which of BLAS_PINS were set here (and so removed for the child). */
  removedFromChild: Record<string, string>;
  /** OPENBLAS_NUM_THREADS given to the child, if any. */
  blasThreads?: number;
}

/** The answer to one timed reference run. */
export interface ReferenceRun {
  seconds: number;
  summary: Record<string, number>;
}

type Reply = { ok: boolean; error?: string } & Record<string, unknown>;

export class Reference {
  #child: Deno.ChildProcess;
  #writer: WritableStreamDefaultWriter<Uint8Array>;
  #lines: AsyncIterator<string>;
  #queue: Promise<unknown> = Promise.resolve();
  #next = 0;
  info!: ReferenceInfo;

  private constructor(child: Deno.ChildProcess) {
    this.#child = child;
    this.#writer = child.stdin.getWriter();
    this.#lines = readLines(child.stdout)[Symbol.asyncIterator]();
  }

  /** Start Python; undefined (with the reason printed) when python3 or scipy is missing. */
  static async start(options: { blasThreads?: number } = {}): Promise<Reference | undefined> {
    const env = Deno.env.toObject();
    const removedFromChild: Record<string, string> = {};
    if (BLAS_PINS.some((k) => k in env)) {
      for (const k of BLAS_PINS) {
        if (k in env) removedFromChild[k] = env[k];
        delete env[k];
      }
    }
    if (options.blasThreads !== undefined) env.OPENBLAS_NUM_THREADS = String(options.blasThreads);
    let ref: Reference;
    try {
      const child = new Deno.Command(PYTHON, {
        args: [new URL("./scipy_reference.py", import.meta.url).pathname],
        env,
        clearEnv: true,
        stdin: "piped",
        stdout: "piped",
        stderr: "inherit",
      }).spawn();
      ref = new Reference(child);
      const info = await ref.request({ op: "info" }) as unknown as ReferenceInfo;
      ref.info = { ...info, removedFromChild, blasThreads: options.blasThreads };
    } catch (e) {
      console.error(`reference unavailable (${(e as Error).message.split("\n")[0]}); install python3-scipy for the ratios`);
      return undefined;
    }
    return ref;
  }

  /** One request, one reply; requests are queued so replies cannot cross. */
  request(body: Record<string, unknown>): Promise<Reply> {
    const job = this.#queue.then(async () => {
      await this.#writer.write(new TextEncoder().encode(JSON.stringify(body) + "\n"));
      const { value, done } = await this.#lines.next();
      if (done) throw new Error("the Python reference process ended");
      const reply = JSON.parse(value) as Reply;
      if (!reply.ok) throw new Error(`reference ${String(body.op)} failed: ${reply.error}`);
      return reply;
    });
    this.#queue = job.catch(() => undefined);
    return job;
  }

  /** Prepare a case in Python (untimed) and return its id. */
  async load(kind: string, params: Record<string, unknown>): Promise<string> {
    const id = `${kind}-${this.#next++}`;
    await this.request({ op: "load", id, kind, ...params });
    return id;
  }

  /** A harness runner for a loaded case: the seconds are Python's own measurement of the work. */
  runner(id: string): Runner<ReferenceRun> {
    return async () => {
      const reply = await this.request({ op: "run", id });
      const value = { seconds: reply.seconds as number, summary: reply.summary as Record<string, number> };
      return { seconds: value.seconds, value };
    };
  }

  /** The array of the case's last run (written by Python to a file, read back here). */
  async result(id: string, dir: string): Promise<Float64Array> {
    const path = `${dir}/${id}.f64`;
    await this.request({ op: "result", id, path });
    const bytes = await Deno.readFile(path);
    await Deno.remove(path);
    return new Float64Array(bytes.buffer, bytes.byteOffset, bytes.byteLength / 8);
  }

  async drop(id: string): Promise<void> {
    await this.request({ op: "drop", id });
  }

  async close(): Promise<void> {
    await this.#queue;
    await this.#writer.close();
    await this.#child.status;
  }

  /** One line describing the BLAS numpy and scipy used, for the table's header and the docs. */
  blasLine(): string {
    const libs = this.info.blas.libraries;
    const lib = libs[0];
    const what = lib
      ? [
        lib.internal_api === "openblas" ? "OpenBLAS" : lib.internal_api,
        lib.version ?? lib.config?.match(/OpenBLAS ([\d.]+)/)?.[1],
        lib.architecture ? `kernel ${lib.architecture}` : undefined,
        lib.num_threads !== undefined ? `${lib.num_threads} thread${lib.num_threads === 1 ? "" : "s"}` : undefined,
      ].filter(Boolean).join(" ")
      : `unknown (${(this.info.blas.numpy_build ?? []).join("; ") || "no BLAS library found in the process"})`;
    const removed = Object.keys(this.info.removedFromChild);
    const env = removed.length ? `; removed from the child's environment: ${removed.map((k) => `${k}=${this.info.removedFromChild[k]}`).join(", ")}` : `; ${BLAS_PINS.join(" / ")} not set`;
    const threads = this.info.blasThreads !== undefined ? `; OPENBLAS_NUM_THREADS=${this.info.blasThreads}` : "";
    return `${what}${libs.length > 1 ? ` (+${libs.length - 1} more)` : ""} [${this.info.blas.via}]${env}${threads}`;
  }
}

/** Lines of a byte stream. */
async function* readLines(stream: ReadableStream<Uint8Array>): AsyncGenerator<string> {
  let buffered = "";
  for await (const chunk of stream.pipeThrough(new TextDecoderStream())) {
    buffered += chunk;
    let nl: number;
    while ((nl = buffered.indexOf("\n")) >= 0) {
      yield buffered.slice(0, nl);
      buffered = buffered.slice(nl + 1);
    }
  }
  if (buffered) yield buffered;
}

/**
 * The reference cases loaded for one measurement: a runner per case, the array of the last run of
 * the last case loaded (for checks), and dropping them all when the measurement is done.
 */
export class ReferenceCases {
  #ids: string[] = [];
  constructor(readonly ref: Reference | undefined, readonly tmp: string) {}

  /** Load a case (undefined without a reference) and return its runner. */
  async runner(kind: string, params: Record<string, unknown>): Promise<Runner<ReferenceRun> | undefined> {
    if (!this.ref) return undefined;
    const id = await this.ref.load(kind, params);
    this.#ids.push(id);
    return this.ref.runner(id);
  }

  async lastArray(): Promise<Float64Array | undefined> {
    const id = this.#ids.at(-1);
    return this.ref && id ? await this.ref.result(id, this.tmp) : undefined;
  }

  async drop(): Promise<void> {
    for (const id of this.#ids.splice(0)) await this.ref?.drop(id);
  }
}
