// Safe output: write to a temporary file beside the target, then rename over it, so an
// interrupted run never leaves a partial file and an existing output is replaced only on success.
import { ExitCode, opt, RbfieldError } from "../errors.ts";
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

/** Device and inode of an existing file (catches hard links), or undefined. */
function identity(p: string): string | undefined {
  try {
    const st = fs.statSync(p);
    // Some file systems report inode 0 for every file; only a real inode identifies one.
    return st.ino ? `${st.dev}:${st.ino}` : undefined;
  } catch {
    return undefined;
  }
}

/** Refuse an output path that is one of the inputs (after resolving links, including hard links). */
export function refuseInputAsOutput(output: string, inputs: string[]): void {
  const out = canonical(output);
  const outId = identity(output);
  for (const input of inputs) {
    if (canonical(input) === out || (outId !== undefined && identity(input) === outId)) {
      throw new RbfieldError(
        "the output path is also an input file; choose another output name",
        ExitCode.io,
        { file: output },
      );
    }
  }
}

let counter = 0;

/** A name for a new temporary file beside `target` that no other writer uses. */
function temporaryName(dir: string, base: string): string {
  counter = (counter + 1) % 1e9;
  const random = Math.floor(Math.random() * 0x100000000).toString(16);
  return path.join(dir, `.${base}.${process.pid}.${counter}.${random}.tmp`);
}

/**
 * A long text as pieces (a table's records, say), written as it is made, a block of about 1 MiB at a
 * time, so that neither the whole text nor its bytes are ever held.
 */
export interface TextPieces {
  pieces: Iterable<string>;
}

/** What a file holds: text, bytes, or text in pieces. */
export type FileData = string | Uint8Array | TextPieces;

/** Bytes of text written per write call for TextPieces. */
const BLOCK_CHARS = 1 << 20;

/**
 * Create a new file (never opening an existing one, nor following a link planted at its name:
 * O_EXCL, POSIX open(2)) and write data to it.
 */
function writeNewFile(file: string, data: FileData, sync: boolean): void {
  const fd = fs.openSync(file, "wx", 0o666);
  try {
    const put = (bytes: Uint8Array) => {
      let done = 0;
      while (done < bytes.length) done += fs.writeSync(fd, bytes, done, bytes.length - done);
    };
    if (typeof data === "string") put(new TextEncoder().encode(data));
    else if (data instanceof Uint8Array) put(data);
    else {
      const encoder = new TextEncoder();
      let block: string[] = [], chars = 0;
      for (const piece of data.pieces) {
        block.push(piece);
        chars += piece.length;
        if (chars >= BLOCK_CHARS) {
          put(encoder.encode(block.join("")));
          block = [];
          chars = 0;
        }
      }
      if (block.length) put(encoder.encode(block.join("")));
    }
    // Data on disk before the rename makes it visible (common practice for atomic replacement).
    if (sync) {
      try {
        fs.fsyncSync(fd);
      } catch { /* not every file system supports fsync; the rename is still atomic */ }
    }
  } finally {
    fs.closeSync(fd);
  }
}

/** Short reason for a file-system error; `missing` says what ENOENT means where it happened. */
function reason(e: unknown, missing = "the folder does not exist"): string {
  const code = (e as { code?: string })?.code;
  if (code === "EACCES" || code === "EPERM") return "permission denied";
  if (code === "EROFS") return "the file system is read-only";
  if (code === "ENOSPC") return "the disk is full";
  if (code === "EISDIR") return "a folder has that name";
  if (code === "ENOENT") return missing;
  return (e as Error)?.message ?? String(e);
}

/** Check, before long work starts, that a file can be created in the output's folder. */
export function checkWritableFolder(output: string): void {
  const dir = path.dirname(path.resolve(output));
  let st: fs.Stats;
  try {
    st = fs.statSync(dir);
  } catch {
    throw new RbfieldError(`the folder ${dir} does not exist; create it first`, ExitCode.io, { file: output });
  }
  if (!st.isDirectory()) throw new RbfieldError(`${dir} is not a folder; choose another output path`, ExitCode.io, { file: output });
  refuseFolderAsOutput(output);
  const probe = temporaryName(dir, "rbfield-probe");
  try {
    writeNewFile(probe, "", false);
  } catch (e) {
    throw new RbfieldError(
      `cannot write in the folder ${dir} (${reason(e, "files cannot be created there")}); choose another output folder or fix its permissions`,
      ExitCode.io,
      { file: output },
    );
  }
  try {
    fs.unlinkSync(probe);
  } catch { /* leave it: harmless and hidden */ }
}

/** Write data to path atomically (new temporary file in the same folder, then rename). */
export function writeFileAtomic(target: string, data: FileData): void {
  writeFilesAtomic([[target, data]]);
}

/** Create a folder (and parents) for outputs. */
export function ensureFolder(dir: string): void {
  try {
    fs.mkdirSync(dir, { recursive: true });
  } catch (e) {
    const code = (e as { code?: string })?.code;
    const why = code === "EEXIST" || code === "ENOTDIR" ? "a file has that name" : reason(e, "folders cannot be created there");
    throw new RbfieldError(`cannot create the output folder (${why}); choose another ${opt("out")}`, ExitCode.io, { file: dir });
  }
  if (!fs.statSync(dir).isDirectory()) {
    throw new RbfieldError(`cannot create the output folder (a file has that name); choose another ${opt("out")}`, ExitCode.io, { file: dir });
  }
}

/**
 * Write several files as one step: every file goes to a new temporary file first, and only when
 * all are written are they renamed over their targets. A failure before the renames leaves every
 * existing output untouched and removes the temporary files.
 */
export function writeFilesAtomic(files: [string, FileData][]): void {
  const batch = fileBatch();
  for (const [target, data] of files) batch.add(target, data);
  batch.commit();
}

/**
 * writeFilesAtomic one file at a time: `add` writes a file's temporary copy at once (so its data
 * need not be kept), `commit` renames them all over their targets, `abort` removes them. A failure
 * in `add` or `commit` removes every temporary file and throws; until `commit` no target changes.
 */
export interface FileBatch {
  add(target: string, data: FileData): void;
  commit(): void;
  abort(): void;
}

export function fileBatch(): FileBatch {
  const pending: [string, string][] = [];
  const abort = () => {
    for (const [tmp] of pending) {
      try {
        fs.unlinkSync(tmp);
      } catch { /* never created, or already gone */ }
    }
    pending.length = 0;
  };
  const fail = (e: unknown, file: string): never => {
    abort();
    // A file-system error (it has a code: ENOSPC, EACCES, …) is the user's to fix; anything else
    // (a table's pieces failing as they are made) is passed on as it is.
    if (e instanceof RbfieldError || !(e as { code?: string })?.code) throw e;
    throw new RbfieldError(`cannot write the file (${reason(e)}); check the folder and free space, or choose another output path`, ExitCode.io, { file });
  };
  return {
    add(target, data) {
      const tmp = temporaryName(path.dirname(path.resolve(target)), path.basename(target));
      pending.push([tmp, target]);
      try {
        writeNewFile(tmp, data, true);
      } catch (e) {
        fail(e, target);
      }
    },
    commit() {
      while (pending.length > 0) {
        const [tmp, target] = pending[0];
        try {
          fs.renameSync(tmp, target);
        } catch (e) {
          fail(e, target);
        }
        pending.shift();
      }
    },
    abort,
  };
}

/** Refuse, before any work, an output path that is a folder. */
export function refuseFolderAsOutput(output: string): void {
  try {
    if (fs.statSync(output).isDirectory()) {
      throw new RbfieldError("a folder has this name; choose a file name for the output", ExitCode.io, { file: output });
    }
  } catch (e) {
    if (e instanceof RbfieldError) throw e;
  }
}
