// Workspace symbols: the neurons of a file, found from its syntax tree (no analysis needed,
// so files read from disk cost one parse), and the query match the server filters by.
// The language server (lsp/workspaceFiles.ts) decides which files to read; this file reads
// nothing itself.
// Invariant: pure; ranges are UTF-16 offsets into the text that was parsed.
import type * as A from '../syntax/ast';
import { parse } from '../syntax/parse';

export interface NeuronSymbol {
  name: string;
  /** The whole declaration, and its name. */
  range: A.Range;
  selectionRange: A.Range;
}

/** The named neurons of a parsed file, in text order. */
export function neuronSymbols(file: A.SourceFile): NeuronSymbol[] {
  const out: NeuronSymbol[] = [];
  for (const item of file.items) {
    if (item.kind !== 'neuron' || !item.name) continue;
    out.push({ name: item.name.name, range: item.range, selectionRange: item.name.range });
  }
  return out;
}

/** The neurons of a text (parses it). */
export const neuronSymbolsOfText = (text: string): NeuronSymbol[] => neuronSymbols(parse(text).file);

/**
 * Whether `name` matches a workspace-symbol query: every character of the query appears in
 * the name in order, ignoring case (`lc` matches `LifCurrent`); an empty query matches all.
 */
export function matchesQuery(name: string, query: string): boolean {
  const n = name.toLowerCase(), q = query.toLowerCase().replace(/\s+/g, '');
  let i = 0;
  for (const ch of q) {
    i = n.indexOf(ch, i);
    if (i < 0) return false;
    i++;
  }
  return true;
}
