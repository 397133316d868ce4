/**
 * Why a path a person gave cannot be read, in words (no error codes): one wording for every
 * command that reads a file or folder. The caller names the path in front ("PATH: …").
 */
import { isAbsolute, resolve } from 'node:path';

/** "the file does not exist" (with the full path looked for, when the given one was relative). */
export function notFound(path: string, what = 'file'): string {
  return `the ${what} does not exist${isAbsolute(path) ? '' : ` (looked for ${resolve(path)})`}; check the path`;
}

/** The reason a read of `path` failed with `error` (a Node file-system error). */
export function fileProblem(path: string, error: unknown, what = 'file'): string {
  const e = error as NodeJS.ErrnoException;
  switch (e?.code) {
    case 'ENOENT':
      return notFound(path, what);
    case 'ENOTDIR':
      return `the ${what} does not exist (a part of the path is a file, not a folder); check the path`;
    case 'EACCES':
    case 'EPERM':
      return `permission denied: this user may not read the ${what}`;
    case 'EISDIR':
      return `a folder, not a ${what}`;
    default:
      return `cannot read the ${what}: ${e?.message ?? String(error)}`;
  }
}
