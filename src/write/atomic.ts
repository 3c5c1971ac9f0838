// Safe output: write to a temporary file beside the target, then rename over it, so an
// interrupted run never leaves a partial file and an existing output is replaced only on success.
import { ExitCode, RbfieldError } from "../errors.ts";
import * as fs from "node:fs";
import * as path from "node:path";

function canonical(p: string): string {
  const abs = path.resolve(p);
  try {
    return fs.realpathSync(abs);
  } catch {
    // Not there yet: resolve the folder, keep the name.
    try {
      return path.join(fs.realpathSync(path.dirname(abs)), path.basename(abs));
    } catch {
      return abs;
    }
  }
}

/** Refuse an output path that is one of the inputs (after resolving links). */
export function refuseInputAsOutput(output: string, inputs: string[]): void {
  const out = canonical(output);
  for (const input of inputs) {
    if (canonical(input) === out) {
      throw new RbfieldError(`${output}: the output path is an input file; choose another output name`, ExitCode.io, { file: output });
    }
  }
}

/** Check, before long work starts, that a file can be created in the output's folder. */
export function checkWritableFolder(output: string): void {
  const dir = path.dirname(path.resolve(output));
  let st: fs.Stats;
  try {
    st = fs.statSync(dir);
  } catch {
    throw new RbfieldError(`${output}: the folder ${dir} does not exist; create it first`, ExitCode.io, { file: output });
  }
  if (!st.isDirectory()) throw new RbfieldError(`${output}: ${dir} is not a folder`, ExitCode.io, { file: output });
  const probe = path.join(dir, `.rbfield-probe-${process.pid}-${Date.now()}`);
  try {
    fs.writeFileSync(probe, "");
    fs.unlinkSync(probe);
  } catch {
    throw new RbfieldError(`${output}: cannot write in the folder ${dir} (permission denied?)`, ExitCode.io, { file: output });
  }
}

/** Write data to path atomically (temporary file in the same folder, then rename). */
export function writeFileAtomic(target: string, data: string | Uint8Array): void {
  const dir = path.dirname(path.resolve(target));
  const tmp = path.join(dir, `.${path.basename(target)}.${process.pid}.tmp`);
  try {
    fs.writeFileSync(tmp, data);
    fs.renameSync(tmp, target);
  } catch (e) {
    try {
      fs.unlinkSync(tmp);
    } catch { /* nothing to remove */ }
    throw new RbfieldError(`${target}: cannot write the file (${(e as Error).message})`, ExitCode.io, { file: target });
  }
}

/** Create a folder (and parents) for outputs. */
export function ensureFolder(dir: string): void {
  try {
    fs.mkdirSync(dir, { recursive: true });
  } catch (e) {
    throw new RbfieldError(`${dir}: cannot create the output folder (${(e as Error).message})`, ExitCode.io, { file: dir });
  }
}
