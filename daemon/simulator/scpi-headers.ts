/**
 * Server-side SCPI header matching for the simulated instrument (SCPI 1999 vol. 1 rules): each
 * mnemonic accepts its long form or its short form (the upper-case part), case-insensitively, with
 * an optional numeric suffix 1; nodes in [brackets] may be omitted. A pattern is written like the
 * standard's own notation, e.g. "[SOURce]:VOLTage[:LEVel][:IMMediate][:AMPLitude]".
 */
interface Node {
  readonly long: string;
  readonly short: string;
  readonly optional: boolean;
}

export interface HeaderPattern {
  readonly nodes: readonly Node[];
}

export function pattern(spec: string): HeaderPattern {
  const nodes: Node[] = [];
  const re = /(\[)?:?([A-Za-z*?]+)\]?/g;
  let m: RegExpExecArray | null;
  while ((m = re.exec(spec)) !== null) {
    const word = m[2];
    const short = word.replace(/[a-z]/g, '');
    nodes.push({ long: word.toUpperCase(), short: short.toUpperCase(), optional: m[1] === '[' });
  }
  return { nodes };
}

function nodeMatches(node: Node, token: string): boolean {
  const t = token.toUpperCase().replace(/1$/, '');
  return t === node.long || t === node.short;
}

/** Whether the header tokens (already split on ':') match the pattern. */
export function matches(p: HeaderPattern, tokens: readonly string[]): boolean {
  const go = (ni: number, ti: number): boolean => {
    if (ni === p.nodes.length) return ti === tokens.length;
    const node = p.nodes[ni];
    if (ti < tokens.length && nodeMatches(node, tokens[ti]) && go(ni + 1, ti + 1)) return true;
    return node.optional && go(ni + 1, ti);
  };
  return go(0, 0);
}
