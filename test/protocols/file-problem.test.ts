/** The one wording for a path that cannot be read: the reason in words, never an error code. */
import { describe, expect, it } from 'vitest';
import { join } from 'node:path';
import { fileProblem, notFound } from '../../protocols/file-problem.js';

const err = (code: string) => Object.assign(new Error(`${code}: raw`), { code });

describe('file problems', () => {
  it('says in words why a path cannot be read', () => {
    expect(fileProblem('/d/x.csv', err('ENOENT'))).toBe('the file does not exist; check the path');
    expect(fileProblem('/d/x.csv/y', err('ENOTDIR'))).toMatch(/^the file does not exist \(a part of the path is a file/);
    expect(fileProblem('/d/x.csv', err('EACCES'))).toBe('permission denied: this user may not read the file');
    expect(fileProblem('/d', err('EISDIR'))).toBe('a folder, not a file');
    expect(fileProblem('/d/x.csv', err('EIO'))).toBe('cannot read the file: EIO: raw');
  });
  it('a relative path is shown as it was looked for', () => {
    expect(notFound('x.csv', 'folder')).toBe(`the folder does not exist (looked for ${join(process.cwd(), 'x.csv')}); check the path`);
  });
});
