// LSP handlers for the editor features: each converts positions, calls the pure provider
// in outputs/ on the cached analysis, and converts the result back to LSP types.
//
// Invariant: every handler is wrapped by `guarded`: an exception is logged and answered
// with the feature's empty result (null or []), never a crash; a ResponseError (a refusal
// meant for the user, e.g. an invalid new name) passes through. Unknown or closed
// documents give the empty result.
import { basename } from 'node:path';
import {
  CodeActionKind, CompletionItemKind, DocumentHighlightKind, ErrorCodes, InlayHintKind, InsertTextFormat, ResponseError, SymbolKind,
  type CodeAction, type CompletionItem, type Connection, type DocumentSymbol, type Diagnostic as LspDiagnostic,
  type SemanticTokens, type SemanticTokensDelta,
  type DocumentHighlight, type FoldingRange, type InlayHint, type Location, type SelectionRange, type SignatureHelp,
  type SymbolInformation, type TextEdit,
} from 'vscode-languageserver';
import { complete, type CompletionKind } from '../outputs/completion';
import { quickFixes } from '../outputs/codeActions';
import { rewriteAllFix } from '../syntax/migrate';
import { fixAll } from '../outputs/fixAll';
import { foldingRanges } from '../outputs/folding';
import { formatEdits } from '../outputs/format';
import { formatRangeEdits } from '../outputs/formatRange';
import { selectionRanges } from '../outputs/selectionRange';
import { signatureHelp } from '../outputs/signatureHelp';
import { matchesQuery, neuronSymbols } from '../outputs/workspaceSymbols';
import { hover, type HoverSection } from '../outputs/hover';
import { inlayHints } from '../outputs/inlayHints';
import { definition, highlights, references } from '../outputs/navigation';
import { isRefusal, prepareRename, rename } from '../outputs/rename';
import { encodeSemanticTokens, semanticTokens, semanticTokensEdits } from '../outputs/semanticTokens';
import { documentSymbols, type OutlineKind, type OutlineSymbol } from '../outputs/symbols';
import { analysisSummary } from '../outputs/summary';
import type { Analysis } from '../pipeline';
import { fromRange, isDiagnosticData, toLspDiagnostic, toOffset, toRange, toTextEdit } from './convert';
import { makeGuard, type DocumentState } from './documentState';
import { pathOfUri, type WorkspaceFiles } from './workspaceFiles';

/** The code action kind of "fix all" (VS Code's `source.fixAll`, for Saltus). */
export const FIX_ALL_KIND = `${CodeActionKind.SourceFixAll}.saltus`;
/** Workspace symbols answered at most. */
const MAX_WORKSPACE_SYMBOLS = 1000;

/** The pure providers the handlers call (replaceable for tests). */
export const DEFAULT_FEATURES = {
  hover, complete, documentSymbols, definition, references, highlights, prepareRename, rename,
  semanticTokens, foldingRanges, formatEdits, quickFixes, inlayHints, analysisSummary,
  signatureHelp, selectionRanges, formatRangeEdits, fixAll,
};
export type Features = typeof DEFAULT_FEATURES;

const COMPLETION_KIND: Record<CompletionKind, CompletionItemKind> = {
  param: CompletionItemKind.Constant, state: CompletionItemKind.Variable, let: CompletionItemKind.Field, weight: CompletionItemKind.Property,
  time: CompletionItemKind.Constant, keyword: CompletionItemKind.Keyword, function: CompletionItemKind.Function, unit: CompletionItemKind.Unit,
  neuron: CompletionItemKind.Class, equation: CompletionItemKind.Snippet,
};
const OUTLINE_KIND: Record<OutlineKind, SymbolKind> = {
  timestep: SymbolKind.Property, neuron: SymbolKind.Class, param: SymbolKind.Constant, state: SymbolKind.Variable, let: SymbolKind.Field,
  equation: SymbolKind.Function, fire: SymbolKind.Event, incoming: SymbolKind.Event, connect: SymbolKind.Interface,
};

export function registerFeatures(connection: Connection, state: DocumentState, f: Features, sections: readonly HoverSection[], workspace: WorkspaceFiles): void {
  const guarded = makeGuard(state);

  connection.onHover(guarded('hover', null, (a, _uri, p) => {
    const h = f.hover(a, toOffset(a, p.position), sections);
    return h ? { contents: { kind: 'markdown' as const, value: h.markdown }, range: toRange(a, h.range) } : null;
  }));

  connection.onCompletion(guarded('completion', [] as CompletionItem[], (a, _uri, p) =>
    f.complete(a, toOffset(a, p.position)).map((c): CompletionItem => ({
      label: c.label,
      kind: COMPLETION_KIND[c.kind],
      ...(c.detail ? { detail: c.detail } : {}),
      ...(c.documentation ? { documentation: { kind: 'markdown' as const, value: c.documentation } } : {}),
      sortText: `${String(c.rank).padStart(3, '0')}_${c.label}`,
      filterText: c.label,
      textEdit: { range: toRange(a, c.replace), newText: c.snippet ?? c.label },
      insertTextFormat: c.snippet ? InsertTextFormat.Snippet : InsertTextFormat.PlainText,
    }))));

  const outline = (a: Analysis, s: OutlineSymbol): DocumentSymbol => ({
    name: s.name, kind: OUTLINE_KIND[s.kind], ...(s.detail ? { detail: s.detail } : {}),
    range: toRange(a, s.range), selectionRange: toRange(a, s.selectionRange), children: s.children.map((c) => outline(a, c)),
  });
  connection.onDocumentSymbol(guarded('document symbols', [] as DocumentSymbol[], (a) => f.documentSymbols(a).map((s) => outline(a, s))));

  connection.onDefinition(guarded('definition', null, (a, uri, p) => {
    const r = f.definition(a, toOffset(a, p.position));
    return r ? { uri, range: toRange(a, r) } : null;
  }));
  connection.onReferences(guarded('references', [] as Location[], (a, uri, p) =>
    f.references(a, toOffset(a, p.position), p.context?.includeDeclaration !== false).map((r) => ({ uri, range: toRange(a, r) }))));
  connection.onDocumentHighlight(guarded('highlights', [] as DocumentHighlight[], (a, _uri, p) =>
    f.highlights(a, toOffset(a, p.position)).map((h) => ({ range: toRange(a, h.range), kind: h.kind === 'write' ? DocumentHighlightKind.Write : DocumentHighlightKind.Read }))));

  connection.onPrepareRename(guarded('prepare rename', null, (a, _uri, p) => {
    const r = f.prepareRename(a, toOffset(a, p.position));
    if (isRefusal(r)) throw new ResponseError(ErrorCodes.InvalidRequest, r.error);
    return { range: toRange(a, r.range), placeholder: r.placeholder };
  }));
  connection.onRenameRequest(guarded('rename', null, (a, uri, p) => {
    const r = f.rename(a, toOffset(a, p.position), p.newName);
    if (isRefusal(r)) throw new ResponseError(ErrorCodes.InvalidRequest, r.error);
    return { changes: { [uri]: r.edits.map((e) => toTextEdit(a, e)) } };
  }));

  // Full results carry a resultId so that the next request may ask for a delta against them;
  // the last full result is kept per open document (the delta is computed from it).
  const lastTokens = new Map<string, { resultId: string; data: number[] }>();
  let tokenResults = 0;
  const remember = (uri: string, data: number[]): string => {
    const resultId = String(++tokenResults);
    const open = new Set(state.openUris());
    for (const u of lastTokens.keys()) if (!open.has(u)) lastTokens.delete(u);
    lastTokens.set(uri, { resultId, data });
    return resultId;
  };
  connection.languages.semanticTokens.on(guarded('semantic tokens', { data: [] as number[] } as SemanticTokens, (a, uri): SemanticTokens => {
    const data = encodeSemanticTokens(a, f.semanticTokens(a));
    return { resultId: remember(uri, data), data };
  }));
  connection.languages.semanticTokens.onDelta(guarded('semantic tokens delta', { data: [] as number[] } as SemanticTokens | SemanticTokensDelta, (a, uri, p) => {
    const data = encodeSemanticTokens(a, f.semanticTokens(a));
    const before = lastTokens.get(uri);
    const resultId = remember(uri, data);
    if (!before || before.resultId !== p.previousResultId) return { resultId, data };
    return { resultId, edits: semanticTokensEdits(before.data, data) };
  }));
  connection.languages.semanticTokens.onRange(guarded('semantic tokens range', { data: [] as number[] }, (a, _uri, p) =>
    ({ data: encodeSemanticTokens(a, f.semanticTokens(a, fromRange(a, p.range))) })));

  connection.onFoldingRanges(guarded('folding', [] as FoldingRange[], (a) =>
    f.foldingRanges(a).map((r) => ({ startLine: r.startLine, endLine: r.endLine, ...(r.kind ? { kind: r.kind } : {}) }))));

  connection.onDocumentFormatting(guarded('formatting', [] as TextEdit[], (a) => {
    const edits = f.formatEdits(a.text);
    if (!edits) { state.log('saltus: not formatted: the file has syntax errors (fix them first)'); return []; }
    return edits.map((e) => toTextEdit(a, e));
  }));
  connection.onDocumentRangeFormatting(guarded('range formatting', [] as TextEdit[], (a, _uri, p) => {
    const edits = f.formatRangeEdits(a.text, fromRange(a, p.range));
    if (!edits) { state.log('saltus: not formatted: the file has syntax errors (fix them first)'); return []; }
    return edits.map((e) => toTextEdit(a, e));
  }));

  connection.onCodeAction(guarded('code actions', [] as CodeAction[], (a, uri, p) => {
    const actions: CodeAction[] = [];
    // `only` filters by kind, a kind matching its refinements (source matches source.fixAll.saltus)
    const only = p.context?.only;
    const wants = (kind: string): boolean => (only ? only.some((o) => kind === o || kind.startsWith(`${o}.`)) : kind === CodeActionKind.QuickFix);
    if (wants(FIX_ALL_KIND)) {
      const all = f.fixAll(a, state.diagnosticsFor(state.analysisFor(uri)!));
      if (all.edits.length > 0) {
        actions.push({ title: `Fix all: ${all.applied.length} Saltus problem${all.applied.length === 1 ? '' : 's'} with one unambiguous fix`, kind: FIX_ALL_KIND,
          edit: { changes: { [uri]: all.edits.map((e) => toTextEdit(a, e)) } } });
      }
    }
    if (!wants(CodeActionKind.QuickFix)) return actions;
    const given = (p.context?.diagnostics ?? []).filter((d) => d.source === 'saltus' && isDiagnosticData(d.data));
    if (given.length > 0) {
      let all: ReturnType<typeof rewriteAllFix> | null = null;
      for (const d of given) {
        if (!isDiagnosticData(d.data)) continue;
        for (const fix of d.data.fixes) actions.push(action(fix.title, fix.preferred, d, { [uri]: fix.edits }));
        // the rewrite of every quoted docstring spans the file: computed here, not published with each hint
        if (d.code === 'quoted-docstring') {
          if (all === null) all = rewriteAllFix(a.text, a.parse);
          if (all) actions.push(action(all.title, false, d, { [uri]: all.edits.map((e) => toTextEdit(a, e)) }));
        }
      }
      return actions;
    }
    const c = state.analysisFor(uri)!;
    for (const q of f.quickFixes(a, fromRange(a, p.range), state.diagnosticsFor(c))) {
      actions.push(action(q.title, q.preferred, toLspDiagnostic(a, q.diagnostic, uri), { [uri]: q.fix.edits.map((e) => toTextEdit(a, e)) }));
    }
    return actions;
  }));

  connection.languages.inlayHint.on(guarded('inlay hints', [] as InlayHint[], (a, _uri, p) =>
    f.inlayHints(a, p.range ? fromRange(a, p.range) : undefined).map((h) => ({
      position: a.lines.positionAt(h.offset), label: h.label, kind: InlayHintKind.Type, paddingLeft: true, tooltip: h.tooltip,
    }))));

  connection.onSignatureHelp(guarded('signature help', null as SignatureHelp | null, (a, _uri, p) => {
    const h = f.signatureHelp(a, toOffset(a, p.position));
    if (!h) return null;
    const offsets = state.client().signatureLabelOffsets;
    return {
      signatures: [{ label: h.label, documentation: { kind: 'markdown' as const, value: h.documentation },
        parameters: h.parameters.map((q) => ({ label: offsets ? q.range : h.label.slice(q.range[0], q.range[1]), documentation: q.documentation })) }],
      activeSignature: 0,
      activeParameter: h.activeParameter,
    };
  }));

  connection.onSelectionRanges(guarded('selection ranges', [] as SelectionRange[], (a, _uri, p) => p.positions.map((pos) => {
    let out: SelectionRange | undefined;
    for (const r of [...f.selectionRanges(a, toOffset(a, pos))].reverse()) out = { range: toRange(a, r), ...(out ? { parent: out } : {}) };
    return out ?? { range: { start: pos, end: pos } };
  })));

  // Neurons of the open documents (their current text) and of the other .saltus files in the
  // workspace folders (read from disk by WorkspaceFiles), matching the query.
  connection.onWorkspaceSymbol(async (p, token) => {
    const out: SymbolInformation[] = [];
    try {
      const query = typeof p?.query === 'string' ? p.query : '';
      const open = new Set<string>();
      for (const uri of state.openUris()) {
        const c = state.analysisFor(uri);
        if (!c) continue;
        const path = pathOfUri(uri);
        if (path) open.add(path);
        const file = decodeURIComponent(uri.split('/').pop() ?? uri);
        for (const n of neuronSymbols(c.analysis.parse.file)) {
          if (matchesQuery(n.name, query)) out.push({ name: n.name, kind: SymbolKind.Class, location: { uri, range: toRange(c.analysis, n.range) }, containerName: file });
        }
      }
      for (const fileNeurons of await workspace.neurons(open, () => token.isCancellationRequested)) {
        const file = basename(fileNeurons.path);
        for (const n of fileNeurons.neurons) {
          if (matchesQuery(n.name, query)) out.push({ name: n.name, kind: SymbolKind.Class, location: { uri: fileNeurons.uri, range: n.range }, containerName: file });
        }
      }
    } catch (e) {
      state.log(`saltus: workspace symbols failed: ${(e as Error)?.stack ?? String(e)}`);
    }
    return out.slice(0, MAX_WORKSPACE_SYMBOLS);
  });

  // { uri } -> AnalysisSummary, or null for a document that is not open.
  const summary = guarded('analysis summary', null, (a, uri) => f.analysisSummary(a, state.diagnosticsFor(state.analysisFor(uri)!)));
  connection.onRequest('saltus/analysisSummary', (p: { uri?: string } | undefined) => summary({ textDocument: { uri: p?.uri } }));
}

function action(title: string, preferred: boolean, diagnostic: LspDiagnostic, changes: Record<string, TextEdit[]>): CodeAction {
  return { title, kind: CodeActionKind.QuickFix, diagnostics: [diagnostic], isPreferred: preferred, edit: { changes } };
}
