/** The project's root folder (where package.json is), from source or from the compiled dist/ tree. */
import { existsSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

export function projectRoot(from: string = import.meta.url): string {
  let dir = dirname(fileURLToPath(from));
  for (let k = 0; k < 6; k++) {
    if (existsSync(join(dir, 'package.json')) && existsSync(join(dir, 'config'))) return dir;
    dir = dirname(dir);
  }
  throw new Error('cannot find the plumbline project root (package.json and config/)');
}
